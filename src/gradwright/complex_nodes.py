"""Nodes of complex arithmetic: conjugate, real and imaginary parts, modulus, the unit i.

Kept apart from `expr.py` so that real blocks never meet them; `expr.NODE_CLASSES` lists them.
"""

from __future__ import annotations

from .errors import ShapeError
from .expr import SCALAR, Expr

#: structure words that make a symbol complex (hermitian and hpd imply complex)
COMPLEX_WORDS = frozenset({"complex", "hermitian", "hpd"})
HERMITIAN_WORDS = frozenset({"hermitian", "hpd"})


class Conj(Expr):
    """The entrywise complex conjugate of its argument (kept at the leaves by `wirtinger.conj`)."""

    __slots__ = ()

    def _infer_shape(self):
        return self.args[0].shape


class Real(Expr):
    """The entrywise real part."""

    __slots__ = ()

    def _infer_shape(self):
        return self.args[0].shape


class Imag(Expr):
    """The entrywise imaginary part."""

    __slots__ = ()

    def _infer_shape(self):
        return self.args[0].shape


class Abs(Expr):
    """The entrywise modulus |a| (the absolute value for real entries)."""

    __slots__ = ()

    def _infer_shape(self):
        return self.args[0].shape


class ImagUnit(Expr):
    """The imaginary unit i, a scalar constant."""

    __slots__ = ()

    def __init__(self):
        super().__init__()

    def _infer_shape(self):
        if self.args:
            raise ShapeError("the imaginary unit takes no arguments")
        return SCALAR


COMPLEX_NODE_CLASSES = (Conj, Real, Imag, Abs, ImagUnit)


def is_complex_symbol(sym) -> bool:
    """True for a symbol declared complex, hermitian or hpd."""
    return bool(sym.structure & COMPLEX_WORDS)


def is_hermitian_symbol(sym) -> bool:
    return bool(sym.structure & HERMITIAN_WORDS)
