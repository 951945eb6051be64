"""Stationary points: derived gradients vanish at published closed forms, and the engine's own
closed forms (`Derivation.stationary_point`) reproduce them; the NIST StRD Longley data.
"""

from __future__ import annotations

import numpy as np
import pytest
import scipy.linalg
import scipy.optimize

from checks import assert_close, random_point
from gradwright import derive
from gradwright.evaluate import evaluate

RIDGE = "X: (n, p)\nw: (p,)\ny: (n,)\nlam: ()\nf = sum((X @ w - y)**2) + lam * sum(w**2)"
RIDGE_MULTI = "X: (n, p)\nW: (p, k)\nY: (n, k)\nlam: ()\nf = sum((X @ W - Y)**2) + lam * sum(W**2)"
GLS = (
    "X: (n, p)\nB: (p, k)\nY: (n, k)\nS: (n, n) spd\nf = trace((Y - X @ B).T @ solve(S, Y - X @ B))"
)
GAUSS = "S: (n, n) spd\nZ: (N, n)\nm: ()\nf = m * logdet(S) + trace(solve(S, Z.T @ Z))"

SIZES = {"n": 12, "p": 4, "k": 3, "N": 40}


def _data(d, seed):
    a = random_point(d, seed, sizes=SIZES)
    if "lam" in a:
        a["lam"] = 0.7
    if "m" in a:
        a["m"] = float(SIZES["N"])
    return a


def ridge_closed_form(X, y, lam):
    """Hoerl and Kennard (1970): w = (X^T X + lam I)^-1 X^T y."""
    return scipy.linalg.solve(X.T @ X + lam * np.eye(X.shape[1]), X.T @ y, assume_a="pos")


def gls_closed_form(X, Y, S):
    """Aitken (1935): B = (X^T S^-1 X)^-1 X^T S^-1 Y."""
    c = scipy.linalg.cho_factor(S)
    SiX = scipy.linalg.cho_solve(c, X)
    return scipy.linalg.solve(X.T @ SiX, SiX.T @ Y, assume_a="pos")


def gauss_closed_form(Z, m):
    """Anderson, An Introduction to Multivariate Statistical Analysis: the Gaussian
    maximum-likelihood covariance (known zero mean) is Z^T Z / m for m observations."""
    return Z.T @ Z / m


CASES = [
    ("ridge", RIDGE, "w", lambda a: ridge_closed_form(a["X"], a["y"], a["lam"])),
    ("ridge-multi", RIDGE_MULTI, "W", lambda a: ridge_closed_form(a["X"], a["Y"], a["lam"])),
    ("gls", GLS, "B", lambda a: gls_closed_form(a["X"], a["Y"], a["S"])),
    ("gaussian-covariance", GAUSS, "S", lambda a: gauss_closed_form(a["Z"], a["m"])),
]


@pytest.mark.parametrize("name, block, var, closed", CASES, ids=[c[0] for c in CASES])
def test_gradient_vanishes_at_the_published_closed_form(name, block, var, closed):
    d = derive(block, wrt=var)
    g = d.gradient_function(var)
    for seed in (0, 1, 2):
        a = _data(d, seed)
        star = closed(a)
        at_star = np.linalg.norm(g(**{**a, var: star}))
        at_data = np.linalg.norm(g(**a))  # at the random (non-optimal) point
        assert at_star <= 1e-9 * at_data, (name, at_star, at_data)
        rng = np.random.default_rng(seed)
        bumped = star + 0.01 * np.abs(star).max() * rng.standard_normal(np.shape(star))
        if name == "gaussian-covariance":
            bumped = (bumped + bumped.T) / 2
        assert np.linalg.norm(g(**{**a, var: bumped})) >= 1e-4 * at_data, name


@pytest.mark.parametrize("name, block, var, closed", CASES, ids=[c[0] for c in CASES])
def test_stationary_point_reproduces_the_closed_form(name, block, var, closed):
    d = derive(block, wrt=var)
    sp = d.stationary_point(var)
    assert sp.latex().strip() and sp.expression is not None
    for seed in (0, 1):  # the closed-form expression itself, by the reference evaluator
        a = _data(d, seed)
        assert_close(evaluate(sp.expression, a), closed(a), 1e-9, what=f"{name}: expression")
    fn = sp.function()
    for seed in (0, 1):
        a = _data(d, seed)
        others = {k: v for k, v in a.items() if k != var}
        got = fn(**{k: others[k] for k in sp.arguments()})
        assert_close(got, closed(a), 1e-9, what=f"{name}: stationary point")
        # and the derived gradient vanishes there
        g = d.gradient_function(var)
        assert np.linalg.norm(g(**{**a, var: got})) <= 1e-9 * np.linalg.norm(g(**a))


def test_check_grad_cross_check_on_ridge():
    """SciPy's scipy.optimize.check_grad (forward differences) against the derived gradient."""
    d = derive(RIDGE, wrt="w")
    a = _data(d, 5)
    f, g = d.function(), d.gradient_function("w")

    def fun(w):
        return f(**{**a, "w": w})

    def grad(w):
        return g(**{**a, "w": w})

    err = scipy.optimize.check_grad(fun, grad, a["w"], epsilon=1e-7)  # reference: SciPy
    assert err <= 1e-5 * max(1.0, np.linalg.norm(grad(a["w"]))), err
    fd = scipy.optimize.approx_fprime(a["w"], fun, 1e-7)  # reference: SciPy
    assert np.allclose(fd, grad(a["w"]), rtol=1e-5, atol=1e-5)


# --- NIST StRD Longley -----------------------------------------------------------------------

# NIST StRD, Longley (1967) data, certified values: b0 (intercept), then the coefficients of
# GNPDEFL, GNP, UNEMP, ARMED, POP, YEAR. Read from the copy of the NIST values shipped in
# statsmodels/regression/tests/results/results_regression.py (class Longley, "obtained from
# NIST"); they agree with the certified values as remembered (from memory) digit for digit.
LONGLEY_CERTIFIED = np.array(
    [
        -3482258.63459582,
        15.0618722713733,
        -0.358191792925910e-01,
        -2.02022980381683,
        -1.03322686717359,
        -0.511041056535807e-01,
        1829.15146461355,
    ]
)


@pytest.fixture(scope="module")
def longley():
    from statsmodels.datasets import longley

    data = longley.load_pandas()
    X = np.column_stack([np.ones(16), data.exog.to_numpy(dtype=float)])
    y = data.endog.to_numpy(dtype=float)
    assert X.shape == (16, 7)
    assert list(data.exog.columns) == ["GNPDEFL", "GNP", "UNEMP", "ARMED", "POP", "YEAR"]
    return X, y


def test_certified_values_agree_with_two_least_squares_solvers(longley):
    """Guards the transcription of the certified digits: numpy.linalg.lstsq on the centered and
    scaled design (QR-friendly conditioning) and scipy.linalg.lstsq on the raw design."""
    X, y = longley
    mu, sd = X[:, 1:].mean(0), X[:, 1:].std(0)
    Xs = np.column_stack([np.ones(16), (X[:, 1:] - mu) / sd])
    bs = np.linalg.lstsq(Xs, y, rcond=None)[0]
    b_np = np.concatenate([[bs[0] - np.sum(bs[1:] * mu / sd)], bs[1:] / sd])
    b_sp = scipy.linalg.lstsq(X, y)[0]
    assert np.allclose(b_np, LONGLEY_CERTIFIED, rtol=1e-7, atol=0)
    assert np.allclose(b_sp, LONGLEY_CERTIFIED, rtol=1e-5, atol=0)


def test_longley_gradient_vanishes_at_the_certified_coefficients(longley):
    X, y = longley
    d = derive("X: (n, p)\nb: (p,)\ny: (n,)\nf = sum((X @ b - y)**2)", wrt="b")
    g = d.gradient_function("b")
    at_origin = np.linalg.norm(g(X=X, b=np.zeros(7), y=y))
    at_certified = np.linalg.norm(g(X=X, b=LONGLEY_CERTIFIED, y=y))
    assert at_certified <= 1e-6 * at_origin, (at_certified, at_origin)
    # a 1% perturbation, of all coefficients at once and of each one alone, is clearly not
    # stationary
    assert np.linalg.norm(g(X=X, b=1.01 * LONGLEY_CERTIFIED, y=y)) > 1e-4 * at_origin
    for i in range(7):
        b = LONGLEY_CERTIFIED.copy()
        b[i] *= 1.01
        assert np.linalg.norm(g(X=X, b=b, y=y)) > 1e-5 * at_origin, i
    # the value there is the certified residual sum of squares (NIST StRD, Longley (1967)
    # data, certified values: 836424.055505915)
    assert np.isclose(d.function()(X=X, b=LONGLEY_CERTIFIED, y=y), 836424.055505915, rtol=1e-9)


def test_longley_stationary_point_is_the_certified_fit(longley):
    X, y = longley
    d = derive("X: (n, p)\nb: (p,)\ny: (n,)\nf = sum((X @ b - y)**2)", wrt="b")
    got = d.stationary_point("b").function()(X=X, y=y)
    # the closed form solves the normal equations, whose condition number is the square of the
    # design's (~1e7 here; common practice: expect to lose about log10(cond^2) digits of 16)
    assert np.allclose(got, LONGLEY_CERTIFIED, rtol=1e-6, atol=0)


def test_stationary_expressions_by_the_reference_evaluator(longley):
    """The engine's closed forms, evaluated from the tree (independent of the code generator)."""
    for name, block, var, closed in CASES:
        d = derive(block, wrt=var)
        expr = d.stationary_point(var).expression
        for seed in (0, 1):
            a = _data(d, seed)
            assert_close(evaluate(expr, a), closed(a), 1e-9, what=f"{name}: stationary point")
    X, y = longley
    d = derive("X: (n, p)\nb: (p,)\ny: (n,)\nf = sum((X @ b - y)**2)", wrt="b")
    got = evaluate(d.stationary_point("b").expression, {"X": X, "y": y})
    assert np.allclose(got, LONGLEY_CERTIFIED, rtol=1e-6, atol=0)


def test_printed_closed_forms_solve_rather_than_invert():
    """A closed form printed as code reads as the solve it is: `solve(XᵀX + λI, Xᵀy)`, the
    ridge estimator (Hoerl & Kennard 1970, Technometrics 12(1); from memory), not `inv(...)`; the
    GLS estimator (XᵀV⁻¹X)⁻¹XᵀV⁻¹y (Aitken 1935 — from memory) likewise. The LaTeX keeps the
    inverse notation of the literature. The printed text parses back to the same numbers."""
    from gradwright import derive
    from gradwright.calculus.stationary import solves_form

    ridge = derive(
        "X: (n, p)\ny: (n,)\nw: (p,)\nlam: () positive\nf = sum((X @ w - y)**2) + lam * sum(w**2)",
        wrt="w",
    ).stationary_point("w")
    assert ridge.text() == "w = solve(X.T @ X + lam * eye(p), X.T @ y)"
    assert str(ridge) == ridge.text() and "solve(" in repr(ridge)
    assert r"\right)^{-1}" in ridge.latex()
    gls = derive(
        "X: (n, p)\ny: (n,)\nV: (n, n) spd\nb: (p,)\nf = (y - X @ b) @ solve(V, y - X @ b)",
        wrt="b",
    ).stationary_point("b")
    assert gls.text() == "b = solve(X.T @ solve(V, X), X.T @ solve(V, y))"
    assert "inv(" not in gls.text()
    rng = np.random.default_rng(3)
    X, y = rng.standard_normal((9, 3)), rng.standard_normal(9)
    A = rng.standard_normal((9, 9))
    V = A @ A.T + 9 * np.eye(9)
    shapes = {"X": ("n", "p"), "y": ("n",), "V": "(n, n) spd"}
    reread = derive(gls.text().split(" = ", 1)[1] + " @ ones(p)", wrt="X", shapes=shapes)
    want = np.linalg.solve(X.T @ np.linalg.solve(V, X), X.T @ np.linalg.solve(V, y)).sum()
    np.testing.assert_allclose(reread.function()(X=X, y=y, V=V), want, rtol=1e-10)
    assert solves_form(gls.expression) is not gls.expression
