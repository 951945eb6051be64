"""Generated value, gradient and HVP stay finite at logits of ±3000 and equal a stable reference.

References: scipy.special.logsumexp, softmax, log_softmax, expit and log_expit (SciPy), and
np.logaddexp (NumPy); the HVP references are the closed forms of the softmax Jacobian written
with those functions (diag(s) - s sᵀ per row; σ(x)(1 - σ(x)) for softplus, from memory).
Every generated function runs with warnings turned into errors: no intermediate overflows.
"""

from __future__ import annotations

import warnings

import numpy as np
import pytest
import scipy.special as sp

from checks import assert_close
from gradwright import derive

RNG = np.random.default_rng(11)
Z = RNG.standard_normal((3, 4)) * 3000.0
Z[0] = [3000.0, -3000.0, 2999.0, 0.0]
Y = RNG.random((3, 4))
X = np.array([3000.0, -3000.0, 0.5, -2999.5])


def _strict(fn, *args, **kwargs):
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        return fn(*args, **kwargs)


def _row_softmax_hvp(z, v, axis):
    s = sp.softmax(z, axis=axis)
    return s * v - s * np.sum(s * v, axis=axis, keepdims=True)


CASES = [
    # (id, block, arrays, value reference, gradient reference, HVP reference or None)
    ("logsumexp-axis1", "Z: (n, k)\nf = sum(logsumexp(Z, axis=1))", {"Z": Z},
     lambda: np.sum(sp.logsumexp(Z, axis=1)), lambda: sp.softmax(Z, axis=1),
     lambda v: _row_softmax_hvp(Z, v, 1)),
    ("logsumexp-axis0", "Z: (n, k)\nf = sum(logsumexp(Z, axis=0, keepdims=True))", {"Z": Z},
     lambda: np.sum(sp.logsumexp(Z, axis=0)), lambda: sp.softmax(Z, axis=0),
     lambda v: _row_softmax_hvp(Z, v, 0)),
    ("log-exp-ones", "Z: (n, k)\nf = sum(log(exp(Z) @ ones(k)))", {"Z": Z},
     lambda: np.sum(sp.logsumexp(Z, axis=1)), lambda: sp.softmax(Z, axis=1),
     lambda v: _row_softmax_hvp(Z, v, 1)),
    ("log-sum-exp-axis", "Z: (n, k)\nf = sum(log(sum(exp(Z), axis=0)))", {"Z": Z},
     lambda: np.sum(sp.logsumexp(Z, axis=0)), lambda: sp.softmax(Z, axis=0), None),
    ("log-sum-exp-vector", "x: (n,)\nf = log(sum(exp(x)))", {"x": X},
     lambda: sp.logsumexp(X), lambda: sp.softmax(X), lambda v: _row_softmax_hvp(X, v, 0)),
    ("logsumexp-all", "Z: (n, k)\nf = logsumexp(Z)", {"Z": Z},
     lambda: sp.logsumexp(Z), lambda: sp.softmax(Z, axis=None), None),
    ("cross-entropy", "Z: (n, k)\nY: (n, k)\nf = -sum(Y * log_softmax(Z, axis=1))",
     {"Z": Z, "Y": Y}, lambda: -np.sum(Y * sp.log_softmax(Z, axis=1)),
     lambda: sp.softmax(Z, axis=1) * Y.sum(axis=1, keepdims=True) - Y,
     lambda v: _row_softmax_hvp(Z, v, 1) * Y.sum(axis=1, keepdims=True)),
    ("softmax-axis1", "Z: (n, k)\nY: (n, k)\nf = sum(Y * softmax(Z, axis=1))", {"Z": Z, "Y": Y},
     lambda: np.sum(Y * sp.softmax(Z, axis=1)), lambda: _row_softmax_hvp(Z, Y, 1), None),
    ("log-softmax-vector", "x: (n,)\ny: (n,)\nf = y @ log(softmax(x))",
     {"x": X, "y": np.array([0.1, 0.2, 0.3, 0.4])},
     lambda: np.array([0.1, 0.2, 0.3, 0.4]) @ sp.log_softmax(X),
     lambda: np.array([0.1, 0.2, 0.3, 0.4]) - sp.softmax(X), None),
    ("softplus", "x: (n,)\nf = sum(softplus(x))", {"x": X},
     lambda: np.sum(np.logaddexp(0.0, X)), lambda: sp.expit(X),
     lambda v: sp.expit(X) * sp.expit(-X) * v),
    ("log-1-plus-exp", "x: (n,)\nf = sum(log(1 + exp(x)))", {"x": X},
     lambda: np.sum(np.logaddexp(0.0, X)), lambda: sp.expit(X),
     lambda v: sp.expit(X) * sp.expit(-X) * v),
    ("sigmoid", "x: (n,)\nf = sum(sigmoid(x))", {"x": X},
     lambda: np.sum(sp.expit(X)), lambda: sp.expit(X) * sp.expit(-X), None),
    ("log-sigmoid", "x: (n,)\ny: (n,)\nf = y @ log(sigmoid(x)) + (1 - y) @ log(1 - sigmoid(x))",
     {"x": X, "y": np.array([1.0, 0.0, 1.0, 0.0])},
     lambda: np.array([1.0, 0, 1, 0]) @ sp.log_expit(X) + np.array([0.0, 1, 0, 1]) @ sp.log_expit(-X),
     lambda: np.array([1.0, 0, 1, 0]) - sp.expit(X), lambda v: -sp.expit(X) * sp.expit(-X) * v),
]  # fmt: skip


@pytest.mark.parametrize("case", CASES, ids=[c[0] for c in CASES])
def test_value_gradient_and_hvp_are_finite_and_stable(case):
    _id, block, arrays, value, grad, hvp = case
    var = "Z" if "Z" in arrays else "x"
    d = derive(block, wrt=[var])
    got = _strict(d.function(), **arrays)
    assert np.isfinite(got)
    assert_close(got, value(), 1e-12, what=f"{_id} value")
    g = _strict(d.gradient_function(var), **arrays)
    assert np.all(np.isfinite(g))
    assert_close(g, grad(), 1e-12, what=f"{_id} gradient")
    if hvp is not None:
        v = np.random.default_rng(12).standard_normal(np.shape(arrays[var]))
        h = _strict(d.hvp_function(var), v, **arrays)
        assert np.all(np.isfinite(h))
        assert_close(h, hvp(v), 1e-10, what=f"{_id} HVP")


def test_generated_code_is_max_shifted_row_wise():
    d = derive("Z: (n, k)\nf = sum(log(exp(Z) @ ones(k)))", wrt=["Z"])
    code = d.source()
    assert "_gw_logsumexp_axis" in code and "np.max(np.real(a), axis=axis" in code


def test_row_wise_softmax_of_a_row_of_equal_huge_logits():
    d = derive("Z: (n, k)\nF = softmax(Z, axis=1)", wrt=["Z"])
    z = np.full((2, 4), 3000.0)
    assert_close(_strict(d.function(), Z=z), np.full((2, 4), 0.25), 1e-15)  # scipy: 1/k
