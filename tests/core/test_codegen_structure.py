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


NETWORK = (
    "X: (n, d)\nW1: (d, h)\nb1: (h,)\nW2: (h, k)\nb2: (k,)\nY: (n, k)\n"
    "H = tanh(X @ W1 + b1)\nf = sum((H @ W2 + b2 - Y)**2)"
)
ATTENTION = "Q: (n, e)\nK: (m, e)\nV: (m, e)\nc: ()\nA = exp(c * Q @ K.T)\nf = sum((A @ V)**2)"


def _network(X, W1, b1, W2, b2, Y):
    return jnp.sum((jnp.tanh(X @ W1 + b1) @ W2 + b2 - Y) ** 2)


def _attention(Q, K, V, c):
    return jnp.sum((jnp.exp(c * Q @ K.T) @ V) ** 2)


@pytest.mark.parametrize(
    ("block", "wrt", "ref", "sizes", "once"),
    [
        (NETWORK, ("W1", "W2", "b1", "b2"), _network, {"n": 7, "d": 5, "h": 4, "k": 3}, "np.tanh"),
        (ATTENTION, ("Q", "K", "V"), _attention, {"n": 6, "m": 5, "e": 3}, "np.exp"),
    ],
    ids=["network", "attention"],
)
def test_shared_and_transposed_subexpressions_computed_once(block, wrt, ref, sizes, once):
    d = derive(block, wrt=list(wrt))
    body = _body(d.source(), "value_and_gradient")
    assert body.count(once) == 1  # the hidden layer / score matrix, also where transposed
    assert "np.ones(" not in body and "np.outer(" not in body  # sums and broadcast views
    a = d.sample_inputs(sizes=sizes, seed=6)
    a = {k: (0.3 * v if k == "c" else v) for k, v in a.items()}
    value, grads = d.value_and_gradient_function()(**a)
    ja = {k: jnp.asarray(v, dtype=jnp.float64) for k, v in a.items()}
    want = jax.grad(lambda vs: ref(**{**ja, **vs}))({v: ja[v] for v in wrt})
    np.testing.assert_allclose(value, float(ref(**ja)), rtol=1e-10)
    for v, got in zip(wrt, grads):
        np.testing.assert_allclose(got, np.asarray(want[v]), rtol=1e-8, atol=1e-10)


SOFTMAX_ATTENTION = (
    "Q: (n, e)\nK: (m, e)\nV: (m, e)\nT: (n, e)\nc: ()\n"
    "A = softmax(c * Q @ K.T, axis=1)\nf = sum((A @ V - T)**2)"
)


def _softmax_attention(Q, K, V, T, c):
    return jnp.sum((jax.nn.softmax(c * Q @ K.T, axis=1) @ V - T) ** 2)


def test_softmax_attention_is_written_as_by_hand():
    """One softmax, six products, the backward A * (G - rowsum(A * G)) once: no ones matrix,
    no repeated products, no scalar multiple of an n x m array of its own; values against
    JAX (jax.grad of jax.nn.softmax)."""
    d = derive(SOFTMAX_ATTENTION, wrt=["Q", "K", "V"])
    body = _body(d.source(), "value_and_gradient")
    code = body[body.index("    A = ") :]  # after the argument checks
    assert code.count("_gw_softmax_axis") == 1
    assert code.count(" @ ") == 6, code  # QKᵀ, AV, GVᵀ, SK, SᵀQ, AᵀR: no recomputation
    assert "np.ones(" not in code and "np.outer(" not in code
    assert code.count("ij,ij->i") == 1  # the row sums of A * G, by einsum, once
    assert "2 * c * A" not in code  # the numbers go into an array the code owns
    # the backward consumes G (the product with Vᵀ) in place: subtract, multiply by A
    assert "_gw_isub(_t2, " in code and "_gw_imul(_gw_imul(_gw_isub(" in code
    rng = np.random.default_rng(11)
    a = {"Q": rng.standard_normal((7, 3)), "K": rng.standard_normal((5, 3))}
    a.update(V=rng.standard_normal((5, 3)), T=rng.standard_normal((7, 3)), c=0.8)
    value, grads = d.value_and_gradient_function()(**a)
    ja = {k: jnp.asarray(v) for k, v in a.items()}
    want = jax.grad(lambda vs: _softmax_attention(**{**ja, **vs}))({k: ja[k] for k in "QKV"})
    np.testing.assert_allclose(value, float(_softmax_attention(**ja)), rtol=1e-12)
    for k, g in zip("QKV", grads):
        np.testing.assert_allclose(g, np.asarray(want[k]), rtol=1e-10, atol=1e-12)


def test_network_allocates_only_what_it_needs():
    """The hidden layer's bias added and tanh taken in the array of X @ W1; 1 - H² and its
    product with the back-propagated residual in one array; one tanh."""
    d = derive(NETWORK, wrt=["W1", "b1", "W2", "b2"])
    body = _body(d.source(), "value_and_gradient")
    assert body.count("np.tanh") == 1
    assert "_gw_apply(np.tanh, _gw_iadd(X @ W1, " in body
    assert "_gw_imul(_gw_rsub(1, H ** 2), " in body
