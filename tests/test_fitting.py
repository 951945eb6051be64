"""The fitting API: packed layout, objective, block Hessians, values, standard errors.

Reference derivatives come from JAX in float64 (reference library: JAX).
"""

from __future__ import annotations

import numpy as np
import pytest

from checks import assert_close, jax_packed, jax_reference, sizes_for
from gradwright import FormulaError, NotSupportedError, derive

# a warehouse's pallet-weight regression with an intercept and a penalty coupling both
# parameter groups: the cross blocks of the Hessian are not zero
PALLETS = """X: (n, p)
Y: (n, k)
W: (p, k)
b: (k,)
lam: ()
R = X @ W + outer(ones(n), b) - Y
loss = sum(exp(R / 4)) + sum(R**2) * (1 + lam * sum(W**2)) + lam * sum(b**4)"""


def _point(d, seed=0):
    a = d.sample_inputs(seed=seed)
    a["lam"] = 0.3
    return a


@pytest.mark.parametrize("seed", [0, 1])
def test_block_hessian_objective_and_products_match_jax(seed):
    d = derive(PALLETS, wrt=["W", "b"])
    a = _point(d, seed)
    ref = jax_reference(PALLETS, sizes_for(d))
    shapes = {v: np.shape(a[v]) for v in ("W", "b")}
    flat, value, grad, hess = jax_packed(ref, a, ("W", "b"), shapes)  # reference library: JAX
    obj = d.objective(args=("X", "Y"), lam=a["lam"])
    assert_close(obj.pack(W=a["W"], b=a["b"]), flat, 0, "layout (wrt order, column-major)")
    v, g = obj(flat, a["X"], a["Y"])
    assert_close(v, value, 1e-10, "value")
    assert_close(g, grad, 1e-10, "packed gradient")
    assert_close(obj.hess(flat, a["X"], a["Y"]), hess, 1e-10, "block Hessian")
    assert np.abs(hess[: flat.size - 2, -2:]).max() > 1e-3  # the cross block is there
    p = np.random.default_rng(seed).standard_normal(flat.size)
    assert_close(obj.hessp(flat, p, a["X"], a["Y"]), hess @ p, 1e-10, "Hessian-vector product")
    assert_close(d.hessian_function()(**a), hess, 1e-10, "hessian_function()")
    assert_close(d.hessian_function("W", "b")(**a), hess, 1e-10, "hessian_function(W, b)")
    assert_close(d.hvp_function()(p, **a), hess @ p, 1e-10, "hvp_function()")


def test_one_variable_keeps_its_hessian_over_vec():
    d = derive(PALLETS, wrt=["W"])
    a = _point(d)
    ref = jax_reference(PALLETS, sizes_for(d))
    _, _, _, hess = jax_packed(ref, a, ("W",), {"W": np.shape(a["W"])})  # reference: JAX
    assert_close(d.hessian_function()(**a), hess, 1e-10, "one variable")
    assert_close(d.hessian_function("W")(**a), hess, 1e-10, "one variable, named")


def test_unpack_returns_a_dict_and_round_trips():
    d = derive(PALLETS, wrt=["W", "b"])
    a = _point(d)
    obj = d.objective(X=a["X"], Y=a["Y"], lam=1.0)
    flat = np.arange(obj.pack(W=a["W"], b=a["b"]).size, dtype=float)
    back = obj.unpack(flat)
    assert set(back) == {"W", "b"}
    assert back["W"].shape == a["W"].shape and back["b"].shape == a["b"].shape
    assert back["W"][1, 0] == 1.0  # column-major: the second entry is row 1 of column 0
    assert_close(obj.pack(**back), flat, 0)
    # a fresh objective learns the sizes from its constants alone
    fresh = d.objective(X=a["X"], Y=a["Y"], lam=1.0)
    assert_close(fresh.pack(**fresh.unpack(flat)), flat, 0)
    assert "column-major" in fresh.describe()


def test_objective_drives_scipy_minimize_with_args_and_hessp():
    from scipy.optimize import minimize

    d = derive(PALLETS, wrt=["W", "b"])
    a = _point(d)
    obj = d.objective(args=("X", "Y", "lam"))
    x0 = obj.pack(W=np.zeros_like(a["W"]), b=np.zeros_like(a["b"]))
    fit = minimize(obj, x0, args=(a["X"], a["Y"], 0.3), jac=True, hessp=obj.hessp,
                   method="Newton-CG", options={"xtol": 1e-12})  # fmt: skip
    assert np.abs(obj(fit.x, a["X"], a["Y"], 0.3)[1]).max() < 1e-6
    fit2 = minimize(obj, x0, args=(a["X"], a["Y"], 0.3), jac=True, hess=obj.hess,
                    method="trust-exact", options={"gtol": 1e-10})  # fmt: skip
    assert_close(fit2.x, fit.x, 1e-6, "the same minimum")


def test_objective_refuses_unknown_or_variable_constants():
    d = derive(PALLETS, wrt=["W", "b"])
    with pytest.raises(FormulaError, match="not a constant"):
        d.objective(Q=1.0)
    with pytest.raises(FormulaError, match="is a variable"):
        d.objective(args=("W",))
    with pytest.raises(TypeError, match="expected 2 constants"):
        obj = d.objective(args=("X", "Y"), lam=1.0)
        obj(np.zeros(3), np.eye(2))


def test_structured_variables_pack_their_free_entries():
    block = "S: (n, n) spd\nD: (n, n) diagonal\nA: (n, n)\nf = sum((A @ S @ D)**2) + trace(S @ D)"
    d = derive(block, wrt=["S", "D"])
    a = d.sample_inputs(sizes={"n": 3})
    obj = d.objective(A=a["A"])
    flat = obj.pack(S=a["S"], D=a["D"])
    assert flat.size == 6 + 3
    back = obj.unpack(flat)
    assert_close(back["S"], a["S"], 0)
    assert_close(back["D"], a["D"], 0)
    # the packed gradient is the derivative along the free coordinates (central differences)
    _, g = obj(flat)
    h = 1e-6
    for k in range(flat.size):
        e = np.zeros(flat.size)
        e[k] = h
        fd = (obj(flat + e)[0] - obj(flat - e)[0]) / (2 * h)
        assert abs(fd - g[k]) <= 1e-6 * max(1.0, abs(g[k]))
    H = obj.hess(flat)
    for k in range(flat.size):
        e = np.zeros(flat.size)
        e[k] = h
        fd = (obj(flat + e)[1] - obj(flat - e)[1]) / (2 * h)
        assert np.abs(fd - H[:, k]).max() <= 1e-5 * max(1.0, np.abs(H).max())


def test_values_of_every_definition():
    d = derive(PALLETS, wrt=["W", "b"])
    a = _point(d)
    vals = d.values(**a)
    assert list(vals) == ["R", "loss"]
    R = a["X"] @ a["W"] + a["b"] - a["Y"]
    assert_close(vals["R"], R, 1e-14)
    assert_close(vals["loss"], d.function()(**a), 1e-14)


def test_mixed_second_derivative_is_shown_and_right():
    d = derive(PALLETS, wrt=["W", "b"])
    a = _point(d)
    m = d.second_derivative("W", "b")
    assert r"\partial \operatorname{vec}(b)^{\top}" in m.latex()
    assert "along db" in m.text()
    ref = jax_reference(PALLETS, sizes_for(d))
    shapes = {v: np.shape(a[v]) for v in ("W", "b")}
    _, _, _, hess = jax_packed(ref, a, ("W", "b"), shapes)  # reference library: JAX
    from gradwright.evaluate import evaluate

    dense = np.asarray(evaluate(m.matrix, a))
    assert_close(dense, hess[: a["W"].size, a["W"].size :], 1e-10, "mixed block")


def test_standard_errors_refuse_an_indefinite_hessian():
    d = derive("x: ()\ny: ()\nf = x**2 - y**2", wrt=["x", "y"])
    with pytest.raises(FormulaError, match="not positive definite"):
        d.standard_errors(x=0.0, y=0.0)
    se = derive("x: ()\ny: ()\nf = x**2 + 2 * y**2", wrt=["x", "y"]).standard_errors(x=1.0, y=1.0)
    assert se == pytest.approx({"x": np.sqrt(0.5), "y": 0.5})


def test_block_hessian_over_a_subset_is_refused_plainly():
    d = derive(PALLETS, wrt=["W", "b"])
    with pytest.raises(NotSupportedError, match="some of the variables"):
        d.hessian_function("b", "W")
