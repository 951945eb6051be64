"""Fitting a constrained variable through an unconstrained one, without rewriting the block:
an spd matrix S through its Cholesky factor (S = S_chol S_cholᵀ, S_chol `lower`), a positive
variable s through its logarithm (s = exp(log_s)).

The block is rewritten as the user would have written it: the declaration of S becomes the
declaration of the new variable, followed by the definition of S, so the derivation shows the
chain rule through that definition as a step.
"""

from __future__ import annotations

from .errors import FormulaError

__all__ = ["KINDS", "rewrite"]

#: how -> (name of the new variable, the definition of the old one, in words)
KINDS = {
    "cholesky": "{name}_chol",
    "log": "log_{name}",
}


def _shape_text(dims) -> str:
    dims = [str(d) for d in dims]
    if not dims:
        return "()"
    return "(" + ", ".join(dims) + ("," if len(dims) == 1 else "") + ")"


def _block_text(text: str, shapes: dict) -> str:
    """One expression with a shapes mapping -> the same as a block (target `f`)."""
    from .language import parse_shape_spec

    lines = []
    for name, spec in shapes.items():
        dims, words = parse_shape_spec(spec)
        lines.append(f"{name}: {_shape_text(dims)} {' '.join(words)}".rstrip())
    return "\n".join(lines + [f"f = {text.strip()}"])


def rewrite(text: str, shapes: dict | None, wrt: list, how: dict) -> tuple[str, list]:
    """The block with each variable in `how` fitted through its new variable; the new wrt.

    >>> text, wrt = rewrite("S: (n, n) spd\\nf = logdet(S)", None, ["S"], {"S": "cholesky"})
    >>> print(text)
    S_chol: (n, n) lower  # S = S_chol S_chol.T
    S = S_chol @ S_chol.T
    f = logdet(S)
    >>> wrt
    ['S_chol']
    """
    from .language import parse_block

    if not isinstance(how, dict):
        raise FormulaError(
            "parameterize must map variable names to 'cholesky' or 'log', like "
            "{'S': 'cholesky', 'sigma': 'log'}"
        )
    if shapes is not None:
        text = _block_text(text, shapes)
    block = parse_block(text)
    lines = text.split("\n")
    taken = set(block.declarations) | set(block.definitions)
    new_wrt = list(wrt)
    replaced: dict[int, list[str]] = {}
    for name, kind in how.items():
        if kind not in KINDS:
            raise FormulaError(
                f"unknown parameterization {kind!r} for {name}: use 'cholesky' (an spd matrix "
                "through its Cholesky factor) or 'log' (a positive variable through its logarithm)"
            )
        if name not in wrt:
            raise FormulaError(
                f"{name} is parameterized but not a variable: name it in wrt as well"
            )
        sym = block.declarations[name]
        words = set(sym.structure)
        dims = [str(d) for d in sym.shape if d is not None]
        new = KINDS[kind].format(name=name)
        while new in taken:
            new += "_"
        taken.add(new)
        if kind == "cholesky":
            if len(dims) != 2 or dims[0] != dims[1] or not (words & {"spd", "symmetric"}):
                raise FormulaError(
                    f"{name} is fitted through a Cholesky factor only if it is declared a "
                    f"square spd (or symmetric) matrix, like `{name}: (n, n) spd`"
                )
            decl = f"{new}: {_shape_text(dims)} lower  # {name} = {new} {new}.T"
            definition = f"{name} = {new} @ {new}.T"
        else:
            if words & {"spd", "symmetric", "diagonal", "orthogonal", "lower"}:
                raise FormulaError(
                    f"{name} is fitted through its logarithm entry by entry, which keeps no "
                    "matrix structure: declare it without structure words (`positive` is fine)"
                )
            decl = f"{new}: {_shape_text(dims)}  # {name} = exp({new})"
            definition = f"{name} = exp({new})"
        line = block.lines[name]
        replaced[line] = [decl, definition]
        new_wrt[new_wrt.index(name)] = new
    out = []
    for i, line in enumerate(lines, start=1):
        out.extend(replaced.get(i, [line]))
    return "\n".join(out), new_wrt
