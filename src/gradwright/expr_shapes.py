"""Dims and shapes: `Dim` (a product of named dims times an integer) and the internal
2-tuple shapes `(rows, cols)`, where `None` marks the unit axis; a part of `expr`."""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING

if TYPE_CHECKING:  # annotations only
    from .expr_core import Expr

# ---------------------------------------------------------------------------------------------
# dims and shapes
# ---------------------------------------------------------------------------------------------


@dataclass(frozen=True)
class Dim:
    """A dimension: a product of named dims times a positive integer (`n`, `3`, `m*n`)."""

    names: tuple[str, ...] = ()
    coef: int = 1

    @staticmethod
    def of(value: int | str | Dim) -> Dim:
        if isinstance(value, Dim):
            return value
        if isinstance(value, int):
            return Dim((), value)
        return Dim((value,), 1)

    def __mul__(self, other: Dim) -> Dim:
        return Dim(tuple(sorted(self.names + other.names)), self.coef * other.coef)

    def __str__(self) -> str:
        parts = list(self.names)
        if self.coef != 1 or not parts:
            parts.insert(0, str(self.coef))
        return "*".join(parts)

    def value(self, sizes: dict[str, int]) -> int:
        out = self.coef
        for name in self.names:
            out *= sizes[name]
        return out

    @property
    def is_literal(self) -> bool:
        return not self.names

    def user(self) -> int | str:
        """The dim as a user sees it: an int for a literal, else its text."""
        return self.coef if not self.names else str(self)


OptDim = Dim | None


Shape = tuple  # tuple[OptDim, OptDim]


SCALAR: Shape = (None, None)


def dim_mul(a: OptDim, b: OptDim) -> OptDim:
    if a is None:
        return b
    if b is None:
        return a
    return a * b


def shape_size(shape: Shape) -> OptDim:
    return dim_mul(shape[0], shape[1])


def is_scalar_shape(shape: Shape) -> bool:
    return shape[0] is None and shape[1] is None


def is_col(shape: Shape) -> bool:
    return shape[0] is not None and shape[1] is None


def is_row(shape: Shape) -> bool:
    return shape[0] is None and shape[1] is not None


def is_vector_shape(shape: Shape) -> bool:
    return (shape[0] is None) != (shape[1] is None)


def is_matrix_shape(shape: Shape) -> bool:
    return shape[0] is not None and shape[1] is not None


def user_shape(shape: Shape) -> tuple:
    """NumPy's view of an internal shape: () scalar, (n,) vector, (m, n) matrix."""
    return tuple(d.user() for d in shape if d is not None)


def shape_text(shape: Shape) -> str:
    dims = [str(d) for d in shape if d is not None]
    if not dims:
        return "()"
    if len(dims) == 1:
        return f"({dims[0]},)"
    return f"({dims[0]}, {dims[1]})"


def describe(e: Expr) -> str:
    """'(n, k) matrix', '(n,) vector', 'scalar' for error messages."""
    if is_scalar_shape(e.shape):
        return "scalar"
    kind = "vector" if is_vector_shape(e.shape) else "matrix"
    return f"{shape_text(e.shape)} {kind}"
