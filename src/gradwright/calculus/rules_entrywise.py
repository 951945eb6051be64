"""Derivatives of the entrywise functions of `gradwright.entrywise` (f'(a), given a and f(a)).

At a kink the derivative is one subgradient, named in the rule shown beside the step
(`RULE_NOTES`): abs'(0) = sign(0) = 0, the smallest subgradient (PyTorch and autograd return it,
from memory; JAX's `jnp.abs` returns 1 there, checked in tests/core/test_numpy_reductions.py).
"""

from __future__ import annotations

from fractions import Fraction

from .. import expr as E
from ..errors import NotSupportedError


def _zero(a, fx):
    return E.zero_like(a.shape)


def _last_polygamma(a, fx):
    raise NotSupportedError("not supported yet: the derivative of polygamma(3, x)")


EXTRA_DERIVATIVES = {
    "abs": lambda a, fx: E.Func("sign", a),
    "sign": _zero,
    "heaviside": _zero,
    "cosh": lambda a, fx: E.Func("sinh", a),
    "sinh": lambda a, fx: E.Func("cosh", a),
    "arctan": lambda a, fx: E.power(E.add(E.ONE, E.power(a, E.Const(2))), E.Const(-1)),
    "log1p": lambda a, fx: E.power(E.add(E.ONE, a), E.Const(-1)),
    "expm1": lambda a, fx: E.Func("exp", a),
    # erf'(x) = 2 exp(-x²) / sqrt(π)
    "erf": lambda a, fx: E.mul(
        E.Const(2),
        E.power(E.Pi(), E.Const(Fraction(-1, 2))),  # a number in every array library
        E.Func("exp", E.neg(E.power(a, E.Const(2)))),
    ),
    "gammaln": lambda a, fx: E.Func("digamma", a),
    "digamma": lambda a, fx: E.Func("trigamma", a),
    "trigamma": lambda a, fx: E.Func("tetragamma", a),
    "tetragamma": lambda a, fx: E.Func("pentagamma", a),
    "pentagamma": _last_polygamma,
}

#: the subgradient chosen at a kink, added to the rule's name where the function has one
RULE_NOTES = {
    "abs": " (sign(x); 0 at x = 0, the smallest subgradient)",
    "sign": " (0 everywhere, also at the jump)",
    "heaviside": " (0 everywhere, also at the jump)",
}
