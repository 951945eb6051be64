"""Closed-form stationary points of real targets of complex variables: G(Z) = 0 for the
gradient G = 2 ∂f/∂conj(Z), when G is affine in Z and free of conj(Z) (complex least squares,
the Wiener solution R⁻¹p); anything else is refused.
"""

from __future__ import annotations

from .. import expr as E
from ..complex_nodes import Conj
from ..errors import NotSupportedError
from ..simplify import expand, simplify
from . import wirtinger as W
from .stationary import StationaryPoint, _solve_affine


def stationary_point(derivation, var: str) -> StationaryPoint:
    """Z* with gradient(Z*) = 0, for a gradient affine in Z alone (no conj(Z) in it)."""
    z = derivation._vars[var]
    if not derivation.is_scalar:
        raise NotSupportedError("a stationary point needs a scalar target")
    g = simplify(E.inline_named(derivation.gradient(var)))
    dg = W.differential(g, frozenset([var]))
    # conj(dZ), or dZᵀ (the conjugate of dZ for a Hermitian Z): not affine in Z alone
    conj_leaf = any(
        type(n) in (Conj, E.Transpose) and type(n.args[0]) is E.Differential for n in E.walk(dg)
    )
    if var in dg.symbols or conj_leaf:
        raise NotSupportedError(
            f"not supported yet: a closed form for the stationary point in {var} (the gradient "
            f"is not affine in {var} alone); use the gradient with an optimizer"
        )
    point = _solve_affine(expand(g), z)
    return StationaryPoint(var, W.normalize(point), "the gradient is affine in " + var, derivation)
