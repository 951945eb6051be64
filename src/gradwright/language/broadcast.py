"""NumPy's broadcasting for arrays of up to two axes, as linear maps built from ones.

A vector b added to every row of an (n, h) matrix is the outer product 1ₙ bᵀ; its adjoint is
the sum over the broadcast axis (1ₙᵀ G), so the calculus needs no node of its own.
"""

from __future__ import annotations

from .. import expr as E
from ..errors import ShapeError

_ONE = E.Dim.of(1)


def numpy_shape(shape: E.Shape) -> tuple:
    """The shape NumPy sees: () for a scalar, (k,) for a vector (column or row), (r, c)."""
    r, c = shape
    if r is None and c is None:
        return ()
    if c is None:
        return (r,)
    if r is None:
        return (c,)
    return (r, c)


def _np_text(shape: tuple) -> str:
    if not shape:
        return "()"
    if len(shape) == 1:
        return f"({shape[0]},)"
    return f"({shape[0]}, {shape[1]})"


def broadcast_shapes(a: tuple, b: tuple) -> tuple | None:
    """NumPy's result shape of two shapes (aligned at the last axis), None if they clash.

    >>> n, h = E.Dim.of("n"), E.Dim.of("h")
    >>> broadcast_shapes((h,), (n, h)) == (n, h), broadcast_shapes((n,), (n, h))
    (True, None)
    """
    if len(a) < len(b):
        a, b = b, a
    b = (None,) * (len(a) - len(b)) + tuple(b)
    out = []
    for x, y in zip(a, b):
        if y is None or x == y or y == _ONE:
            out.append(x)
        elif x == _ONE:
            out.append(y)
        else:
            return None
    return tuple(out)


def clash_message(verb: str, a: E.Expr, b: E.Expr) -> str:
    """Why NumPy refuses `a <op> b`, with the fix a user most likely wants."""
    sa, sb = numpy_shape(a.shape), numpy_shape(b.shape)
    text = (
        f"cannot {verb} a {E.describe(a)} and a {E.describe(b)}: NumPy cannot broadcast "
        f"{_np_text(sa)} against {_np_text(sb)}"
    )
    vec, mat = (sa, sb) if len(sa) == 1 else (sb, sa)
    if len(vec) == 1 and len(mat) == 2 and vec[0] == mat[0]:
        text += (
            " (a vector lines up with the last axis, the columns; write v[:, None] to "
            "use it as a column)"
        )
    return text


def internal_shape(np_shape: tuple) -> E.Shape:
    if not np_shape:
        return E.SCALAR
    if len(np_shape) == 1:
        return (np_shape[0], None)
    return tuple(np_shape)


def expand(e: E.Expr, target: tuple) -> E.Expr:
    """e broadcast to the NumPy shape `target` (which NumPy's rules allow), as ones products.

    Scalars stay scalars: the nodes already apply a scalar to every entry.
    """
    if e.is_scalar:
        return e
    want = internal_shape(target)
    if e.shape == want:
        return e
    a = e
    if len(target) == 2 and E.is_col(a.shape):
        a = E.transpose(a)  # NumPy lines a vector up with the last axis: it is a row
    elif len(target) == 1 and E.is_row(a.shape):
        a = E.transpose(a)
    if a.shape[0] != want[0]:
        a = E.matmul(E.Ones((want[0], a.shape[0])), a)
    if a.shape[1] != want[1]:
        a = E.matmul(a, E.Ones((a.shape[1], want[1])))
    if a.shape != want:  # pragma: no cover - broadcast_shapes admits only what expands
        raise ShapeError(f"cannot broadcast a {E.describe(e)} to {_np_text(target)}")
    return a


def broadcast_all(terms: list[E.Expr]) -> list[E.Expr]:
    """The terms expanded to their common NumPy shape; unchanged when their shapes agree."""
    arrays = [t for t in terms if not t.is_scalar]
    if all(t.shape == arrays[0].shape for t in arrays[1:]):
        return terms
    shape: tuple = ()
    for t in arrays:
        got = broadcast_shapes(shape, numpy_shape(t.shape))
        if got is None:  # pragma: no cover - callers check pair by pair first
            raise ShapeError(f"cannot broadcast a {E.describe(t)} to {_np_text(shape)}")
        shape = got
    return [expand(t, shape) for t in terms]
