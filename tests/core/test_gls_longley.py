"""Closed-form generalized least squares by whitening with the Cholesky factor, not through the
normal equations Xᵀ V⁻¹ X: digits on the Longley data with a known covariance.

Data: the Longley (1967) regression data of the NIST StRD (through statsmodels' copy, as in
test_lstsq_longley.py). Covariance: an AR(1) correlation V_ij = ρ^|i−j| with ρ = 0.6, chosen
here (a known V, not estimated). References: the GLS estimator evaluated in 60-digit arithmetic
with mpmath (exact to far beyond double precision), and statsmodels' GLS.
Digits are the log relative error LRE = −log10 |b − c| / |c| that NIST uses.
"""

from __future__ import annotations

import mpmath
import numpy as np
import pytest

from gradwright import derive

GLS = "X: (n, p)\nV: (n, n) spd\ny: (n,)\nb: (p,)\nf = (y - X @ b) @ solve(V, y - X @ b)"
WLS = "X: (n, p)\nW: (n, n) spd\ny: (n,)\nb: (p,)\nf = (y - X @ b) @ W @ (y - X @ b)"


@pytest.fixture(scope="module")
def longley():
    from statsmodels.datasets import longley

    data = longley.load_pandas()
    X = np.column_stack([np.ones(16), data.exog.to_numpy(dtype=float)])
    y = data.endog.to_numpy(dtype=float)
    i = np.arange(16)
    V = 0.6 ** np.abs(i[:, None] - i[None, :])
    return X, y, V


def _gls_mpmath(X, y, W):
    """(Xᵀ W X)⁻¹ Xᵀ W y in 60 digits (W the weight matrix, V⁻¹ for GLS)."""
    with mpmath.workdps(60):
        Xm, ym, Wm = mpmath.matrix(X.tolist()), mpmath.matrix(y.tolist()), mpmath.matrix(W)
        b = mpmath.lu_solve(Xm.T * Wm * Xm, Xm.T * Wm * ym)
        return np.array([float(v) for v in b])


def _lre(b, c):
    return -np.log10(np.abs(b - c) / np.abs(c))


def test_gls_closed_form_whitens_and_keeps_ten_digits(longley):
    X, y, V = longley
    point = derive(GLS, wrt="b").stationary_point("b")
    src = point.source()
    assert "_gw_cho_whiten(" in src and "_gw_lstsq(" in src and "X.T @" not in src
    b = point.function()(X=X, y=y, V=V)
    with mpmath.workdps(60):
        Vinv = mpmath.inverse(mpmath.matrix(V.tolist()))
    ref = _gls_mpmath(X, y, Vinv)
    assert np.all(_lre(b, ref) >= 10), _lre(b, ref)
    import statsmodels.api as sm

    theirs = sm.GLS(y, X, sigma=V).fit().params
    np.testing.assert_allclose(b, theirs, rtol=1e-6)  # statsmodels whitens too (pinv)


def test_weighted_closed_form_with_an_spd_weight_keeps_ten_digits(longley):
    X, y, V = longley
    W = np.linalg.inv(V)  # the same estimator, written with the weight matrix
    W = 0.5 * (W + W.T)
    point = derive(WLS, wrt="b").stationary_point("b")
    assert "_gw_cho_colour(" in point.source()
    b = point.function()(X=X, y=y, W=W)
    ref = _gls_mpmath(X, y, mpmath.matrix(W.tolist()))
    assert np.all(_lre(b, ref) >= 10), _lre(b, ref)


def test_normal_equations_would_lose_digits(longley):
    # why whitening: Xᵀ V⁻¹ X formed and solved loses digits on these data
    X, y, V = longley
    Vi_X, Vi_y = np.linalg.solve(V, X), np.linalg.solve(V, y)
    b = np.linalg.solve(X.T @ Vi_X, X.T @ Vi_y)
    with mpmath.workdps(60):
        Vinv = mpmath.inverse(mpmath.matrix(V.tolist()))
    assert _lre(b, _gls_mpmath(X, y, Vinv)).min() < 10


def test_whitening_without_numpys_lapack_keeps_ten_digits(longley):
    X, y, V = longley
    fn = derive(GLS, wrt="b").stationary_point("b").function()
    fn.__globals__["_GW_LAPACK"][:] = [None]  # SciPy's triangular solve, as with another BLAS
    try:
        b = fn(X=X, y=y, V=V)
    finally:
        fn.__globals__["_GW_LAPACK"].clear()
    with mpmath.workdps(60):
        Vinv = mpmath.inverse(mpmath.matrix(V.tolist()))
    ref = _gls_mpmath(X, y, Vinv)
    assert np.all(_lre(b, ref) >= 10), _lre(b, ref)
