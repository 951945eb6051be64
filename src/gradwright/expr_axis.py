"""Nodes for reductions over an axis, row-/column-wise softmax and the binary extremum.

Axes are *internal*: 0 reduces the rows of a matrix (or the entries of a column vector), 1 the
columns of a matrix; None reduces every entry. The parser maps NumPy's axis numbers (negative
ones too) onto these. Sums and means over an axis need no node: they are products with a ones
vector (`X 1`, `1ᵀ X`), see `axis_sum`.
"""

from __future__ import annotations

from fractions import Fraction

from .errors import ShapeError
from .expr import (
    SCALAR,
    Const,
    Dim,
    Expr,
    Ones,
    SizeOf,
    _common_shape,
    describe,
    is_col,
    is_matrix_shape,
    is_scalar_shape,
    matmul,
    mul,
    power,
    summation,
    transpose,
)

ONE_DIM = Dim.of(1)

#: the reductions held by AxisReduce (sum and mean are products with ones, norm is built)
REDUCERS = ("max", "min", "logsumexp")


def _check_axis_operand(a: Expr, axis, what: str) -> None:
    if not (is_matrix_shape(a.shape) or is_col(a.shape)):
        raise ShapeError(f"{what} needs a vector or a matrix, got a {describe(a)}")
    if axis not in (None, 0, 1):
        raise ShapeError(f"{what}: axis must be None, 0 or 1, got {axis!r}")
    if axis == 1 and not is_matrix_shape(a.shape):
        raise ShapeError(f"{what}: axis 1 is out of bounds for a {describe(a)}")


def reduced_shape(shape, axis, keepdims: bool):
    """NumPy's result shape (held internally) of reducing `shape` over `axis`."""
    r, c = shape
    if c is None:  # a column vector: its one axis
        return (ONE_DIM, None) if keepdims else SCALAR
    if axis is None:
        return (ONE_DIM, ONE_DIM) if keepdims else SCALAR
    if axis == 0:
        return (ONE_DIM, c) if keepdims else (c, None)
    return (r, ONE_DIM) if keepdims else (r, None)


class AxisReduce(Expr):
    """max, min or logsumexp of an array over an axis: args (op, A, axis, keepdims).

    >>> from gradwright.expr import Symbol, Dim
    >>> AxisReduce("max", Symbol("Z", (Dim.of("n"), Dim.of("k"))), 1, False).shape[1] is None
    True
    """

    __slots__ = ()

    def _infer_shape(self):
        op, a, axis, keepdims = self.args
        if op not in REDUCERS:
            raise ShapeError(f"unknown reduction {op}")
        _check_axis_operand(a, axis, op)
        return reduced_shape(a.shape, axis, bool(keepdims))


class TieWeights(Expr):
    """The subgradient weights of max/min over an axis: args (op, A, axis), shaped like A.

    Each entry that attains the extreme of its slice gets 1 / (number of entries attaining it),
    the others 0 — the tie rule of JAX's `jnp.max`/`jnp.min` (checked in the tests).
    """

    __slots__ = ()

    def _infer_shape(self):
        op, a, axis = self.args
        if op not in ("max", "min"):
            raise ShapeError(f"unknown reduction {op}")
        _check_axis_operand(a, axis, op)
        return a.shape


class AxisSoftmax(Expr):
    """softmax or log_softmax over an axis: args (kind, A, axis), shaped like A."""

    __slots__ = ()

    def _infer_shape(self):
        kind, a, axis = self.args
        if kind not in ("softmax", "log_softmax"):
            raise ShapeError(f"unknown function {kind}")
        _check_axis_operand(a, axis, kind)
        return a.shape


class Extremum(Expr):
    """maximum(A, B) or minimum(A, B), entrywise: args (op, A, B); a scalar meets every entry."""

    __slots__ = ()

    def _infer_shape(self):
        op, a, b = self.args
        if op not in ("maximum", "minimum"):
            raise ShapeError(f"unknown function {op}")
        return _common_shape((a, b), f"take the entrywise {op} of")


AXIS_NODES = (AxisReduce, TieWeights, AxisSoftmax, Extremum)


# ---------------------------------------------------------------------------------------------
# linear building blocks: sums over an axis and their adjoint, the broadcast back
# ---------------------------------------------------------------------------------------------


def axis_sum(x: Expr, axis, keepdims: bool = False) -> Expr:
    """NumPy's `sum(x, axis, keepdims)` as products with ones: `X 1`, `1ᵀ X`, `1ᵀ X 1`."""
    r, c = x.shape
    if is_scalar_shape(x.shape):
        return x
    if c is None:
        return matmul(Ones((ONE_DIM, r)), x) if keepdims else summation(x)
    if axis is None:
        return matmul(Ones((ONE_DIM, r)), x, Ones((c, ONE_DIM))) if keepdims else summation(x)
    if axis == 0:
        return matmul(Ones((ONE_DIM, r)), x) if keepdims else matmul(transpose(x), Ones((r, None)))
    return matmul(x, Ones((c, ONE_DIM if keepdims else None)))


def broadcast_back(v: Expr, shape, axis) -> Expr:
    """A reduced value (no kept dims) repeated along `axis` to `shape`: `v 1ᵀ` or `1 vᵀ`."""
    r, c = shape
    if is_scalar_shape(v.shape):
        return mul(v, Ones(shape)) if not is_scalar_shape(shape) else v
    if axis == 1:
        return matmul(v, transpose(Ones((c, None))))
    return matmul(Ones((r, None)), transpose(v))


def count(shape, axis) -> Expr:
    """The number of entries a reduction over `axis` combines (for `mean`)."""
    r, c = shape
    dims = [d for d in ((r, c) if axis is None else ((r,) if axis == 0 else (c,))) if d is not None]
    if all(d.is_literal for d in dims):
        total = 1
        for d in dims:
            total *= d.coef
        return Const(total)
    size = dims[0]
    for d in dims[1:]:
        size = size * d
    return SizeOf(size)  # the dims as a number: `n`, `k*n`


def axis_mean(x: Expr, axis, keepdims: bool = False) -> Expr:
    n = count(x.shape, None if x.shape[1] is None else axis)
    return mul(power(n, Const(-1)) if type(n) is not Const else Const(Fraction(1) / n.value),
               axis_sum(x, axis, keepdims))  # fmt: skip
