"""Functions that printed results use, so that every printed result can be pasted back.

`unvec(g, r, c)` reshapes a vector of length r*c, column-major, into an (r, c) matrix (the
inverse of `vec`); `kron_contract_left(G, B)` / `kron_contract_right(G, A)` are the adjoints of
`kron(L, B)` / `kron(A, L)` in L: the (m, n) matrix of the traces of the (p, q) blocks of G
against B (resp. the weighted sum of G's blocks with A's entries as weights).
"""

from __future__ import annotations

from collections import Counter

from .. import expr as E
from .registry import register


@register("unvec", 3, 3, raw=True)
def _unvec(reader, node, args, keywords):
    g = reader.tr(args[0], 1)
    rows, cols = reader.dim_arg(args[1]), reader.dim_arg(args[2])
    if g.shape != (rows * cols, None):
        reader.fail_node(
            f"unvec(g, {rows}, {cols}) needs a vector of length {rows * cols}, got a "
            f"{E.describe(g)}",
            args[0],
        )
    return E.unvec(g, rows, cols)


def _dim_quotient(a: E.OptDim, b: E.OptDim) -> E.OptDim | bool:
    """a / b for dims (None is the unit axis), or False when b does not divide a."""
    if b is None:
        return a
    if a is None:
        return False
    left = Counter(a.names)
    left.subtract(Counter(b.names))
    if any(v < 0 for v in left.values()) or a.coef % b.coef:
        return False
    return E.Dim(tuple(sorted(left.elements())), a.coef // b.coef)


def _contract(side: str):
    def build(reader, node, args, keywords):
        g, other = args
        r = _dim_quotient(g.shape[0], other.shape[0])
        c = _dim_quotient(g.shape[1], other.shape[1])
        if r is False or c is False or other.is_scalar:
            reader.fail_node(
                f"kron_contract_{side}(G, B) needs G to be made of blocks the shape of B; got "
                f"a {E.describe(g)} and a {E.describe(other)}",
                node,
            )
        return E.KronContract(g, other, r, c, side)

    return build


register("kron_contract_left", 2, 2)(_contract("left"))
register("kron_contract_right", 2, 2)(_contract("right"))
