"""Entrywise nodes (powers and named functions) and the reductions to a scalar (sum, norm,
logsumexp) with softmax; a part of `expr`."""

from __future__ import annotations

from .entrywise import EXTRA_ENTRYWISE
from .errors import ShapeError
from .expr_core import Expr
from .expr_shapes import SCALAR, describe, is_col


class Power(Expr):
    """Entrywise power a ** k with a scalar exponent k."""

    __slots__ = ()

    def _infer_shape(self):
        if not self.args[1].is_scalar:
            raise ShapeError(f"the exponent of ** must be a scalar, got a {describe(self.args[1])}")
        return self.args[0].shape


ELEMENTWISE = ("exp", "log", "sqrt", "sin", "cos", "tanh", "sigmoid", "softplus") + tuple(
    EXTRA_ENTRYWISE
)


class Func(Expr):
    """An entrywise function: Func('exp', A)."""

    __slots__ = ()

    def _infer_shape(self):
        if self.args[0] not in ELEMENTWISE:
            raise ShapeError(f"unknown entrywise function {self.args[0]}")
        return self.args[1].shape

    @property
    def name(self) -> str:
        return self.args[0]

    @property
    def arg(self) -> Expr:
        return self.args[1]


class Sum(Expr):
    __slots__ = ()

    def _infer_shape(self):
        return SCALAR


class Norm(Expr):
    """Euclidean norm of a vector, Frobenius norm of a matrix."""

    __slots__ = ()

    def _infer_shape(self):
        return SCALAR


class LogSumExp(Expr):
    __slots__ = ()

    def _infer_shape(self):
        return SCALAR


class Softmax(Expr):
    __slots__ = ()

    def _infer_shape(self):
        x = self.args[0]
        if not is_col(x.shape):
            raise ShapeError(f"softmax needs a vector, got a {describe(x)}")
        return x.shape
