"""The Jacobian d vec(F) / d vec(X)^T written compactly with Kronecker products (for display).

Rules: vec(A dX B) = (B^T kron A) vec(dX), vec(dX^T) = K vec(dX), vec(M * dX) = diagm(vec M) vec dX.
"""

from __future__ import annotations

from .. import expr as E
from ..errors import NotSupportedError


def _size(shape) -> E.OptDim:
    return E.shape_size(shape)


def _ident(d: E.OptDim) -> E.Expr | None:
    return None if d is None else E.Identity(d)


def kronecker_form(linear: E.Expr, var: E.Symbol) -> E.Expr:
    """J with vec(dF) = J vec(dX) for the linear expression dF in dX (column-major vec)."""
    memo: dict = {}

    def J(node: E.Expr) -> E.Expr:
        if not node.has_differential:
            return E.Zero((_size(node.shape), _size(var.shape)))
        hit = memo.get(node)
        if hit is not None:
            return hit
        out = _rule(node, J, var)
        memo[node] = out
        return out

    return J(linear)


def _lmul(a: E.Expr | None, j: E.Expr) -> E.Expr:
    return j if a is None else E.matmul(a, j)


def _rule(node, J, var):
    t = type(node)
    size = _size(node.shape)
    if t is E.Differential:
        if node.symbol.name != var.name:
            return E.Zero((size, _size(var.shape)))
        n = _size(var.shape)
        return E.ONE if n is None else E.Identity(n)
    if t is E.Add:
        parts = []
        for term in node.args:
            if not term.has_differential:
                continue
            jt = J(term)
            if term.is_scalar and not node.is_scalar:
                jt = E.matmul(E.Ones((size, None)), jt)
            parts.append(jt)
        return E.add(*parts)
    if t is E.Mul:
        fs = node.args
        i = next(k for k, f in enumerate(fs) if f.has_differential)
        others = fs[:i] + fs[i + 1 :]
        p = E.mul(*others) if others else E.ONE
        jl = J(fs[i])
        if p.is_scalar:
            return E.mul(p, jl)
        if fs[i].is_scalar:
            return E.matmul(E.vec(p), jl)
        return E.matmul(E.diagm(E.vec(p)), jl)
    if t is E.MatMul:
        fs = node.args
        i = next(k for k, f in enumerate(fs) if f.has_differential)
        a = E.matmul(*fs[:i]) if i > 0 else None
        b = E.matmul(*fs[i + 1 :]) if i + 1 < len(fs) else None
        r, c = fs[i].shape
        left = a if a is not None else _ident(r)
        bt = E.transpose(b) if b is not None else _ident(c)
        if left is None and bt is None:
            op = None
        elif left is None:
            op = bt
        elif bt is None:
            op = left
        else:
            op = E.kron(bt, left)
        return _lmul(op, J(fs[i]))
    if t is E.Transpose:
        a = node.args[0]
        if E.is_matrix_shape(a.shape):
            return E.matmul(E.Commutation(a.shape[0], a.shape[1]), J(a))
        return J(a)
    if t is E.Trace:
        a = node.args[0]
        return E.matmul(E.transpose(E.vec(E.Identity(a.shape[0]))), J(a))
    if t is E.Sum:
        a = node.args[0]
        return E.matmul(E.transpose(E.Ones((_size(a.shape), None))), J(a))
    if t in (E.Vec, E.Unvec):
        return J(node.args[0])
    if t is E.Solve:
        a, b = node.args
        c = b.shape[1]
        inv = E.inverse(a)
        op = inv if c is None else E.kron(E.Identity(c), inv)
        return E.matmul(op, J(b))
    operator = getattr(node, "kronecker_operator", None)  # node families in their own modules
    if operator is not None:
        return E.matmul(operator(), J(node.args[-1]))
    raise NotSupportedError(
        f"not supported yet: a compact Kronecker form through {t.__name__.lower()} "
        "(the dense Jacobian and the JVP/VJP functions are available)"
    )
