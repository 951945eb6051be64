"""One Cholesky factor per matrix known to be spd, no explicit inverse, values against JAX.

Reference library: JAX (jax.grad, float64). For a variable declared spd the reference is the
symmetric part of JAX's gradient (the gradient in the space of symmetric matrices).
"""

from __future__ import annotations

import jax
import jax.numpy as jnp
import numpy as np
import pytest

from gradwright import derive

jax.config.update("jax_enable_x64", True)

KALMAN = (
    "H: (m, n)\nP: (n, n) spd\nR: (m, m) spd\nv: (m,)\nS = H @ P @ H.T + R\n"
    "nll = logdet(S) + v @ solve(S, v)"
)
GAUSSIAN_PROCESS = (
    "K: (n, n) spd\ns: () positive\ny: (n,)\nC = K + s * eye(n)\n"
    "nll = 0.5 * (y @ solve(C, y) + logdet(C))"
)
RIDGE_EVIDENCE = "X: (n, p)\nb: (p,)\nlam: () positive\nA = X.T @ X + lam * eye(p)\nf = logdet(A) + b @ solve(A, b)"


def _kalman(H, P, R, v):
    S = H @ P @ H.T + R
    return jnp.linalg.slogdet(S)[1] + v @ jnp.linalg.solve(S, v)


def _gp(K, s, y):
    C = K + s * jnp.eye(K.shape[0])
    return 0.5 * (y @ jnp.linalg.solve(C, y) + jnp.linalg.slogdet(C)[1])


def _ridge(X, b, lam):
    A = X.T @ X + lam * jnp.eye(X.shape[1])
    return jnp.linalg.slogdet(A)[1] + b @ jnp.linalg.solve(A, b)


CASES = [
    (KALMAN, ("P", "R"), _kalman, {"m": 5, "n": 4}),
    (GAUSSIAN_PROCESS, ("s",), _gp, {"n": 6}),
    (RIDGE_EVIDENCE, ("X", "lam"), _ridge, {"n": 9, "p": 4}),
]


def _body(src: str, name: str) -> str:
    start = src.index(f"def {name}(")
    end = src.find("\ndef ", start + 1)
    return src[start : end if end > 0 else None]


@pytest.mark.parametrize(("block", "wrt", "ref", "sizes"), CASES, ids=["kalman", "gp", "ridge"])
def test_one_cholesky_and_values_against_jax(block, wrt, ref, sizes):
    d = derive(block, wrt=list(wrt))
    body = _body(d.source(), "value_and_gradient")
    assert body.count("_gw_cho(") == 1
    for general in ("_gw_solve(", "_gw_inv(", "_gw_logdet(", "np.linalg.inv", "slogdet"):
        assert general not in body
    a = d.sample_inputs(sizes=sizes, seed=5)
    value, grads = d.value_and_gradient_function()(**a)
    grads = grads if len(wrt) > 1 else (grads,)
    ja = {k: jnp.asarray(v, dtype=jnp.float64) for k, v in a.items()}
    want = jax.grad(lambda vs: ref(**{**ja, **vs}))({v: ja[v] for v in wrt})
    np.testing.assert_allclose(value, float(ref(**ja)), rtol=1e-10)
    for v, got in zip(wrt, grads):
        w = np.asarray(want[v])
        if "spd" in d.symbols[v].structure:
            w = 0.5 * (w + w.T)
        np.testing.assert_allclose(got, w, rtol=1e-8, atol=1e-10)


def test_not_positive_definite_built_matrix_is_named():
    d = derive(GAUSSIAN_PROCESS, wrt="s")
    with pytest.raises(np.linalg.LinAlgError, match=r"^C is not positive definite"):
        d.function()(K=-np.eye(3), s=0.1, y=np.ones(3))
