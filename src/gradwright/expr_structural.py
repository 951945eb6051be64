"""Structural nodes: trace, determinants, inverse and solve, Kronecker products, vec and its
inverse, diagonals, the lower triangle, matrix powers and constant indexing; a part of `expr`."""

from __future__ import annotations

from .errors import ShapeError
from .expr_core import Expr
from .expr_shapes import SCALAR, Dim, OptDim, describe, dim_mul, is_col, is_matrix_shape, shape_size

# --- unary and others ------------------------------------------------------------------------


def _need_square(a: Expr, what: str):
    r, c = a.shape
    if r is None or c is None or r != c:
        raise ShapeError(f"{what} needs a square matrix, got a {describe(a)}")


class Trace(Expr):
    __slots__ = ()

    def _infer_shape(self):
        _need_square(self.args[0], "trace")
        return SCALAR


class Det(Expr):
    __slots__ = ()

    def _infer_shape(self):
        _need_square(self.args[0], "det")
        return SCALAR


class LogDet(Expr):
    """log |det A|."""

    __slots__ = ()

    def _infer_shape(self):
        _need_square(self.args[0], "logdet")
        return SCALAR


class Inverse(Expr):
    __slots__ = ()

    def _infer_shape(self):
        _need_square(self.args[0], "inv")
        return self.args[0].shape


class Solve(Expr):
    """solve(A, B) = A^{-1} B."""

    __slots__ = ()

    def _infer_shape(self):
        a, b = self.args
        _need_square(a, "solve")
        if b.shape[0] != a.shape[0]:
            raise ShapeError(
                f"cannot solve with a {describe(a)} and a right-hand side {describe(b)}: "
                f"{a.shape[0]} rows against {'1' if b.shape[0] is None else b.shape[0]}"
            )
        return b.shape


class Kron(Expr):
    __slots__ = ()

    def _infer_shape(self):
        a, b = self.args
        if a.is_scalar or b.is_scalar:
            raise ShapeError("kron needs two arrays; use * for a scalar multiple")
        return (dim_mul(a.shape[0], b.shape[0]), dim_mul(a.shape[1], b.shape[1]))


class Vec(Expr):
    __slots__ = ()

    def _infer_shape(self):
        a = self.args[0]
        if a.is_scalar:
            raise ShapeError("vec needs an array, got a scalar")
        return (shape_size(a.shape), None)


class Unvec(Expr):
    """The inverse of vec: a column of length r*c reshaped (column-major) to (r, c)."""

    __slots__ = ()

    def _infer_shape(self):
        g, r, c = self.args
        if g.shape != (dim_mul(r, c), None):
            raise ShapeError("unvec size mismatch")
        return (r, c)


class Diag(Expr):
    """The diagonal of a square matrix as a vector."""

    __slots__ = ()

    def _infer_shape(self):
        _need_square(self.args[0], "diag")
        return (self.args[0].shape[0], None)


class Diagm(Expr):
    """The diagonal matrix with a vector on its diagonal."""

    __slots__ = ()

    def _infer_shape(self):
        x = self.args[0]
        if not is_col(x.shape):
            raise ShapeError(f"diagm needs a vector, got a {describe(x)}")
        return (x.shape[0], x.shape[0])


class Tril(Expr):
    """The lower triangle of a matrix, diagonal included (NumPy's `tril`); the rest zero."""

    __slots__ = ()

    def _infer_shape(self):
        a = self.args[0]
        if not is_matrix_shape(a.shape):
            raise ShapeError(f"tril needs a matrix, got a {describe(a)}")
        return a.shape


class MatPow(Expr):
    """A ** k as a matrix power, k a non-negative integer."""

    __slots__ = ()

    def _infer_shape(self):
        _need_square(self.args[0], "mpow")
        if not isinstance(self.args[1], int) or self.args[1] < 0:
            raise ShapeError("mpow needs a non-negative integer power")
        return self.args[0].shape


class KronContract(Expr):
    """Adjoint of one factor of a Kronecker product.

    side 'left': for F = L kron B, the map G -> sum_kl G[i p + k, j q + l] B[k, l] (shape of L).
    side 'right': for F = A kron L, the map G -> sum_ij G[i p + k, j q + l] A[i, j] (shape of L).
    args: (G, other, rows, cols, side).
    """

    __slots__ = ()

    def _infer_shape(self):
        return (self.args[2], self.args[3])


def _axis_take(size: OptDim, sel) -> OptDim:
    """The length an axis keeps under a selector (see `Index`)."""
    if sel is None:
        if size is not None:
            raise ShapeError("an index selector is missing for an axis")
        return None
    if size is None:
        raise ShapeError("an index selector for a unit axis")
    if sel[0] == "at":
        return None
    start, stop = sel[1], sel[2]
    if start is None and stop is None:
        return size
    if isinstance(stop, Dim) and start is None:
        return stop
    if start is None and isinstance(stop, int) and stop > 0:
        return Dim.of(stop)
    if isinstance(start, int) and isinstance(stop, int) and (start < 0) == (stop < 0):
        return Dim.of(stop - start)
    if isinstance(start, int) and start < 0 and stop is None:
        return Dim.of(-start)
    raise ShapeError("not supported yet: a slice whose length is not a dim or a number")


class Index(Expr):
    """Constant indexing `a[rows, cols]`, linear in a; NumPy's positions (negative from the end).

    Each selector is None for a unit axis, ("at", i) for one position (the axis is dropped) or
    ("slice", start, stop) with bounds an int, a Dim (its size, from the start) or None (open).
    """

    __slots__ = ()

    def _infer_shape(self):
        a, rows, cols = self.args
        return (_axis_take(a.shape[0], rows), _axis_take(a.shape[1], cols))
