"""The fast path of the argument checks, and dtype preservation of generated functions.

A remembered call must never let a bad or unusual argument through: every case below is
called right after a good call with the same shapes, so that the fast path is the one tried.
"""

from __future__ import annotations

import numpy as np
import pytest

from gradwright import derive

RIDGE = "X: (n, p)\ny: (n,)\nw: (p,)\nlam: ()\nf = sum((X @ w - y)**2) + lam * sum(w**2)"


@pytest.fixture(scope="module")
def ridge():
    d = derive(RIDGE, wrt="w")
    rng = np.random.default_rng(3)
    a = {"X": rng.standard_normal((6, 3)), "y": rng.standard_normal(6), "w": rng.standard_normal(3)}
    return d, {**a, "lam": 0.5}


def _literal(X, y, w, lam):
    return 2 * X.T @ (X @ w - y) + 2 * lam * w


def test_fast_path_is_taken_and_gives_the_same_numbers(ridge):
    d, a = ridge
    g = d.gradient_function()
    first = g(**a)
    key, dims = g.__globals__["_gw_last_gradient_w"][0]
    assert dims == {"n": 6, "p": 3} and key is not None
    np.testing.assert_allclose(g(**a), first, rtol=0, atol=0)
    np.testing.assert_allclose(first, _literal(**a), rtol=1e-12)


def test_messages_after_a_remembered_call(ridge):
    d, a = ridge
    g = d.gradient_function()
    g(**a)
    with pytest.raises(ValueError, match=r"^y has 5 entries but X has n = 6 rows$"):
        g(**{**a, "y": np.ones(5)})
    g(**a)
    with pytest.raises(TypeError, match=r"^X is a complex array, but X is declared real"):
        g(**{**a, "X": a["X"] + 0j})
    g(**a)
    with pytest.raises(TypeError, match=r"^lam is a complex array"):
        g(**{**a, "lam": 0.5 + 0j})
    g(**a)
    with pytest.raises(TypeError, match=r"^w must be a numeric array, got str"):
        g(**{**a, "w": "abc"})


@pytest.mark.filterwarnings("ignore::PendingDeprecationWarning")  # np.asmatrix, on purpose
def test_unusual_arguments_take_the_full_check(ridge):
    d, a = ridge
    g = d.gradient_function()
    want = _literal(**a)
    g(**a)
    # integers, lists and matrices of the remembered shapes are converted, not passed through
    ints = {**a, "X": np.arange(18).reshape(6, 3), "lam": 2}
    np.testing.assert_allclose(g(**ints), _literal(ints["X"].astype(float), a["y"], a["w"], 2.0))
    g(**a)
    np.testing.assert_allclose(g(**{**a, "y": list(a["y"])}), want, rtol=1e-12)
    g(**a)
    got = g(**{**a, "X": np.asmatrix(a["X"])})
    assert type(got) is np.ndarray and got.shape == (3,)
    np.testing.assert_allclose(got, want, rtol=1e-12)
    g(**a)
    np.testing.assert_allclose(g(**{**a, "lam": np.float64(0.5)}), want, rtol=1e-12)


DTYPE_BLOCKS = [
    (RIDGE, "w"),
    ("A: (n, n)\nx: (n,)\nf = x @ (A + eye(n)) @ x + sum(ones(n, n) @ x)", "x"),
    ("S: (n, n) spd\nZ: (m, n)\nf = 3 * logdet(S) + trace(solve(S, Z.T @ Z))", "S"),
    ("A: (n, n)\nB: (n, k)\nf = logdet(A) + sum(solve(A, B))", "B"),
    ("W: (k, n)\nx: (n,)\ny: (k,)\np = softmax(W @ x)\nf = -y @ log(p)", "W"),
]


@pytest.mark.parametrize(("block", "wrt"), DTYPE_BLOCKS)
@pytest.mark.parametrize("dtype", [np.float32, np.float64])
def test_dtype_in_is_dtype_out(block, wrt, dtype):
    d = derive(block, wrt=wrt)
    a = d.sample_inputs(sizes={"n": 4, "m": 7, "k": 3, "p": 3}, seed=2)
    a = {k: (np.asarray(v, dtype=dtype) if np.ndim(v) else float(v)) for k, v in a.items()}
    ref = {k: np.asarray(v, dtype=np.float64) if np.ndim(v) else v for k, v in a.items()}
    direction = np.ones_like(a[wrt])
    calls = {
        "value": (d.function(), ()),
        "gradient": (d.gradient_function(wrt), ()),
        "jvp": (d.jvp_function(wrt), (direction,)),
        "hvp": (d.hvp_function(wrt), (direction,)),
        "hessian": (d.hessian_function(wrt), ()),
    }
    for name, (fn, extra) in calls.items():
        for _ in range(2):  # the full check, then the fast path
            out = fn(*extra, **a)
            assert np.asarray(out).dtype == dtype, name
        want = fn(*[np.asarray(e, dtype=np.float64) for e in extra], **ref)
        tol = 2e-3 if dtype == np.float32 else 1e-12
        np.testing.assert_allclose(out, want, rtol=tol, atol=tol * np.max(np.abs(want)))
    value, grad = d.value_and_gradient_function()(**a)
    assert np.asarray(value).dtype == dtype and grad.dtype == dtype
