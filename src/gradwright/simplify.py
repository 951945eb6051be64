"""Rewrites to a compact canonical form: transposes at the leaves, inverses instead of solves,
identities and zeros gone, like terms collected, common matrix factors pulled out of sums.

Every rewrite keeps values equal (tested at random points).
"""

from __future__ import annotations

from . import expr as E
from .standard_forms import standard_form

__all__ = ["simplify", "expand"]


def simplify(e: E.Expr) -> E.Expr:
    """Canonical compact form of e.

    >>> from gradwright.language import parse_block
    >>> from gradwright.printing import text
    >>> b = parse_block("X: (n, p)\\nW: (p, k)\\nY: (n, k)\\nf = X.T @ X @ W - X.T @ Y")
    >>> text(simplify(b.expr))
    'X.T @ (X @ W - Y)'
    """
    memo: dict = {}

    def go(x: E.Expr) -> E.Expr:
        hit = memo.get(x)
        if hit is not None:
            return hit
        kids = x.children
        if type(x) is E.Named:
            out = x  # definitions are kept by name; their bodies were read canonical
        elif not kids:
            out = x
        else:
            new = [go(c) for c in kids]
            if type(x) is E.Solve:
                out = E.matmul(E.inverse(new[0]), new[1])
            else:
                out = E.rebuild_smart(x, new)
            out = standard_form(out)
            if type(out) is E.Add:
                out = _factor_common(out)
        memo[x] = out
        return out

    return go(e)


def _chain(term: E.Expr):
    """term = coef * (scalars) * chain; returns (scalar part or None, chain factors) or None."""
    scalars: tuple = ()
    core = term
    if type(term) is E.Mul:
        scalars = term.scalar_factors
        arrays = term.array_factors
        if len(arrays) != 1:
            return None
        core = arrays[0]
    if core.is_scalar:
        return None
    factors = core.args if type(core) is E.MatMul else (core,)
    return scalars, factors


def _factor_common(s: E.Add) -> E.Expr:
    """A B + A C -> A (B + C) and B A + C A -> (B + C) A when every term shares the factor."""
    parts = [_chain(t) for t in s.args]
    if any(p is None for p in parts) or len(parts) < 2:
        return s
    for side in (0, -1):
        first = parts[0][1][side]
        if not all(len(p[1]) > 1 and p[1][side] == first for p in parts):
            continue
        rests = []
        for scalars, factors in parts:
            rest = factors[1:] if side == 0 else factors[:-1]
            rests.append(E.mul(*scalars, E.matmul(*rest)) if scalars else E.matmul(*rest))
        inner = _factor_common_or_same(E.add(*rests))
        return E.matmul(first, inner) if side == 0 else E.matmul(inner, first)
    return s


def _factor_common_or_same(e: E.Expr) -> E.Expr:
    return _factor_common(e) if type(e) is E.Add else e


def expand(e: E.Expr) -> E.Expr:
    """Distribute products over sums (used by the stationary-point solver and cost model)."""
    memo: dict = {}

    def go(x: E.Expr) -> E.Expr:
        hit = memo.get(x)
        if hit is not None:
            return hit
        if type(x) is E.Named:
            out = go(x.body)
        elif not x.children:
            out = x
        else:
            new = [go(c) for c in x.children]
            t = type(x)
            if t in (E.MatMul, E.Mul) and any(type(c) is E.Add for c in new):
                i = next(k for k, c in enumerate(new) if type(c) is E.Add)
                build = E.matmul if t is E.MatMul else E.mul
                out = E.add(*(go(build(*new[:i], term, *new[i + 1 :])) for term in new[i].args))
            elif t is E.Transpose and type(new[0]) is E.Add:
                out = E.add(*(go(E.transpose(a)) for a in new[0].args))
            elif t is E.Solve:
                out = go(E.matmul(E.inverse(new[0]), new[1]))
            else:
                out = E.rebuild_smart(x, new)
        memo[x] = out
        return out

    return go(e)
