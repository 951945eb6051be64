"""Fitted models against reference statistics libraries, on the data sets they ship.

- Logit on the Spector and Mazzeo program-effect data (statsmodels.datasets.spector) and the
  multinomial logit on the 1996 American National Election Study extract
  (statsmodels.datasets.anes96): estimates and standard errors against statsmodels `Logit` /
  `MNLogit` fitted by Newton's method, and the number of Newton iterations under statsmodels'
  own stopping rule (reference library: statsmodels).
"""

from __future__ import annotations

import numpy as np
import pytest

from gradwright import derive

sm = pytest.importorskip("statsmodels.api")

RTOL = 1e-8  # the bound, relative

LOGIT = """X: (n, p)
y: (n,)
w: (p,)
c: ()
z = X @ w + c
nll = sum(softplus(z)) - y @ z"""

# the first class is the base; the others get a weight column and an intercept each
MNLOGIT = """X: (n, p)
Y: (n, k)
W: (p, k)
b: (k,)
Z = X @ W + outer(ones(n), b)
nll = sum(log(1 + exp(Z) @ ones(k))) - sum(Y * Z)"""


def _newton(obj, start, *args, tol=1e-8, maxiter=35):
    """Newton's method with the block Hessian, stopping as statsmodels' `_fit_newton` does:
    when no parameter moved by more than `tol` (its default, 1e-8; from its source, from
    memory)."""
    x, old, it = start, start + np.inf, 0
    while it < maxiter and np.any(np.abs(x - old) > tol):
        old = x
        _, g = obj(x, *args)
        x = x - np.linalg.solve(obj.hess(x, *args), g)
        it += 1
    return x, it


def _rel(got, want) -> float:
    return float(np.max(np.abs(np.asarray(got) - want)) / np.max(np.abs(want)))


def test_logit_matches_statsmodels_on_spector():
    data = sm.datasets.spector.load_pandas()  # Spector and Mazzeo (1980), shipped by statsmodels
    X = data.exog.to_numpy(float)
    y = data.endog.to_numpy(float)
    ref = sm.Logit(y, sm.add_constant(X)).fit(method="newton", disp=0)  # reference: statsmodels
    d = derive(LOGIT, wrt=["w", "c"])
    obj = d.objective(args=("X", "y"))
    start = obj.pack(w=np.zeros(X.shape[1]), c=0.0)
    x, iterations = _newton(obj, start, X, y)
    est = obj.unpack(x)
    params = np.asarray(ref.params)
    assert _rel(est["w"], params[1:]) < RTOL and _rel(est["c"], params[:1]) < RTOL
    se = d.standard_errors(X=X, y=y, **est)
    bse = np.asarray(ref.bse)
    assert np.max(np.abs(se["w"] / bse[1:] - 1)) < RTOL
    assert abs(se["c"] / bse[0] - 1) < RTOL
    assert iterations == ref.mle_retvals["iterations"]


def test_multinomial_logit_matches_statsmodels_on_anes96():
    data = sm.datasets.anes96.load_pandas()  # ANES 1996 extract, shipped by statsmodels
    X = data.exog[["logpopul", "selfLR", "age", "educ", "income"]].to_numpy(float)
    classes = data.endog.to_numpy(int)
    ref = sm.MNLogit(classes, sm.add_constant(X)).fit(method="newton", disp=0)  # statsmodels
    Y = np.eye(classes.max() + 1)[classes][:, 1:]
    d = derive(MNLOGIT, wrt=["W", "b"])
    obj = d.objective(Y=Y, args=("X",))
    k = Y.shape[1]
    start = obj.pack(W=np.zeros((X.shape[1], k)), b=np.zeros(k))
    x, iterations = _newton(obj, start, X)
    est = obj.unpack(x)
    params = np.asarray(ref.params)  # (1 + p, k): the intercepts first
    assert _rel(est["W"], params[1:]) < RTOL
    assert _rel(est["b"], params[0]) < RTOL
    se = d.standard_errors(X=X, Y=Y, **est)
    bse = np.asarray(ref.bse)
    assert np.max(np.abs(se["W"] / bse[1:] - 1)) < RTOL
    assert np.max(np.abs(se["b"] / bse[0] - 1)) < RTOL
    assert iterations == ref.mle_retvals["iterations"]
