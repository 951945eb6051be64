"""Rules and adjoints for constant indexing and for the numbers of the language (dims, π).

Indexing is linear; its adjoint scatters the cotangent into zeros through selection matrices
(`eye(n)[a:b].T @ G`), which the formula language can read back.
"""

from __future__ import annotations

from .. import expr as E
from .adjoint import adjoint_rule
from .rules import RULES, Rule, rule

for _cls in (E.SizeOf, E.Pi):
    RULES[_cls] = Rule("constants have zero differential", True, lambda x, d: E.ZERO)


@rule(E.Index, "indexing is linear", structural=True)
def _index(x, d):
    a, rows, cols = x.args
    return E.index(d(a), rows, cols)


def _placement(size: E.Dim, sel) -> E.Expr:
    """P with P @ v[sel] in place inside zeros of length `size`: Sᵀ, or the unit vector e_i."""
    s = E.selection(size, sel)
    return s if sel[0] == "at" else E.transpose(s)


def scatter(g: E.Expr, shape, rows, cols) -> E.Expr:
    """The array of `shape` that is zero except `g` at [rows, cols]: the adjoint of indexing.

    >>> n = E.Dim.of("n")
    >>> g = E.Symbol("g", E.SCALAR)
    >>> scatter(g, (n, None), ("at", 0), None).shape == (n, None)
    True
    """
    out = g
    if rows is not None and rows != E.FULL:
        p = _placement(shape[0], rows)
        out = E.mul(out, p) if out.is_scalar else E.matmul(p, out)
    if cols is not None and cols != E.FULL:
        q = E.transpose(_placement(shape[1], cols))
        out = E.mul(out, q) if out.is_scalar else E.matmul(out, q)
    return out


@adjoint_rule(E.Index)
def _index_adjoint(node, g):
    a, rows, cols = node.args
    return [(a, scatter(g, a.shape, rows, cols))]
