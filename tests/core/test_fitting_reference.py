"""Fitted models against reference statistics libraries, on the data sets they ship.

- Logit on the Spector and Mazzeo program-effect data (statsmodels.datasets.spector) and the
  multinomial logit on the 1996 American National Election Study extract
  (statsmodels.datasets.anes96): estimates and standard errors against statsmodels `Logit` /
  `MNLogit` fitted by Newton's method, and the number of Newton iterations under statsmodels'
  own stopping rule (reference library: statsmodels).
- Gaussian-process log marginal likelihood, gradient and block Hessian, and factor analysis,
  against scikit-learn (reference library: scikit-learn).
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
Z = X @ W + b
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


# --- Gaussian-process hyperparameters and factor analysis against scikit-learn -----------------

# the sap-flow style GP: signal variance, length-scale and noise, each fitted through its log
GP = """D: (n, n)
y: (n,)
s2: () positive
ell: () positive
noise: () positive
K = s2 * exp(-D / (2 * ell**2)) + noise * eye(n)
nll = (y @ solve(K, y) + logdet(K)) / 2"""

FA = """S: (p, p) symmetric
N: ()
L: (p, k)
psi: (p,) positive
C = L @ L.T + diagm(psi)
nll = (N * logdet(C) + trace(solve(C, S))) / 2"""


def test_gp_log_marginal_likelihood_and_block_hessian_match_scikit_learn():
    skl = pytest.importorskip("sklearn.gaussian_process")
    kernels = pytest.importorskip("sklearn.gaussian_process.kernels")
    rng = np.random.default_rng(3)
    x = np.sort(rng.uniform(0, 10, 25))
    y = np.sin(x) + 0.1 * rng.standard_normal(25)
    kernel = kernels.ConstantKernel(1.0) * kernels.RBF(1.0) + kernels.WhiteKernel(0.1)
    # alpha=0: no jitter added to the diagonal, so both compute the same K
    gp = skl.GaussianProcessRegressor(kernel, optimizer=None, alpha=0.0).fit(x[:, None], y)
    d = derive(
        GP, wrt=["s2", "ell", "noise"], parameterize={"s2": "log", "ell": "log", "noise": "log"}
    )
    assert d.variables == ("log_s2", "log_ell", "log_noise")  # the order of sklearn's theta
    obj = d.objective(D=(x[:, None] - x[None, :]) ** 2, y=y)
    n = len(y)
    for theta in (np.log([1.7, 0.8, 0.05]), np.log([0.4, 2.5, 0.3])):
        # reference library: scikit-learn, log_marginal_likelihood(theta, eval_gradient=True)
        lml, grad = gp.log_marginal_likelihood(theta, eval_gradient=True)
        value, g = obj(theta)
        assert abs(-value - n / 2 * np.log(2 * np.pi) - lml) <= 1e-10 * abs(lml)
        assert np.max(np.abs(-g - grad)) <= 1e-10 * max(1.0, np.max(np.abs(grad)))
        # the block Hessian against central differences of scikit-learn's gradient
        h = 1e-5  # about eps**(1/3) (Nocedal and Wright, 2nd ed., section 8.1)
        fd = np.array(
            [
                (
                    gp.log_marginal_likelihood(theta + h * e, eval_gradient=True)[1]
                    - gp.log_marginal_likelihood(theta - h * e, eval_gradient=True)[1]
                )
                / (2 * h)
                for e in np.eye(3)
            ]
        )
        hess = obj.hess(theta)
        assert np.max(np.abs(-hess - fd)) <= 1e-6 * max(1.0, np.max(np.abs(hess)))


def test_factor_analysis_fit_reaches_scikit_learns_likelihood():
    decomposition = pytest.importorskip("sklearn.decomposition")
    from scipy.optimize import minimize

    rng = np.random.default_rng(11)
    X = rng.standard_normal((200, 3)) @ rng.standard_normal((3, 6))
    X += rng.standard_normal((200, 6)) * rng.uniform(0.3, 1.0, 6)
    fa = decomposition.FactorAnalysis(n_components=2, random_state=0).fit(X)
    ll_reference = fa.score(X) * len(X)  # reference library: scikit-learn, mean log-likelihood
    d = derive(FA, wrt=["L", "psi"], parameterize={"psi": "log"})
    Xc = X - X.mean(axis=0)
    obj = d.objective(S=Xc.T @ Xc, N=float(len(X)))
    x0 = obj.pack(L=0.5 * rng.standard_normal((6, 2)), log_psi=np.zeros(6))
    fit = minimize(obj, x0, jac=True, method="L-BFGS-B", options={"maxiter": 5000, "gtol": 1e-9})
    ll = -fit.fun - len(X) * 6 / 2 * np.log(2 * np.pi)
    assert ll >= ll_reference - 1e-9 * abs(ll_reference)
    # the fitted psi is positive by construction; the values of the definitions read it off
    vals = d.values(S=Xc.T @ Xc, N=float(len(X)), **obj.unpack(fit.x))
    assert np.all(vals["psi"] > 0)
    assert vals["nll"] == pytest.approx(fit.fun, rel=1e-12)
