"""Rules for reductions over an axis, softmax over an axis and maximum/minimum.

Ties (max/min over an axis, maximum/minimum at equal entries) share the derivative equally: the
subgradient JAX returns for `jnp.max` and `jnp.maximum` (checked in
tests/core/test_numpy_reductions.py against JAX 0.10).
"""

from __future__ import annotations

from .. import expr as E
from .. import expr_axis as X
from .rules import RULE_NAMERS, rule

_AXIS_WORDS = {None: "all entries", 0: "axis 0 (each column)", 1: "axis 1 (each row)"}


def _weights(op: str, a: E.Expr, axis) -> E.Expr:
    if op == "logsumexp":
        return E.Softmax(a) if E.is_col(a.shape) else X.AxisSoftmax("softmax", a, axis)
    return X.TieWeights(op, a, axis)


@rule(X.AxisReduce, "reduction rule")
def _axis_reduce(x, d):
    op, a, axis, keepdims = x.args
    da = d(a)
    if E.is_zero(da):
        return E.zero_like(x.shape)
    return X.axis_sum(E.mul(_weights(op, a, axis), da), axis, bool(keepdims))


def _reduce_name(x) -> str:
    op, _a, axis, _k = x.args
    if op == "logsumexp":
        return f"log-sum-exp rule over {_AXIS_WORDS[axis]} (weights: softmax)"
    return f"{op} rule over {_AXIS_WORDS[axis]} (ties share the derivative equally, as JAX)"


RULE_NAMERS[X.AxisReduce] = _reduce_name


@rule(X.TieWeights, "tie weights are piecewise constant", structural=True)
def _tie_weights(x, d):
    return E.zero_like(x.shape)


@rule(X.AxisSoftmax, "softmax rule")
def _axis_softmax(x, d):
    kind, a, axis = x.args
    da = d(a)
    if E.is_zero(da):
        return E.zero_like(x.shape)
    s = x if kind == "softmax" else _weights("logsumexp", a, axis)
    mean = X.broadcast_back(X.axis_sum(E.mul(s, da), axis), a.shape, axis)
    centred = E.sub(da, mean)
    return E.mul(x, centred) if kind == "softmax" else centred


RULE_NAMERS[X.AxisSoftmax] = lambda x: (
    f"{'softmax' if x.args[0] == 'softmax' else 'log-softmax'} rule over {_AXIS_WORDS[x.args[2]]}"
)


@rule(X.Extremum, "maximum rule")
def _extremum(x, d):
    op, a, b = x.args
    above = E.Func("heaviside", E.sub(a, b))  # 1 where a > b, 1/2 at a tie
    below = E.Func("heaviside", E.sub(b, a))
    wa, wb = (above, below) if op == "maximum" else (below, above)
    terms = []
    for w, child in ((wa, a), (wb, b)):
        dc = d(child)
        if not E.is_zero(dc):
            terms.append(E.mul(w, dc))
    return E.add(*terms) if terms else E.zero_like(x.shape)


RULE_NAMERS[X.Extremum] = lambda x: f"{x.args[0]} rule (a tie shares the derivative equally)"
