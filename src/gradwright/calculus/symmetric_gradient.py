"""Recognizing a gradient that is already symmetric, so that it is not symmetrized again.

The gradient with respect to a symmetric variable is (G + Gᵀ)/2. When G is symmetric as it
stands (often it is, but in a factored form such as Hᵀ (S⁻¹ H − S⁻¹ v vᵀ S⁻¹ H) the palindrome
is hidden), (G + Gᵀ)/2 costs a second product with H for nothing. `symmetric_as_is` expands
G into terms c · F₁ ⋯ Fₖ (without entering definitions) and proves symmetry by pairing every
term with its transpose; it answers False when unsure, which only costs speed.

>>> from gradwright import derive
>>> d = derive("H: (m, n)\\nP: (n, n) spd\\nR: (m, m) spd\\nv: (m,)\\nS = H @ P @ H.T + R\\n"
...            "f = logdet(S) + v @ solve(S, v)", wrt="P")
>>> "H.T" in str(d.gradient("P")) and "/ 2" not in str(d.gradient("P"))
True
"""

from __future__ import annotations

from collections import Counter
from fractions import Fraction

from .. import expr as E

#: terms beyond this many: not examined (the check is quadratic in nothing, but expansion is
#: exponential in nested sums)
MAX_TERMS = 64


class _TooMany(Exception):
    pass


def _terms(e: E.Expr) -> list:
    """e as a list of (coefficient, scalar factors, matrix chain) with sums distributed."""
    t = type(e)
    if t is E.Add:
        out = [term for a in e.args for term in _terms(a)]
    elif t is E.Mul and not e.is_scalar and len(e.array_factors) == 1:
        coef, scalars = Fraction(1), []
        for s in e.scalar_factors:
            if type(s) is E.Const:
                coef *= s.value
            else:
                scalars.append(s)
        out = [(c * coef, (*sc, *scalars), ch) for c, sc, ch in _terms(e.array_factors[0])]
    elif t is E.MatMul or t is E.Solve:
        parts = [
            _terms(f) for f in (e.args if t is E.MatMul else (E.Inverse(e.args[0]), e.args[1]))
        ]
        out = [(Fraction(1), (), ())]
        for part in parts:
            out = [
                (c1 * c2, s1 + s2, _join(ch1, ch2)) for c1, s1, ch1 in out for c2, s2, ch2 in part
            ]
            if len(out) > MAX_TERMS:
                raise _TooMany
    elif t is E.Transpose and type(e.args[0]) is not E.Symbol:
        out = [(c, s, _flip(ch)) for c, s, ch in _terms(e.args[0])]
    elif e.is_scalar:
        out = [(Fraction(1), (e,), ())]
    else:
        out = [(Fraction(1), (), (e,))]
    if len(out) > MAX_TERMS:
        raise _TooMany
    return out


def _join(a: tuple, b: tuple) -> tuple:
    """The chain a b with inv(S) S and identities cancelled (through the smart product)."""
    if not a or not b:
        return a + b
    m = E.matmul(*a, *b)
    if type(m) is E.Identity:
        return ()
    return m.args if type(m) is E.MatMul else (m,)


def _flip(chain: tuple) -> tuple:
    return tuple(E.transpose(f) for f in reversed(chain))


def _key(coef, scalars, chain):
    return (coef, tuple(sorted(scalars, key=E.Expr.key)), chain)


def symmetric_as_is(g: E.Expr) -> bool:
    """True when g is provably symmetric by pairing its expanded terms with their transposes."""
    if not E.is_matrix_shape(g.shape) or g.shape[0] != g.shape[1]:
        return False
    if E.is_symmetric(g):
        return True
    try:
        terms = _terms(g)
    except _TooMany:
        return False
    if any(not ch for _c, _s, ch in terms):
        return False
    have = Counter(_key(*t) for t in terms)
    flipped = Counter(_key(c, s, _flip(ch)) for c, s, ch in terms)
    return have == flipped
