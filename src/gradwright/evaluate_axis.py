"""The reference evaluator's part for the nodes of `expr_axis` (values kept 2-D, as there)."""

from __future__ import annotations

import numpy as np


def _reshape(value: np.ndarray, evaluator, shape) -> np.ndarray:
    return np.reshape(value, (evaluator.size(shape[0]), evaluator.size(shape[1])))


class AxisEvaluator:
    """Mixin of `evaluate._Evaluator`; internal axes index the 2-D arrays directly."""

    def _AxisReduce(self, e):
        op, a, axis, _keepdims = e.args
        x = self.ev(a)
        axis = None if a.shape[1] is None else axis
        if op == "logsumexp":
            m = np.max(x.real, axis=axis, keepdims=True)
            m = np.where(np.isfinite(m), m, 0.0)
            out = m + np.log(np.sum(np.exp(x - m), axis=axis, keepdims=True))
        else:
            out = (np.max if op == "max" else np.min)(x, axis=axis, keepdims=True)
        return _reshape(out, self, e.shape)

    def _TieWeights(self, e):
        op, a, axis = e.args
        x = self.ev(a)
        axis = None if a.shape[1] is None else axis
        best = (np.max if op == "max" else np.min)(x, axis=axis, keepdims=True)
        hits = (x == best).astype(float)
        return hits / np.sum(hits, axis=axis, keepdims=True)

    def _AxisSoftmax(self, e):
        kind, a, axis = e.args
        x = self.ev(a)
        axis = None if a.shape[1] is None else axis
        shifted = x - np.max(x.real, axis=axis, keepdims=True)
        log_total = np.log(np.sum(np.exp(shifted), axis=axis, keepdims=True))
        out = shifted - log_total
        return np.exp(out) if kind == "softmax" else out

    def _Extremum(self, e):
        op, a, b = e.args
        return (np.maximum if op == "maximum" else np.minimum)(self.ev(a), self.ev(b))
