"""Dims bound by the arguments' axes, and dims given as products (`m*n`) after them: the
same code in both argument checks.

One function, copied as text into the NumPy module's `_gw_check` helper (printing/checks.py)
and joined into the array-API runtime (a piece of `RUNTIME_PIECES`): self-contained, no imports.
"""


def _gw_bind_axis(name, word, d, n, dims, owner, products):
    """Axis `word` of argument `name` has `n` entries where its declaration says `d`: check a
    literal size, bind or check a named dim, or keep a product for _gw_bind_products."""
    if isinstance(d, int):
        if n != d:
            raise ValueError(f"{name} has {n} {word} but its declaration says {d}")
    elif "*" in d:
        products.append((name, word, d, n))
    elif d in dims:
        if dims[d] != n:
            other, other_word = owner[d]
            raise ValueError(
                f"{name} has {n} {word} but {other} has {d} = {dims[d]}"
                + (f" {other_word}" if other_word != word else "")
            )
    else:
        dims[d], owner[d] = n, (name, word)


def _gw_bind_products(products, dims, owner):
    """Check each (name, word, "m*n", size) against the dims bound so far, or infer the one
    unknown factor of a product from its size; what stays unknown is reported where needed."""
    for _ in range(len(products)):  # after every plain dim is bound; a lone unknown is inferred
        pending = []
        for name, word, d, n in products:
            want, unknown = 1, []
            for part in d.split("*"):
                if part.isdigit() or part in dims:
                    want *= int(part) if part.isdigit() else dims[part]
                else:
                    unknown.append(part)
            if not unknown:
                if n != want:
                    raise ValueError(f"{name} has {n} {word} but {d} = {want}")
            elif len(unknown) == 1 and n % want == 0:
                dims[unknown[0]], owner[unknown[0]] = n // want, (name, word)
            else:
                pending.append((name, word, d, n))
        if len(pending) == len(products):
            break  # what stays unknown is reported where a size is needed
        products = pending
