"""One factorization per spd matrix per call, Gram matrices by Cholesky, products that vanish by
the normal equations dropped, symmetric gradients formed once; values against JAX.

Reference library: JAX (jax.grad, float64), and a hand-written Cholesky version of the
restricted likelihood (SciPy's cho_factor/cho_solve; the projection-matrix form of its
gradient, D. A. Harville, "Maximum likelihood approaches to variance component estimation and
to related problems", JASA 72 (1977), §4, from memory).
"""

from __future__ import annotations

import jax
import jax.numpy as jnp
import numpy as np
import pytest
import scipy.linalg

from gradwright import derive
from gradwright.calculus.symmetric_gradient import symmetric_as_is
from gradwright.printing.runtime import HELPERS

jax.config.update("jax_enable_x64", True)

REML = (
    "X: (n, p)\nZ: (n, g)\ny: (n,)\nse: () positive\nsu: () positive\n"
    "V = se * eye(n) + su * (Z @ Z.T)\nB = X.T @ solve(V, X)\n"
    "r = y - X @ solve(B, X.T @ solve(V, y))\n"
    "reml = logdet(V) + logdet(B) + r @ solve(V, r)"
)
KALMAN = (
    "H: (m, n)\nP: (n, n) spd\nR: (m, m) spd\nv: (m,)\nS = H @ P @ H.T + R\n"
    "nll = logdet(S) + v @ solve(S, v)"
)


def _reml_jax(X, Z, y, se, su):
    V = se * jnp.eye(X.shape[0]) + su * (Z @ Z.T)
    B = X.T @ jnp.linalg.solve(V, X)
    r = y - X @ jnp.linalg.solve(B, X.T @ jnp.linalg.solve(V, y))
    return jnp.linalg.slogdet(V)[1] + jnp.linalg.slogdet(B)[1] + r @ jnp.linalg.solve(V, r)


def _reml_cholesky(X, Z, y, se, su):
    """The hand-written version: P = V⁻¹ − V⁻¹X(XᵀV⁻¹X)⁻¹XᵀV⁻¹, ∂/∂θ = tr(P Vθ) − yᵀP Vθ P y."""
    n = X.shape[0]
    c = scipy.linalg.cho_factor(se * np.eye(n) + su * (Z @ Z.T))
    vix = scipy.linalg.cho_solve(c, X)
    viy = scipy.linalg.cho_solve(c, y)
    cb = scipy.linalg.cho_factor(X.T @ vix)
    py = viy - vix @ scipy.linalg.cho_solve(cb, X.T @ viy)
    p = scipy.linalg.cho_solve(c, np.eye(n)) - vix @ scipy.linalg.cho_solve(cb, vix.T)
    value = 2 * np.log(np.diag(c[0])).sum() + 2 * np.log(np.diag(cb[0])).sum() + y @ py
    zpy = Z.T @ py
    return value, (np.trace(p) - py @ py, np.vdot(Z, p @ Z) - zpy @ zpy)


def _reml_data(n, p, g, seed=5):
    rng = np.random.default_rng(seed)
    Z = np.zeros((n, g))
    Z[np.arange(n), rng.integers(0, g, n)] = 1.0
    X = np.column_stack([np.ones(n), rng.standard_normal((n, p - 1))])
    y = X @ rng.standard_normal(p) + Z @ rng.standard_normal(g) + rng.standard_normal(n)
    return {"X": X, "Z": Z, "y": y, "se": 0.8, "su": 0.6}


def _body(src: str, name: str) -> str:
    start = src.index(f"def {name}(")
    end = src.find("\ndef ", start + 1)
    return src[start : end if end > 0 else None]


# (n, p, g): fewer groups than observations, and more (the trace of a solve with Z Zᵀ takes
# the other branch of its call-time choice)
@pytest.mark.parametrize("sizes", [(40, 3, 6), (9, 2, 14)], ids=["g<n", "g>n"])
def test_reml_against_jax_and_hand_written_cholesky(sizes):
    d = derive(REML, wrt=["se", "su"])
    a = _reml_data(*sizes)
    value, grads = d.value_and_gradient_function()(**a)
    ja = {k: jnp.asarray(v, dtype=jnp.float64) for k, v in a.items()}
    want = jax.grad(lambda vs: _reml_jax(**{**ja, **vs}))({"se": ja["se"], "su": ja["su"]})
    np.testing.assert_allclose(value, float(_reml_jax(**ja)), rtol=1e-10)
    np.testing.assert_allclose(grads, [float(want["se"]), float(want["su"])], rtol=1e-8)
    hv, hg = _reml_cholesky(**a)
    np.testing.assert_allclose(value, hv, rtol=1e-10)
    np.testing.assert_allclose(grads, hg, rtol=1e-8)
    for v in ("se", "su"):
        np.testing.assert_allclose(d.gradient_function(v)(**a), float(want[v]), rtol=1e-8)


REML_NAMED_ESTIMATE = REML.replace(
    "r = y - X @ solve(B, X.T @ solve(V, y))",
    "beta = solve(B, X.T @ solve(V, y))\nr = y - X @ beta",
)


@pytest.mark.parametrize("block", [REML, REML_NAMED_ESTIMATE], ids=["inline", "named beta"])
def test_reml_code_factors_each_spd_matrix_once_and_forms_no_inverse(block, monkeypatch):
    d = derive(block, wrt=["se", "su"])
    body = _body(d.source(), "value_and_gradient")
    assert body.count("_gw_cho(") == 2  # V, and the Gram matrix B = Xᵀ V⁻¹ X
    for general in ("_gw_solve(", "_gw_inv(", "_gw_logdet(", "_gw_cho_inv(", "np.eye(n"):
        assert general not in body
    # the terms through r vanish (Xᵀ V⁻¹ r = 0): no n × n product is left but Z Zᵀ
    assert "np.outer(" not in body
    calls = []
    fn = d.value_and_gradient_function()
    ns = fn.__globals__  # the generated module's globals: every factorization goes through here
    real = ns["_gw_cho_factor"]

    def counting(a):
        calls.append(a.shape)
        return real(a)

    monkeypatch.setitem(ns, "_gw_cho_factor", counting)
    a = _reml_data(30, 3, 5)
    fn(**a)
    assert sorted(calls) == [(3, 3), (30, 30)]
    calls.clear()
    value, grads = fn(**a)
    assert sorted(calls) == [(3, 3), (30, 30)]
    hv, hg = _reml_cholesky(**a)
    np.testing.assert_allclose(value, hv, rtol=1e-10)
    np.testing.assert_allclose(grads, hg, rtol=1e-8)


def test_residual_with_another_right_hand_side_is_not_dropped():
    # r = y − X (XᵀX)⁻¹ Xᵀ z is orthogonal to X only when z = y: nothing may vanish here
    block = (
        "X: (n, p)\ny: (n,)\nz: (n,)\nr = y - X @ solve(X.T @ X, X.T @ z)\nf = sum((X.T @ r) ** 2)"
    )
    d = derive(block, wrt=["X", "y"])

    def ref(X, y, z):
        r = y - X @ jnp.linalg.solve(X.T @ X, X.T @ z)
        return jnp.sum((X.T @ r) ** 2)

    a = d.sample_inputs(sizes={"n": 8, "p": 3}, seed=2)
    ja = {k: jnp.asarray(v) for k, v in a.items()}
    value, (gx, gy) = d.value_and_gradient_function()(**a)
    assert abs(value) > 1e-3
    want = jax.grad(lambda vs: ref(**{**ja, **vs}))({"X": ja["X"], "y": ja["y"]})
    np.testing.assert_allclose(gx, np.asarray(want["X"]), rtol=1e-8, atol=1e-10)
    np.testing.assert_allclose(gy, np.asarray(want["y"]), rtol=1e-8, atol=1e-10)


def test_ols_residual_orthogonality_used_and_right():
    # f = ‖Xᵀ r‖² with r the OLS residual is 0 everywhere; its gradient too (JAX agrees)
    block = "X: (n, p)\ny: (n,)\nr = y - X @ solve(X.T @ X, X.T @ y)\nf = sum(r ** 2) + sum((X.T @ r) ** 2)"
    d = derive(block, wrt="y")
    a = d.sample_inputs(sizes={"n": 8, "p": 3}, seed=3)

    def ref(X, y):
        r = y - X @ jnp.linalg.solve(X.T @ X, X.T @ y)
        return jnp.sum(r**2) + jnp.sum((X.T @ r) ** 2)

    want = jax.grad(lambda y: ref(jnp.asarray(a["X"]), y))(jnp.asarray(a["y"]))
    np.testing.assert_allclose(d.gradient_function()(**a), np.asarray(want), rtol=1e-8, atol=1e-12)


def test_rank_deficient_gram_matrix_is_reported_singular():
    d = derive(REML, wrt=["se", "su"])
    a = _reml_data(20, 3, 4)
    a["X"][:, 2] = 2 * a["X"][:, 1]  # X loses full column rank: B = Xᵀ V⁻¹ X is singular
    with pytest.raises(np.linalg.LinAlgError, match=r"^B is singular to working precision"):
        d.value_and_gradient_function()(**a)


def test_kalman_gradient_in_p_is_one_product_with_h():
    d = derive(KALMAN, wrt=["P", "R"])
    body = _body(d.source(), "gradient_P")
    line = next(x for x in body.splitlines() if x.strip().startswith("_grad_P ="))
    assert line.count("H.T") == 1 and "/ 2" not in line


def test_symmetric_as_is_proves_or_refuses():
    head = "A: (n, n)\nS: (n, n) spd\nv: (n,)\n"
    no = derive(head + "F = A.T @ solve(S, A - outer(v, v @ A))\nf = trace(F)", wrt="A")
    assert not symmetric_as_is(no.expr.args[0].body)  # Aᵀ S⁻¹ A − (Aᵀ S⁻¹ v)(vᵀ A)
    yes = derive(head + "F = A.T @ solve(S, A - S @ outer(v, v @ A))\nf = trace(F)", wrt="A")
    assert symmetric_as_is(yes.expr.args[0].body)  # Aᵀ S⁻¹ A − Aᵀ v vᵀ A


@pytest.mark.parametrize("dtype", [np.float64, np.float32])
@pytest.mark.parametrize("lower", [False, True])
def test_inverse_and_trace_from_the_factor(dtype, lower):
    ns: dict = {"np": np}
    exec(HELPERS["_gw_lapack"] + HELPERS["_gw_cho_inv"] + HELPERS["_gw_cho_inv_trace"], ns)  # noqa: S102
    rng = np.random.default_rng(0)
    g = rng.standard_normal((7, 7))
    a = (g @ g.T + 7 * np.eye(7)).astype(dtype)
    factor = scipy.linalg.cho_factor(a, lower=lower)
    want = np.linalg.inv(a.astype(np.float64))  # NumPy's LU inverse, the outside reference
    tol = 1e-12 if dtype == np.float64 else 1e-5
    np.testing.assert_allclose(ns["_gw_cho_inv"](factor), want, rtol=tol, atol=tol)
    np.testing.assert_allclose(ns["_gw_cho_inv_trace"](factor), np.trace(want), rtol=tol)


def test_reml_hvp_and_jvp_against_jax():
    # the dropped products are zero only on the value's residual: second derivatives must still
    # carry the derivative of Xᵀ V⁻¹ r (taken before lowering)
    d = derive(REML, wrt=["se", "su"])
    a = _reml_data(20, 3, 4)
    ja = {k: jnp.asarray(v, dtype=jnp.float64) for k, v in a.items()}

    def f(se, su):
        return _reml_jax(ja["X"], ja["Z"], ja["y"], se, su)

    hess = jax.hessian(f, argnums=(0, 1))(ja["se"], ja["su"])
    ns = d._namespace()
    np.testing.assert_allclose(ns["hvp_se"](1.0, **a), float(hess[0][0]), rtol=1e-8)
    np.testing.assert_allclose(ns["hvp_su"](1.0, **a), float(hess[1][1]), rtol=1e-8)
    want = float(jax.grad(f, argnums=1)(ja["se"], ja["su"]))
    np.testing.assert_allclose(ns["jvp_su"](1.0, **a), want, rtol=1e-8)


def test_float32_stays_float32_through_the_factorizations():
    d = derive(REML, wrt=["se", "su"])
    a = _reml_data(20, 3, 4)
    a32 = {k: (v.astype(np.float32) if isinstance(v, np.ndarray) else v) for k, v in a.items()}
    v64, g64 = d.value_and_gradient_function()(**a)
    v32, g32 = d.value_and_gradient_function()(**a32)
    assert np.asarray(v32).dtype == np.float32 and all(
        np.asarray(g).dtype == np.float32 for g in g32
    )
    np.testing.assert_allclose(v32, v64, rtol=1e-4)
    np.testing.assert_allclose(g32, g64, rtol=1e-4)
