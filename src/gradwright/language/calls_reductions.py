"""Reductions with NumPy's meaning: sum, mean, max, min, norm, logsumexp, softmax, log_softmax.

`axis` (an integer literal, negative ones counted from the end, or None) and `keepdims` (True or
False) are the keyword arguments; result shapes are NumPy's ((n, k) summed over axis=1 is (n,),
with keepdims (n, 1)). softmax, log_softmax and logsumexp without an axis act on every entry, as
scipy.special's functions of the same names do.
"""

from __future__ import annotations

import ast

from .. import expr as E
from .. import expr_axis as X
from .registry import register

_REDUCE_KEYWORDS = ("axis", "keepdims")


def _ndim(a: E.Expr) -> int:
    return sum(d is not None for d in a.shape)


def _literal_int(node) -> int | None:
    """The value of an integer literal (with an optional minus sign), else None."""
    sign = 1
    if isinstance(node, ast.UnaryOp) and isinstance(node.op, (ast.USub, ast.UAdd)):
        sign = -1 if isinstance(node.op, ast.USub) else 1
        node = node.operand
    if (
        isinstance(node, ast.Constant)
        and isinstance(node.value, int)
        and not isinstance(node.value, bool)
    ):
        return sign * node.value
    return None


def read_axis(reader, fname: str, a: E.Expr, keywords: dict):
    """The internal axis (None, 0 or 1) for NumPy's `axis=` given to `fname` on `a`."""
    node = keywords.get("axis")
    if node is None or (isinstance(node, ast.Constant) and node.value is None):
        return None
    value = _literal_int(node)
    if value is None:
        reader.fail_node(f"{fname}: axis must be an integer literal like axis=0 or axis=-1", node)
    ndim = _ndim(a)
    if ndim == 0:
        reader.fail_node(f"{fname}: a scalar has no axis {value}", node)
    if not -ndim <= value < ndim:
        reader.fail_node(
            f"{fname}: axis {value} is out of range for a {E.describe(a)} "
            f"(axes {', '.join(str(i) for i in range(-ndim, ndim))})",
            node,
        )
    return value % ndim


def read_keepdims(reader, fname: str, keywords: dict) -> bool:
    node = keywords.get("keepdims")
    if node is None:
        return False
    if isinstance(node, ast.Constant) and isinstance(node.value, bool):
        return node.value
    reader.fail_node(f"{fname}: keepdims must be True or False", node)


def _no_positional_axis(reader, fname: str, node, args) -> None:
    if len(args) > 1:
        hint = (
            f"; for the entrywise {'maximum' if fname == 'max' else 'minimum'} of two arrays "
            f"write {'maximum' if fname == 'max' else 'minimum'}(A, B)"
            if fname in ("max", "min")
            else ""
        )
        reader.fail_node(
            f"{fname} takes one array; write the axis as a keyword, like {fname}(A, axis=1)" + hint,
            node.args[1],
        )


def _reduction(fname: str):
    def build(reader, node, args, keywords):
        _no_positional_axis(reader, fname, node, args)
        a = args[0]
        axis = read_axis(reader, fname, a, keywords)
        keepdims = read_keepdims(reader, fname, keywords)
        if a.is_scalar:
            return a  # NumPy reduces a 0-d array to itself
        if E.is_col(a.shape):
            axis = None  # a vector's one axis: max(x, axis=0) is max(x)
        if fname == "sum":
            return X.axis_sum(a, axis, keepdims)
        if fname == "mean":
            return X.axis_mean(a, axis, keepdims)
        if fname == "norm":
            if not keepdims and (axis is None or E.is_col(a.shape)):
                return E.Norm(a)
            return E.Func("sqrt", X.axis_sum(E.power(a, E.Const(2)), axis, keepdims))
        if fname == "logsumexp" and not keepdims and (axis is None or E.is_col(a.shape)):
            return E.LogSumExp(a)
        return X.AxisReduce(fname, a, axis, keepdims)

    return build


for _name in ("sum", "mean", "max", "min", "norm", "logsumexp"):
    register(_name, 1, 2, keywords=_REDUCE_KEYWORDS)(_reduction(_name))


def _softmax(kind: str):
    def build(reader, node, args, keywords):
        _no_positional_axis(reader, kind, node, args)
        a = args[0]
        axis = read_axis(reader, kind, a, keywords)
        if a.is_scalar:
            # a single entry: softmax is 1, log_softmax 0 (NumPy's value; derivative zero)
            return E.ONE if kind == "softmax" else E.ZERO
        if E.is_col(a.shape):
            axis = None
            if kind == "softmax":
                return E.Softmax(a)
        elif "axis" not in keywords:
            # scipy.special reads no axis as every entry, jax.nn and torch as the last axis:
            # the line means different things in NumPy users' libraries, so it is refused
            reader.fail_node(
                f"{kind} of a {E.describe(a)} needs axis=: axis=1 for each row, axis=0 for "
                "each column, axis=None for all entries together",
                node,
            )
        return X.AxisSoftmax(kind, a, axis)

    return build


register("softmax", 1, 2, keywords=("axis",))(_softmax("softmax"))
register("log_softmax", 1, 2, keywords=("axis",))(_softmax("log_softmax"))


def _tie_weights(op: str):
    def build(reader, node, args, keywords):
        a = args[0]
        axis = read_axis(reader, f"{op}_weights", a, keywords)
        if a.is_scalar:
            return E.ONE
        return X.TieWeights(op, a, None if E.is_col(a.shape) else axis)

    return build


# the subgradient weights of max/min appear in printed derivatives; read back so that a printed
# gradient parses: each entry attaining the extreme of its slice gets 1 / (how many attain it)
register("max_weights", 1, 1, keywords=("axis",))(_tie_weights("max"))
register("min_weights", 1, 1, keywords=("axis",))(_tie_weights("min"))
