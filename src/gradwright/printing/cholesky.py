"""What the code generator derives from one Cholesky factor beyond solves and log-determinants.

tr(A⁻¹) for an spd A = UᵀU is ‖U⁻¹‖²_F: one triangular inverse (n³/3 flops) instead of a
solve with n right-hand sides (2n³ flops) or a dense inverse (G. H. Golub and C. F. Van Loan,
*Matrix Computations*, 4th ed., 2013, §4.2 and §3.1, from memory). `InverseTrace(A)` is a node
of the code generator only, made by `inverse_traces` while lowering.

>>> from gradwright import derive
>>> d = derive("A: (n, n) spd\\nf = trace(inv(A))", wrt="A")
>>> "_gw_cho_inv_trace(" in d.source()
True
"""

from __future__ import annotations

from .. import expr as E
from .structure import cholesky_ok


class InverseTrace(E.Expr):
    """tr(A⁻¹) for A known spd; a node of the code generator only."""

    __slots__ = ()

    def _infer_shape(self):
        return E.SCALAR


def inverse_trace(x: E.Expr) -> E.Expr:
    """trace(inv(A)) with A known spd as InverseTrace(A); anything else unchanged."""
    if type(x) is E.Trace and type(x.args[0]) is E.Inverse:
        a = x.args[0].args[0]
        if cholesky_ok(a):  # (hpd matrices are not spd: the complex path never gets here)
            return InverseTrace(a)
    return x
