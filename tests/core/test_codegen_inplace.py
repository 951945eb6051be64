"""The in-place pass of the generated code (printing/inplace.py): what it rewrites, what it
never touches, that no function changes the arrays it is given, and values against JAX.

Reference library: JAX (jax.grad / jax.jvp / jax.vjp, float64, jax.nn.softmax for the rows).
"""

from __future__ import annotations

import numpy as np
import pytest
from core_cases import GRADIENT_CASES

from checks import jax, jnp, random_point
from gradwright import derive
from gradwright.printing.inplace import INPLACE_HELPERS, rewrite_function, rewrite_line
from gradwright.printing.runtime import HELPERS

# --- the rewriting itself ----------------------------------------------------------------------


@pytest.mark.parametrize(
    ("text", "want"),
    [
        ("A @ V - T", "_gw_isub(A @ V, T)"),
        ("X @ W1 + b1", "_gw_iadd(X @ W1, b1)"),
        ("(1 - H * H) * (R @ W2.T)", "_gw_imul(_gw_rsub(1, H * H), R @ W2.T)"),
        ("2 * (X.T @ G)", "_gw_imul(X.T @ G, 2)"),
        ("np.tanh(Z) / s", "_gw_idiv(np.tanh(Z), s)"),
        ("s / np.exp(Z)", "_gw_rdiv(s, np.exp(Z))"),
        ("np.tanh(X @ W + b)", "_gw_apply(np.tanh, _gw_iadd(X @ W, b))"),
        # numbers are multiplied together first, the arrays go into one new array
        ("2 * c * A * B", "_gw_imul(A * B, 2 * c)"),
        # a call-time choice: the branches are rewritten, the flop counts compared are not
        (
            '(X @ Y - Z if _dims["n"] * _dims["k"] < 2 * _dims["n"] else Z - X @ Y)',
            "_gw_isub(X @ Y, Z) if _dims['n'] * _dims['k'] < 2 * _dims['n'] else _gw_rsub(Z, X @ Y)",
        ),
    ],
)
def test_rewrites_operations_on_new_arrays(text, want):
    assert rewrite_line(text, {"c", "s"})[0] == want


@pytest.mark.parametrize(
    "text",
    [
        "X * Y",  # the user's arrays
        "X.T * Y",  # a view of one
        "X[:, 0] * y",  # a view too
        "np.diagonal(X) * y",  # a call that may return a view
        "np.broadcast_to(np.sum(X, axis=1), (n, k)) * Y",  # a read-only view
        "np.real(Z) * Y",  # the argument itself for a real Z
        "_t1 * _t2",  # named temporaries (others may read them later)
        "2 * c",  # numbers
        "A @ B",  # a product is never written into its own operands
        '_dims["n"] * _dims["k"] * 2 + min(_dims["n"] * 3, 4)',  # sizes are numbers
    ],
)
def test_never_writes_into_what_it_does_not_own(text):
    assert rewrite_line(text, {"c"}) == (text, set())


def test_a_named_array_is_consumed_only_where_all_its_reads_come_first():
    # G read inside the subtraction only: the subtraction may write into G
    assert (
        rewrite_line("A * (G - np.sum(A * G, axis=1))", set(), {"G"})[0]
        == "_gw_imul(_gw_isub(G, np.sum(A * G, axis=1)), A)"
    )
    # G read again after the subtraction: it must not change
    assert rewrite_line("(G - S) * G", set(), {"G"})[0] == "_gw_imul(G - S, G)"
    # not owned: never written
    assert rewrite_line("G - S", set(), set()) == ("G - S", set())


def test_function_pass_owns_only_temporaries_read_by_one_later_line():
    lines = [
        "    _t1 = X @ W",  # a new array, read by one later line: that line may consume it
        "    _t2 = _t1 - Y",
        "    _t3 = X.T",  # a view: never owned
        "    _t4 = _t3 * 2",
        "    _t5 = Z @ W",  # read by two lines: never consumed
        "    _o1 = _t5 - Y",
        "    _o2 = _t5 + Y",
    ]
    out, _used = rewrite_function(lines, "    return _t2, _t4, _o1, _o2", set())
    assert out[1] == "    _t2 = _gw_isub(_t1, Y)"
    assert out[3] == "    _t4 = _t3 * 2"
    assert out[5] == "    _o1 = _t5 - Y" and out[6] == "    _o2 = _t5 + Y"
    # a temporary the tail returns is never consumed
    out, _ = rewrite_function(["    _t1 = X @ W", "    _t2 = _t1 - Y"], "    return _t1", set())
    assert out[1] == "    _t2 = _t1 - Y"


# --- the runtime helpers -----------------------------------------------------------------------


def _helpers(minimum: int | None = 0) -> dict:
    space = {"np": np}
    for name in sorted(INPLACE_HELPERS):
        exec(HELPERS[name], space)
    if minimum is not None:
        space["_GW_INPLACE_MIN"] = minimum
    return space


def test_small_arrays_take_the_plain_operator():
    h = _helpers(minimum=None)
    x = np.ones(10)
    assert h["_gw_imul"](x, 2.0) is not x and np.all(x == 1)
    big = np.ones(h["_GW_INPLACE_MIN"])
    assert h["_gw_imul"](big, 2.0) is big and np.all(big == 2)


def test_helpers_write_in_place_only_when_shape_and_dtype_fit():
    h = _helpers()
    x = np.arange(6.0).reshape(2, 3)
    out = h["_gw_imul"](x, np.array([1.0, 2.0, 3.0]))
    assert out is x and np.array_equal(out, [[0, 2, 6], [3, 8, 15]])
    # a float32 array never receives float64 values: a new float64 result, x unchanged
    x32 = np.ones(3, dtype=np.float32)
    out = h["_gw_iadd"](x32, np.full(3, 1e-9))
    assert out is not x32 and out.dtype == np.float64 and np.all(x32 == 1)
    # a Python number keeps float32 (NumPy's weak scalars) and the array is reused
    out = h["_gw_imul"](x32, 2.0)
    assert out is x32 and out.dtype == np.float32
    # real never receives complex
    xr = np.ones(2)
    out = h["_gw_isub"](xr, np.array([1j, 2j]))
    assert out is not xr and np.iscomplexobj(out) and np.all(xr == 1)
    # a result larger than x (broadcasting) is a new array
    col = np.ones((2, 1))
    out = h["_gw_iadd"](col, np.ones((2, 3)))
    assert out.shape == (2, 3) and np.all(col == 1)
    # reversed forms: y - x and y / x into x
    x = np.array([1.0, 2.0, 4.0])
    assert h["_gw_rsub"](1, x) is x and np.array_equal(x, [0, -1, -3])
    x = np.array([1.0, 2.0, 4.0])
    assert h["_gw_rdiv"](1, x) is x and np.array_equal(x, [1, 0.5, 0.25])
    # numbers pass through
    assert h["_gw_imul"](2.0, 3.0) == 6.0
    # a ufunc of one argument: into a real floating array only
    x = np.array([0.0, 1.0], dtype=np.float32)
    assert (
        h["_gw_apply"](np.tanh, x) is x
        and x.dtype == np.float32
        and x[1] == np.tanh(1.0, dtype=np.float32)
    )
    z = np.array([1 + 1j])
    out = h["_gw_apply"](np.abs, z)
    assert out is not z and out.dtype == np.float64 and z[0] == 1 + 1j


# --- generated functions leave their arguments alone -------------------------------------------

ATTENTION = (
    "Q: (n, e)\nK: (m, e)\nV: (m, e)\nT: (n, e)\nc: ()\n"
    "A = softmax(c * Q @ K.T, axis=1)\nf = sum((A @ V - T)**2)"
)
NETWORK = (
    "X: (n, d)\nW1: (d, h)\nb1: (h,)\nW2: (h, k)\nb2: (k,)\nY: (n, k)\n"
    "H = tanh(X @ W1 + b1)\nf = sum((H @ W2 + b2 - Y)**2)"
)
LOGISTIC = "X: (n, p)\ny: (n,)\nw: (p,)\nf = sum(log(1 + exp(-y * (X @ w))))"


def _call_everything(d, arrays, rng):
    """Every generated function of one variable at a time, with copies checked unchanged."""
    snapshot = {k: np.array(v, copy=True) for k, v in arrays.items()}
    calls = [lambda: d.function()(**arrays), lambda: d.value_and_gradient_function()(**arrays)]
    for v in d.variables:
        calls.append(lambda v=v: d.gradient_function(v)(**arrays))
    for v in d.variables:
        shape = np.shape(arrays[v])
        direction = rng.standard_normal(shape)
        kept = direction.copy()
        for make in (d.jvp_function, d.hvp_function):
            make(var=v)(direction, **arrays)
            assert np.array_equal(direction, kept), f"a direction changed ({make.__name__} {v})"
        cot = np.asarray(rng.standard_normal()) if d.is_scalar else None
        if cot is not None:
            kept_cot = cot.copy()
            d.vjp_function(var=v)(cot, **arrays)
            assert np.array_equal(cot, kept_cot)
    for call in calls:
        call()
    for k, v in arrays.items():
        assert np.array_equal(np.asarray(v), snapshot[k]), f"argument {k} changed"


@pytest.mark.parametrize(
    "block", [ATTENTION, NETWORK, LOGISTIC], ids=["attention", "network", "logistic"]
)
def test_generated_functions_leave_arguments_unchanged(block):
    names = ("Q", "K", "V", "W1", "b1", "W2", "b2", "w")
    d = derive(block, wrt=[n for n in names if f"\n{n}:" in "\n" + block])
    rng = np.random.default_rng(3)
    _call_everything(d, random_point(d, 4), rng)


SCALAR_CASES = [c for c in GRADIENT_CASES if not c.xfail]


@pytest.mark.parametrize("case", SCALAR_CASES[::3], ids=lambda c: c.id)
def test_reference_blocks_leave_arguments_unchanged(case):
    d = derive(case.block, wrt=list(case.wrt))
    _call_everything(d, random_point(d, 1), np.random.default_rng(0))


# --- rewritten forms against JAX ---------------------------------------------------------------


def _jax_attention(Q, K, V, T, c):
    return jnp.sum((jax.nn.softmax(c * Q @ K.T, axis=1) @ V - T) ** 2)


def test_attention_softmax_value_gradient_and_hvp_against_jax():
    d = derive(ATTENTION, wrt=["Q", "K", "V"])
    rng = np.random.default_rng(7)
    a = {"Q": rng.standard_normal((6, 3)), "K": rng.standard_normal((5, 3))}
    a.update(V=rng.standard_normal((5, 3)), T=rng.standard_normal((6, 3)), c=0.7)
    value, grads = d.value_and_gradient_function()(**a)
    ja = {k: jnp.asarray(v) for k, v in a.items()}
    wrt = ("Q", "K", "V")
    want = jax.grad(lambda vs: _jax_attention(**{**ja, **vs}))({k: ja[k] for k in wrt})
    np.testing.assert_allclose(value, float(_jax_attention(**ja)), rtol=1e-12)
    for k, g in zip(wrt, grads):
        np.testing.assert_allclose(g, np.asarray(want[k]), rtol=1e-10, atol=1e-12)
    # the Hessian-vector product in Q: forward-over-reverse in JAX
    dQ = rng.standard_normal((6, 3))
    grad_q = jax.grad(lambda q: _jax_attention(**{**ja, "Q": q}))
    want_hvp = jax.jvp(grad_q, (ja["Q"],), (jnp.asarray(dQ),))[1]
    got = d.hvp_function(var="Q")(dQ, **a)
    np.testing.assert_allclose(got, np.asarray(want_hvp), rtol=1e-9, atol=1e-11)


@pytest.mark.parametrize("dtype", [np.float32, "mixed"])
def test_float32_and_mixed_precision_arguments(dtype):
    """float32 in, float32 out; a float32 array among float64 ones never gets float64 values
    written into a float32 temporary (the result equals the all-float64 one to float64
    precision where the float32 input is exactly representable)."""
    d = derive(NETWORK, wrt=["W1", "b1", "W2", "b2"])
    a = random_point(d, 2)
    a = {k: np.asarray(v, dtype=np.float32).astype(np.float64) for k, v in a.items()}
    value64, grads64 = d.value_and_gradient_function()(**a)
    if dtype == "mixed":
        b = dict(a, X=a["X"].astype(np.float32))  # exactly the same numbers, a float32 array
        value, grads = d.value_and_gradient_function()(**b)
        assert all(g.dtype == np.float64 for g in grads)
        np.testing.assert_allclose(value, value64, rtol=1e-13)
        for g, w in zip(grads, grads64):
            np.testing.assert_allclose(g, w, rtol=1e-12, atol=1e-13)
    else:
        b = {k: v.astype(np.float32) for k, v in a.items()}
        value, grads = d.value_and_gradient_function()(**b)
        assert all(g.dtype == np.float32 for g in grads)
        for g, w in zip(grads, grads64):
            np.testing.assert_allclose(g, w, rtol=2e-4, atol=2e-4)


def _jax_common(A, X, Y, c):
    return jnp.sum(jnp.exp(c * A * X - c * A * Y))


def test_common_factors_of_a_sum_are_taken_out():
    """c A X - c A Y is computed as c A (X - Y): one entrywise product fewer, in place."""
    d = derive("A: (n, k)\nX: (n, k)\nY: (n, k)\nc: ()\nf = sum(exp(c * A * X - c * A * Y))", "X")
    body = d.source()
    body = body[body.index("def value_and_gradient(") :]
    assert "_gw_imul(_gw_imul(X - Y, A), c)" in body
    rng = np.random.default_rng(8)
    a = {k: rng.standard_normal((4, 3)) for k in "AXY"}
    a["c"] = 0.6
    value, grad = d.value_and_gradient_function()(**a)
    ja = {k: jnp.asarray(v) for k, v in a.items()}
    np.testing.assert_allclose(value, float(_jax_common(**ja)), rtol=1e-12)
    want = jax.grad(lambda x: _jax_common(**{**ja, "X": x}))(ja["X"])
    np.testing.assert_allclose(grad, np.asarray(want), rtol=1e-10, atol=1e-12)
