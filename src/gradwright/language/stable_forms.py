"""Stable forms recognized as a formula is read: what NumPy would overflow on, computed stably.

`log(1 + exp(x))` is `softplus(x)`, `log(sum(exp(x)))` is `logsumexp(x)`,
`log(exp(Z) @ ones(k))` (and `log(sum(exp(Z), axis=1))`) is `logsumexp(Z, axis=1)`, and
`log(softmax(x))` is `log_softmax(x)`, `log(sigmoid(x))` is `-softplus(-x)` and
`log(1 - sigmoid(x))` is `-softplus(x)`. The values are equal (the same function of the same
arrays); the recognized form is max-shifted in the generated value, gradient and HVP, where the
written one overflows to inf at logits of a few hundred.
"""

from __future__ import annotations

from .. import expr as E
from .. import expr_axis as X


def _exp_arg(e: E.Expr) -> E.Expr | None:
    """x when e is exp(x) (also through a definition `U = exp(x)`), else None."""
    if type(e) is E.Named:
        e = e.body
    if type(e) is E.Func and e.name == "exp":
        return e.arg
    return None


def _is_ones_col(e: E.Expr) -> bool:
    return type(e) is E.Ones and E.is_col(e.shape)


def _is_ones_row(e: E.Expr) -> bool:
    return type(e) is E.Ones and E.is_row(e.shape)


def _log_of(a: E.Expr) -> E.Expr | None:
    """The stable form of log(a), or None when a has none."""
    if type(a) is E.Add and len(a.args) == 2:
        one = [t for t in a.args if type(t) is E.Const and t.value == 1]
        rest = [t for t in a.args if not (type(t) is E.Const and t.value == 1)]
        if len(one) == 1 and len(rest) == 1:
            x = _exp_arg(rest[0])
            if x is not None:
                return E.Func("softplus", x)
    if type(a) is E.Func and a.name == "sigmoid":  # log σ(x) = -softplus(-x)
        return E.neg(E.Func("softplus", E.neg(a.arg)))
    if type(a) is E.Add and len(a.args) == 2 and E.ONE in a.args:  # log(1 - σ(x))
        c, rest = E.split_coef(a.args[1] if a.args[0] == E.ONE else a.args[0])
        if c == -1 and type(rest) is E.Func and rest.name == "sigmoid":
            return E.neg(E.Func("softplus", rest.arg))
    if type(a) is E.Sum:
        x = _exp_arg(a.args[0])
        if x is not None and not x.is_scalar:
            return E.LogSumExp(x)
    if type(a) is E.Softmax:
        return X.AxisSoftmax("log_softmax", a.args[0], None)
    if type(a) is X.AxisSoftmax and a.args[0] == "softmax":
        return X.AxisSoftmax("log_softmax", a.args[1], a.args[2])
    if type(a) is E.MatMul and len(a.args) == 2:
        left, right = a.args
        # exp(Z) @ ones(k): the sum of each row; ones(n) @ exp(Z) (held as exp(Z)ᵀ 1): columns
        if _is_ones_col(right):
            x = _exp_arg(left)
            if x is not None and E.is_matrix_shape(x.shape):
                return X.AxisReduce("logsumexp", x, 1, False)
            if type(left) is E.Transpose:
                x = _exp_arg(left.args[0])
                if x is not None and E.is_matrix_shape(x.shape):
                    return X.AxisReduce("logsumexp", x, 0, False)
        if _is_ones_row(left) and a.is_scalar:
            x = _exp_arg(right)
            if x is not None and E.is_col(x.shape):
                return E.LogSumExp(x)
    return None


def entrywise(name: str, a: E.Expr) -> E.Expr:
    """The entrywise function `name` of `a`, in its stable form where one is recognized."""
    if name == "log":
        stable = _log_of(a)
        if stable is not None:
            return stable
    return E.Func(name, a)
