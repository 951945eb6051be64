"""The functions of complex arithmetic: conj, real, imag, abs (modulus) and vdot.

`Z.conj()`, `Z.real` and `Z.imag` (NumPy's method and attribute spellings) are read by the
parser through the helpers here, so both spellings build the same tree.
"""

from __future__ import annotations

from fractions import Fraction

from .. import expr as E
from ..calculus.wirtinger import I_UNIT, conj, has_complex, inner
from ..complex_nodes import Abs, Imag, Real
from .registry import register


def conjugate(a: E.Expr) -> E.Expr:
    """conj(a), pushed to the leaves (a real expression is its own conjugate)."""
    return conj(a)


def real_or_imag(which: str, a: E.Expr) -> E.Expr:
    if which == "real":
        return Real(a) if has_complex(a) else a
    return Imag(a) if has_complex(a) else E.zero_like(a.shape)


def imaginary_literal(k: int) -> E.Expr:
    """The literal `kj` (k times the imaginary unit)."""
    return E.mul(E.Const(Fraction(k)), I_UNIT)


@register("conj", 1, 1)
def _conj(reader, node, args, keywords):
    return conjugate(args[0])


@register("real", 1, 1)
def _real(reader, node, args, keywords):
    return real_or_imag("real", args[0])


@register("imag", 1, 1)
def _imag(reader, node, args, keywords):
    return real_or_imag("imag", args[0])


@register("abs", 1, 1)
def _abs(reader, node, args, keywords):
    """The modulus of a complex argument (a node of its own, not holomorphic); for a real
    argument the entrywise function abs of the real language."""
    from . import stable_forms

    a = args[0]
    if type(a) is E.Const:
        return E.Const(abs(a.value))
    if has_complex(a):
        return Abs(a)
    return stable_forms.entrywise("abs", a)


@register("vdot", 2, 2)
def _vdot(reader, node, args, keywords):
    a, b = args
    if a.is_scalar or b.is_scalar or a.shape != b.shape:
        reader.fail_node(
            f"vdot needs two arrays of the same shape, got a {E.describe(a)} and a {E.describe(b)}",
            node,
        )
    return inner(a, b)
