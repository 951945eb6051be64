"""Products that vanish because a residual is the generalized least-squares one.

With B = Xᵀ W X invertible and r = y − X B⁻¹ Xᵀ W y (the residual of the weighted fit),
Xᵀ W r = Xᵀ W y − (Xᵀ W X) B⁻¹ Xᵀ W y = 0 exactly, for any W and any right-hand side y
(the normal equations of weighted least squares; C. R. Rao, *Linear Statistical Inference and
its Applications*, 2nd ed., 1973, §4a.2, from memory). The derivative of a restricted
likelihood carries many terms through r that contain Xᵀ W r or rᵀ Wᵀ X: they are zero at
every point where the value itself can be computed (B must be invertible for r to exist), so
the code generator drops them instead of computing them (often with n × n work).

>>> from gradwright import derive
>>> d = derive("X: (n, p)\\ny: (n,)\\nr = y - X @ solve(X.T @ X, X.T @ y)\\nf = sum(X.T @ r)")
>>> from gradwright import expr as E
>>> E.is_zero(orthogonal_residuals(d.expr))
True
"""

from __future__ import annotations

from .. import expr as E


def _unwrap(e: E.Expr) -> E.Expr:
    while type(e) is E.Named:
        e = e.body
    return e


def factors(e: E.Expr) -> list:
    """The factors of a product, with solve(A, b) read as inv(A) b (Named kept whole)."""
    t = type(e)
    if t is E.MatMul:
        return [f for a in e.args for f in factors(a)]
    if t is E.Solve:
        return [E.Inverse(e.args[0]), *factors(e.args[1])]
    return [e]


def _same(a: E.Expr, b: E.Expr) -> bool:
    if a == b:
        return True
    # a transposed symmetric matrix (or its inverse) is the matrix itself
    a2, b2 = _strip_sym(a), _strip_sym(b)
    return a2 == b2


def _strip_sym(e: E.Expr) -> E.Expr:
    if type(e) is E.Transpose and E.is_symmetric(e.args[0]):
        return e.args[0]
    if type(e) is E.Inverse:
        inner = _strip_sym(e.args[0])
        return e if inner is e.args[0] else E.Inverse(inner)
    return e


def _seq_same(xs, ys) -> bool:
    return len(xs) == len(ys) and all(_same(a, b) for a, b in zip(xs, ys))


def residual_parts(r: E.Expr):
    """(X, W) when r is y − X solve(Xᵀ W X, Xᵀ W y), else None (W a list of factors)."""
    body = _unwrap(r)
    if type(body) is not E.Add or len(body.args) != 2:
        return None
    for y, other in (body.args, reversed(body.args)):
        coef, rest = E.split_coef(other)
        if coef != -1 or rest is None:
            continue
        # a named estimate (beta = solve(B, Xᵀ W y); r = y - X @ beta) is read through
        fs = [g for f in factors(rest) for g in (_estimate(f) or [f])]
        if len(fs) < 4 or type(fs[1]) is not E.Inverse:
            continue
        x, b, xt = fs[0], fs[1].args[0], fs[2]
        if not E.is_matrix_shape(x.shape) or not _same(xt, E.transpose(x)) or fs[-1] != y:
            continue
        w = fs[3:-1]
        if _seq_same(factors(_unwrap(b)), [E.transpose(x), *w, x]):
            return x, w
    return None


def _estimate(f: E.Expr) -> list | None:
    if type(f) is E.Named and type(_unwrap(f)) in (E.Solve, E.MatMul):
        return factors(_unwrap(f))
    return None


def _vanishes(fs: list, residuals: dict) -> bool:
    for i, f in enumerate(fs):
        for r, (x, w) in residuals.items():
            k = len(w)
            if f == r and i >= k + 1:  # ... Xᵀ W r ...
                if _same(fs[i - k - 1], E.transpose(x)) and _seq_same(fs[i - k : i], w):
                    return True
            if f == E.transpose(r) and i + k + 1 < len(fs):  # ... rᵀ Wᵀ X ...
                wt = [E.transpose(a) for a in reversed(w)]
                if _same(fs[i + k + 1], x) and _seq_same(fs[i + 1 : i + k + 1], wt):
                    return True
    return False


def orthogonal_residuals(e: E.Expr) -> E.Expr:
    """e with every product containing Xᵀ W r (r the weighted least-squares residual) as 0."""
    residuals = {}
    for n in E.walk(e):
        if type(n) is E.Named:
            parts = residual_parts(n)
            if parts is not None:
                residuals[n] = parts
    if not residuals:
        return e
    memo: dict = {}

    def go(x: E.Expr) -> E.Expr:
        hit = memo.get(x)
        if hit is not None:
            return hit
        if not x.children or type(x) is E.Named:
            out = x
        else:
            new = [go(c) for c in x.children]
            out = x if all(a is b for a, b in zip(new, x.children)) else E.rebuild_smart(x, new)
            if type(out) is E.MatMul and _vanishes(factors(out), residuals):
                out = E.zero_like(out.shape)
        memo[x] = out
        return out

    return go(e)
