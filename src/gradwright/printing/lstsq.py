"""Least-squares-shaped solves through an orthogonal factorization, not the normal equations.

solve(AᵀA, AᵀB) is the least-squares solution argmin ‖A X − B‖; formed as written it squares
the condition number of A (G. H. Golub and C. F. Van Loan, *Matrix Computations*, 4th ed.,
2013, §5.3.7 and §5.3.8, from memory). `least_squares_form` rewrites it into a
`LeastSquares(A, B)` node of the code generator, printed as NumPy's SVD-based `lstsq`.

>>> from gradwright import derive
>>> d = derive("X: (n, p)\\ny: (n,)\\nb: (p,)\\nf = sum((X @ b - y)**2)", wrt="b")
>>> "_gw_lstsq(X, y" in d.stationary_point("b").source()
True
"""

from __future__ import annotations

from .. import expr as E
from .gls import factors
from .structure import cholesky_ok


class LeastSquares(E.Expr):
    """argmin_X ‖A X − B‖ (the minimum-norm one); a node of the code generator only."""

    __slots__ = ()

    def _infer_shape(self):
        a, b = self.args
        return (a.shape[1], b.shape[1])


class Whiten(E.Expr):
    """U⁻ᴴ B for the Cholesky factor V = Uᴴ U (so Bᵀ V⁻¹ B = (U⁻ᴴB)ᴴ(U⁻ᴴB)); code generator only."""

    __slots__ = ()

    def _infer_shape(self):
        return self.args[1].shape


class Colour(E.Expr):
    """U B for the Cholesky factor W = Uᴴ U (so Bᵀ W B = (UB)ᴴ(UB)); code generator only."""

    __slots__ = ()

    def _infer_shape(self):
        return self.args[1].shape


def _unwrap(e: E.Expr) -> E.Expr:
    return e.body if type(e) is E.Named else e


def least_squares_form(e: E.Expr) -> E.Expr:
    """Every solve(AᵀA, AᵀB) in e as LeastSquares(A, B)."""
    memo: dict = {}

    def go(x: E.Expr) -> E.Expr:
        hit = memo.get(x)
        if hit is not None:
            return hit
        if not x.children:
            out = x
        elif type(x) is E.Named:
            out = E.Named(x.name, go(x.body))
        else:
            new = [go(c) for c in x.children]
            out = x if all(a is b for a, b in zip(new, x.children)) else E.rebuild_smart(x, new)
            if type(out) is E.Solve:
                out = _rewrite(out)
        memo[x] = out
        return out

    return go(e)


def _rewrite(s: E.Solve) -> E.Expr:
    gram, rhs = _unwrap(s.args[0]), s.args[1]
    weighted = _weighted(gram, rhs)
    if weighted is not None:
        return weighted
    if type(gram) is not E.MatMul or len(gram.args) != 2:
        return s
    at, a = gram.args
    if at != E.transpose(a) or not E.is_matrix_shape(a.shape):
        return s
    if type(rhs) is E.MatMul and rhs.args[0] == at:
        rest = rhs.args[1:]
        b = rest[0] if len(rest) == 1 else E.matmul(*rest)
        return LeastSquares(a, b)
    return s


def _weighted(gram: E.Expr, rhs: E.Expr) -> E.Expr | None:
    """solve(Aᵀ V⁻¹ A, Aᵀ V⁻¹ B) as lstsq(U⁻ᴴA, U⁻ᴴB) with V = UᴴU (generalized least squares
    by whitening: Golub and Van Loan, §6.1, from memory); solve(Aᵀ W A, Aᵀ W B) with W spd as
    lstsq(UA, UB). V or W must be factored by Cholesky (known spd); None otherwise."""
    fs, rs = factors(gram), factors(rhs)
    if len(fs) != 3 or len(rs) < 3:
        return None
    at, w, a = fs
    if at != E.transpose(a) or not E.is_matrix_shape(a.shape) or rs[0] != at or rs[1] != w:
        return None
    b = rs[2] if len(rs) == 3 else E.matmul(*rs[2:])
    if type(w) is E.Inverse and cholesky_ok(w.args[0]):
        return LeastSquares(Whiten(w.args[0], a), Whiten(w.args[0], b))
    if type(w) is not E.Inverse and cholesky_ok(w):
        return LeastSquares(Colour(w, a), Colour(w, b))
    return None
