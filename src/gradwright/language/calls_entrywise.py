"""Entrywise functions with two arguments or a spelling of their own (NumPy's names).

`maximum(A, B)`, `minimum(A, B)` with NumPy's broadcasting (`maximum(Z, 0)` is the ReLU);
`square(x)` and `reciprocal(x)` are `x**2` and `x**-1`; `heaviside(x, 0.5)` and
`polygamma(1, x)` are read so that printed derivatives parse back.
"""

from __future__ import annotations

import ast

from .. import expr as E
from .. import expr_axis as X
from ..entrywise import POLYGAMMA
from ..errors import NotSupportedError
from .broadcast import broadcast_all, broadcast_shapes, clash_message, numpy_shape
from .registry import register


def _extremum(op: str):
    def build(reader, node, args, keywords):
        a, b = args
        if broadcast_shapes(numpy_shape(a.shape), numpy_shape(b.shape)) is None:
            reader.fail_node(clash_message(f"take the {op} of", a, b), node)
        a, b = broadcast_all([a, b])  # NumPy's broadcasting, as products with ones
        if type(a) is E.Const and type(b) is E.Const:
            return E.Const(max(a.value, b.value) if op == "maximum" else min(a.value, b.value))
        return X.Extremum(op, a, b)

    return build


register("maximum", 2, 2)(_extremum("maximum"))
register("minimum", 2, 2)(_extremum("minimum"))


@register("square", 1, 1)
def _square(reader, node, args, keywords):
    return E.power(args[0], E.Const(2))


@register("reciprocal", 1, 1)
def _reciprocal(reader, node, args, keywords):
    a = args[0]
    if type(a) is E.Const and a.value == 0:
        reader.fail_node("division by zero (reciprocal of 0)", node)
    return E.power(a, E.Const(-1))


def _is_number(node, value) -> bool:
    return (
        isinstance(node, ast.Constant)
        and isinstance(node.value, (int, float))
        and not isinstance(node.value, bool)
        and node.value == value
    )


@register("heaviside", 2, 2)
def _heaviside(reader, node, args, keywords):
    if not _is_number(node.args[1], 0.5):
        reader.fail_node(
            "not supported yet: heaviside(x, h0) with h0 other than 0.5",
            node.args[1],
            NotSupportedError,
        )
    return E.Func("heaviside", args[0])


@register("polygamma", 2, 2)
def _polygamma(reader, node, args, keywords):
    order = next((n for n in POLYGAMMA if _is_number(node.args[0], n)), None)
    if order is None:
        reader.fail_node(
            "not supported yet: polygamma(n, x) with n other than 1, 2, 3 (use digamma(x) "
            "for n = 0)",
            node.args[0],
            NotSupportedError,
        )
    return E.Func(POLYGAMMA[order], args[1])
