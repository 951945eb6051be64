"""Precedence tables for the printers (higher binds tighter)."""

from __future__ import annotations

from .. import expr as E

ADD = 10
HADAMARD = 15
KRON = 17
PRODUCT = 20
UNARY = 25
POSTFIX = 40
ATOM = 50


def _leading_negative(e: E.Expr) -> bool:
    if type(e) is E.Const:
        return e.value < 0
    if type(e) is E.Mul and type(e.args[0]) is E.Const:
        return e.args[0].value < 0
    return False


def latex_precedence(e: E.Expr) -> int:
    t = type(e)
    if t is E.Add:
        return ADD
    if _leading_negative(e):
        return ADD
    if t is E.Mul:
        arrays = [f for f in e.args if not f.is_scalar]
        den = any(
            type(f) is E.Power and type(f.args[1]) is E.Const and f.args[1].value < 0
            for f in e.args
        )
        if len(arrays) > 1:
            return HADAMARD
        if den and not e.is_scalar:
            return HADAMARD
        return PRODUCT
    if t is E.Kron:
        return KRON
    if t in (E.MatMul, E.Solve):
        return PRODUCT
    if t is E.Const and e.value.denominator != 1:
        return PRODUCT
    if t in (E.Transpose, E.Inverse, E.Power, E.MatPow):
        return POSTFIX
    if t in (E.Sum, E.Trace) and type(e.args[0]) in (E.Ones, E.Identity):
        shape = e.args[0].shape
        if t is E.Trace:  # tr(I_n) is n: only the rows count
            shape = shape[:1]
        named = [d for d in shape if d is not None]
        return (
            PRODUCT
            if len(named) > 1 or any(len(d.names) + (d.coef != 1) > 1 for d in named)
            else ATOM
        )
    own = getattr(e, "latex_precedence", None)  # node families printed in their own modules
    return own if own is not None else ATOM


def text_precedence(e: E.Expr) -> int:
    """Python's own precedence: + - < * / @ < unary - < ** < calls and attributes."""
    t = type(e)
    if t is E.Add:
        return ADD
    if _leading_negative(e):
        return UNARY if t is E.Const or len(e.args) == 2 else PRODUCT
    if t in (E.Mul, E.MatMul):
        return PRODUCT
    if t is E.Const and e.value.denominator != 1:
        return PRODUCT
    if t is E.Power:
        return POSTFIX - 5
    if t is E.SizeOf and len(e.dim.names) + (e.dim.coef != 1) > 1:
        return PRODUCT  # `k*n` (a product of dims) is a product: x / (k*n), not x / k*n
    return ATOM
