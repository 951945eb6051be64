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


class LeastSquares(E.Expr):
    """argmin_X ‖A X − B‖ (the minimum-norm one); a node of the code generator only."""

    __slots__ = ()

    def _infer_shape(self):
        a, b = self.args
        return (a.shape[1], b.shape[1])


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
