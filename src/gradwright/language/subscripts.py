"""Subscripts of the formula language: constant indexing and slicing, and `x[:, None]`.

NumPy's meaning exactly: negative positions count from the end, a single position drops its
axis (`X[:, j]` is 1-D), `x[:, None]` / `x[None, :]` make a vector a column / row matrix.
Positions are integer literals or dim names; anything NumPy would clamp or wrap is refused.
"""

from __future__ import annotations

import ast

from .. import expr as E
from ..errors import NotSupportedError

_ONE = E.Dim.of(1)


def _is_none(node) -> bool:
    return isinstance(node, ast.Constant) and node.value is None


def _int_literal(node):
    """The value of `3` or `-3`, else None."""
    sign = 1
    if isinstance(node, ast.UnaryOp) and isinstance(node.op, (ast.USub, ast.UAdd)):
        sign = -1 if isinstance(node.op, ast.USub) else 1
        node = node.operand
    if isinstance(node, ast.Constant) and type(node.value) is int:
        return sign * node.value
    return None


def _position(reader, node, allow_dim: bool):
    """An index position: an int (negative from the end) or a Dim (a dim's size)."""
    v = _int_literal(node)
    if v is not None:
        return v
    if isinstance(node, ast.Name) and node.id in reader.block.dims:
        if allow_dim:
            return E.Dim.of(node.id)
        reader.fail_node(
            f"not supported yet: the dim {node.id} as a single position (only as a slice "
            f"bound, like x[:{node.id}])",
            node,
            NotSupportedError,
        )
    if isinstance(node, ast.Name) and node.id in reader.env:
        reader.fail_node(
            f"an index is an integer literal or a dim name; {node.id} is a symbol, whose value "
            "is not known when the formula is read",
            node,
        )
    reader.fail_node("an index is an integer literal (like 0 or -1) or a dim name", node)


def _selector(reader, item, size: E.Dim):
    """The selector of one axis of length `size` (see `expr.Index`)."""
    if not isinstance(item, ast.Slice):
        i = _position(reader, item, allow_dim=False)
        if size.is_literal:
            if not -size.coef <= i < size.coef:
                reader.fail_node(
                    f"index {i} is out of range for an axis of length {size.coef}", item
                )
            return ("at", i % size.coef)
        return ("at", i)
    if item.step is not None and _int_literal(item.step) != 1:
        reader.fail_node("not supported yet: slices with a step", item.step, NotSupportedError)
    start = None if item.lower is None else _position(reader, item.lower, allow_dim=True)
    stop = None if item.upper is None else _position(reader, item.upper, allow_dim=True)
    if isinstance(start, E.Dim):
        reader.fail_node(
            f"not supported yet: a slice starting at the dim {start} (its length would be a "
            "difference of dims)",
            item.lower,
            NotSupportedError,
        )
    if size.is_literal:
        n = size.coef
        if isinstance(stop, E.Dim):
            if not stop.is_literal:
                reader.fail_node(
                    f"not supported yet: a slice up to the dim {stop} of an axis of fixed "
                    f"length {n}",
                    item.upper,
                    NotSupportedError,
                )
            stop = stop.coef
        for bound, at in ((start, item.lower), (stop, item.upper)):
            if bound is not None and not -n <= bound <= n:
                reader.fail_node(
                    f"the slice bound {bound} is out of range for an axis of length {n}", at
                )
        lo, hi, _ = slice(start, stop).indices(n)
        if hi <= lo:
            reader.fail_node(f"the slice is empty on an axis of length {n}", item)
        return E.FULL if (lo, hi) == (0, n) else ("slice", lo, hi)
    if start == 0:
        start = None
    if stop == size:
        stop = None
    if isinstance(start, int) and isinstance(stop, int) and (start < 0) == (stop < 0):
        if stop <= start:
            reader.fail_node("the slice is empty", item)
    sel = ("slice", start, stop)
    try:
        E._axis_take(size, sel)
    except Exception:
        reader.fail_node(
            f"not supported yet: this slice of an axis of length {size} has a length that is "
            "not a dim or a number (like x[1:] or x[:-1]); declare the dim as a number or "
            "slice with a fixed length (x[-3:], x[2:5], x[:k])",
            item,
            NotSupportedError,
        )
    return sel


def subscript(reader, node: ast.Subscript, depth: int) -> E.Expr:
    """`a[...]` read with NumPy's meaning, or refused with a caret."""
    a = reader.tr(node.value, depth)
    items = list(node.slice.elts) if isinstance(node.slice, ast.Tuple) else [node.slice]
    for item in items:
        if isinstance(item, ast.Starred) or (
            isinstance(item, ast.Constant) and item.value is Ellipsis
        ):
            reader.fail_node("not supported yet: ... and * in subscripts", item, NotSupportedError)
    if a.is_scalar:
        reader.fail_node(f"cannot index a scalar ({E.describe(a)})", node)
    if any(_is_none(i) for i in items):
        return _new_axis(reader, node, a, items)
    ndim = 2 if E.is_matrix_shape(a.shape) else 1
    if len(items) > ndim:
        reader.fail_node(
            f"too many indices: a {E.describe(a)} has {ndim} ax{'is' if ndim == 1 else 'es'}",
            node,
        )
    if ndim == 1:
        axis = 0 if E.is_col(a.shape) else 1
        sel = _selector(reader, items[0], a.shape[axis])
        rows, cols = (sel, None) if axis == 0 else (None, sel)
    else:
        rows = _selector(reader, items[0], a.shape[0])
        cols = _selector(reader, items[1], a.shape[1]) if len(items) > 1 else E.FULL
    out = E.index(a, rows, cols)
    if E.is_row(out.shape):
        out = E.transpose(out)  # NumPy gives a 1-D result; ours is a column
    return out


def _full(item) -> bool:
    return (
        isinstance(item, ast.Slice)
        and item.lower is None
        and item.upper is None
        and item.step is None
    )


def _new_axis(reader, node, a, items) -> E.Expr:
    """x[:, None] (a column matrix) and x[None, :] / x[None] (a row matrix) of a vector x."""
    if not E.is_vector_shape(a.shape):
        reader.fail_node(
            "not supported yet: a new axis on a matrix (arrays with 3 axes)",
            node,
            NotSupportedError,
        )
    col = a if E.is_col(a.shape) else E.transpose(a)
    if len(items) == 2 and _full(items[0]) and _is_none(items[1]):
        return E.matmul(col, E.Ones((None, _ONE)))
    if (len(items) == 2 and _is_none(items[0]) and _full(items[1])) or len(items) == 1:
        return E.matmul(E.Ones((_ONE, None)), E.transpose(col))
    reader.fail_node(
        "not supported yet: this use of None in a subscript (x[:, None] and x[None, :] are)",
        node,
        NotSupportedError,
    )
