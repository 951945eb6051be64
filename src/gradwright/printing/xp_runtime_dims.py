"""Dims given as products (`m*n`): bound after the plain dims, in both argument checks.

One function, copied as text into the NumPy module's `_gw_check` helper (printing/checks.py)
and joined into the array-API runtime (a piece of `RUNTIME_PIECES`): self-contained, no imports.
"""


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
