"""Closed-form OLS through an orthogonal factorization: the NIST StRD Longley test.

Reference: NIST StRD, Longley (1967) data, certified regression coefficients (the values in
tests/core/test_stationary.py, with their source). NIST grades a solver by the log relative
error LRE = -log10(|b - c| / |c|) of every coefficient; the issue asks for LRE >= 10.
"""

from __future__ import annotations

import numpy as np
import pytest
from test_stationary import LONGLEY_CERTIFIED

from gradwright import derive

OLS = "X: (n, p)\ny: (n,)\nb: (p,)\nf = sum((y - X @ b)**2)"


@pytest.fixture(scope="module")
def longley():
    from statsmodels.datasets import longley

    data = longley.load_pandas()
    X = np.column_stack([np.ones(16), data.exog.to_numpy(dtype=float)])
    return X, data.endog.to_numpy(dtype=float)


def test_ols_stationary_point_has_ten_digits_on_longley(longley):
    X, y = longley
    point = derive(OLS, wrt="b").stationary_point("b")
    src = point.source()
    assert "_gw_lstsq(X, y" in src and "X.T @ X" not in src
    b = point.function()(X=X, y=y)
    lre = -np.log10(np.abs(b - LONGLEY_CERTIFIED) / np.abs(LONGLEY_CERTIFIED))
    assert np.all(lre >= 10), lre


def test_normal_equations_would_lose_digits(longley):
    # why the rewrite exists: the same closed form through the normal equations
    X, y = longley
    b = np.linalg.solve(X.T @ X, X.T @ y)
    lre = -np.log10(np.abs(b - LONGLEY_CERTIFIED) / np.abs(LONGLEY_CERTIFIED))
    assert lre.min() < 10


def test_rank_deficient_design_warns_and_gives_the_least_norm_point():
    X = np.array([[1.0, 2.0], [2.0, 4.0], [3.0, 6.0]])
    y = np.array([1.0, 2.0, 3.0])
    fn = derive(OLS, wrt="b").stationary_point("b").function()
    with pytest.warns(RuntimeWarning, match="does not have full column rank"):
        b = fn(X=X, y=y)
    np.testing.assert_allclose(b, np.linalg.pinv(X) @ y, rtol=1e-12)
