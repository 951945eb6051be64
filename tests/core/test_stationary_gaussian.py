"""Closed-form stationary points of the Gaussian likelihood: the maximum-likelihood mean and
covariance are the sample mean and the (1/N) sample covariance, and the precision is its
inverse (Anderson, An Introduction to Multivariate Statistical Analysis, 3rd ed., section 3.2,
from memory); checked against NumPy's `mean` and `cov(bias=True)`.
"""

from __future__ import annotations

import numpy as np
import pytest

from gradwright import NotSupportedError, derive
from gradwright.errors import ShapeError

MEAN_ONLY = "X: (n, p)\nmu: (p,)\nf = sum((X - outer(ones(n), mu))**2)"

COVARIANCE = """X: (n, p)
N: ()
mu: (p,)
S: (p, p) spd
R = X - outer(ones(n), mu)
f = N * logdet(S) + trace(solve(S, R.T @ R))"""

PRECISION = """X: (n, p)
N: ()
mu: (p,)
P: (p, p) spd
R = X - outer(ones(n), mu)
f = -N * logdet(P) + trace(P @ R.T @ R)"""


@pytest.fixture
def sample():
    rng = np.random.default_rng(7)
    a = rng.standard_normal((4, 4))
    return rng.standard_normal((50, 4)) @ a + np.array([1.0, -2.0, 0.5, 3.0])


def test_mean_of_a_sum_of_squares_is_the_sample_mean(sample):
    d = derive(MEAN_ONLY, wrt="mu")
    point = d.stationary_point()
    got = point.function()(X=sample)
    np.testing.assert_allclose(got, sample.mean(axis=0), rtol=1e-12)  # reference: NumPy


@pytest.mark.parametrize("block, var", [(COVARIANCE, "S"), (PRECISION, "P")])
def test_gaussian_mle_in_either_parameterization(sample, block, var):
    n = sample.shape[0]
    d = derive(block, wrt=["mu", var])
    mu = d.stationary_point("mu").function()
    mu_hat = mu(X=sample, N=float(n), **{var: np.eye(4)})  # the mean does not depend on S or P
    np.testing.assert_allclose(mu_hat, sample.mean(axis=0), rtol=1e-12)  # reference: NumPy
    cov = np.cov(sample, rowvar=False, bias=True)  # reference: NumPy, the 1/N covariance
    got = d.stationary_point(var).function()(X=sample, N=float(n), mu=mu_hat)
    want = cov if var == "S" else np.linalg.inv(cov)
    np.testing.assert_allclose(got, want, rtol=1e-10)
    # and the gradient vanishes there
    g = d.gradient_function(var)(X=sample, N=float(n), mu=mu_hat, **{var: got})
    assert np.abs(g).max() < 1e-8 * n


def test_internal_errors_become_formula_errors(monkeypatch):
    from gradwright.calculus import stationary

    def broken(derivation, var):
        raise ShapeError("inv needs a square matrix, got a scalar")

    monkeypatch.setattr(stationary, "stationary_point", broken)
    d = derive(MEAN_ONLY, wrt="mu")
    with pytest.raises(NotSupportedError, match="stationary point"):
        d.stationary_point()
