"""Generated functions refuse bad arrays with messages that name the symbol and the dim."""

from __future__ import annotations

import warnings

import numpy as np
import pytest
import torch

from gradwright import derive

FACTOR = (
    "P: (s, w)\nU: (s, r)\nV: (w, r)\nmu: ()\nR = P - U @ V.T\n"
    "loss = sum(R**2) + mu * (sum(U**2) + sum(V**2))"
)


@pytest.fixture(scope="module")
def factor():
    d = derive(FACTOR, wrt=["U", "V"])
    arrays = d.sample_inputs(sizes={"s": 4, "w": 5, "r": 3}, seed=1)
    return d, arrays


def kinds(d):
    """Every generated callable of a scalar target, as (label, callable taking **arrays)."""
    return [
        ("value", d.function()),
        ("gradient", d.gradient_function("U")),
        ("value_and_gradient", d.value_and_gradient_function()),
        ("hessian", d.hessian_function("U")),
        ("jacobian", d.jacobian_function("U")),
    ]


@pytest.mark.parametrize("which", range(5))
def test_dim_mismatch_names_both_symbols_and_the_dim(factor, which):
    d, a = factor
    label, fn = kinds(d)[which]
    with pytest.raises(ValueError, match=r"^V has 4 columns but U has r = 3$"):
        fn(**{**a, "V": np.ones((5, 4))})
    with pytest.raises(ValueError, match=r"^V has 6 rows but P has w = 5 columns$"):
        fn(**{**a, "V": np.ones((6, 3))})


def test_literal_and_product_dims():
    d = derive("X: (n, 3)\nf = sum(X)", wrt="X")
    with pytest.raises(ValueError, match="X has 4 columns but its declaration says 3"):
        d.function()(X=np.ones((2, 4)))
    d = derive("X: (n, n)\ny: (n*n,)\nf = vec(X) @ y", wrt="X")
    with pytest.raises(ValueError, match=r"y has 5 entries but n\*n = 4"):
        d.function()(X=np.ones((2, 2)), y=np.ones(5))


@pytest.mark.parametrize(
    ("name", "value", "expected"),
    [
        ("U", np.ones(4), r"U should be a matrix \(s, r\) but has 1 axis, shape \(4,\)"),
        ("U", np.ones((4, 3, 1)), r"U should be a matrix \(s, r\) but has 3 axes"),
        ("mu", np.ones(2), r"mu should be a scalar \(\) but has 1 axis"),
        ("P", 3.0, r"P should be a matrix \(s, w\) but has 0 axes"),
    ],
)
def test_wrong_number_of_axes(factor, name, value, expected):
    d, a = factor
    with pytest.raises(ValueError, match=expected):
        d.function()(**{**a, name: value})


def test_missing_and_extra_arguments_are_named(factor):
    d, a = factor
    f = d.function()
    with pytest.raises(TypeError, match="missing 1 required keyword-only argument: 'V'"):
        f(**{k: v for k, v in a.items() if k != "V"})
    with pytest.raises(TypeError, match="unexpected keyword argument 'Q'"):
        f(**a, Q=np.ones(2))
    with pytest.raises(TypeError, match="positional arguments: pass arrays by keyword"):
        f(a["P"], a["U"], a["V"], a["mu"])
    with pytest.raises(TypeError, match="missing .*'U'"):
        d.gradient_function("U")(P=a["P"], V=a["V"], mu=a["mu"])
    assert d.arguments() == ["P", "U", "V", "mu"]


@pytest.mark.parametrize(
    ("value", "expected"),
    [
        ("abc", "got str"),
        (b"abc", "got bytes"),
        (None, "got NoneType"),
        ({"a": 1}, "got dict"),
        ({1, 2}, "got set"),
        (np.array([[object()] * 3] * 4), "got dtype object"),
        ([["a"] * 3] * 4, "got list"),
        ([[1.0, 2.0], [3.0]], "NumPy cannot read it"),
        (np.array(["2020-01-01"] * 12, dtype="datetime64[D]").reshape(4, 3), "dtype datetime64"),
    ],
)
def test_non_numeric_input_is_refused_naming_the_symbol(factor, value, expected):
    d, a = factor
    with pytest.raises(TypeError, match=r"^U must be a numeric array") as info:
        d.function()(**{**a, "U": value})
    assert expected in str(info.value)


def test_integer_and_boolean_arrays_are_read_as_floats(factor):
    d, a = factor
    ints = {k: np.round(v * 10).astype(int) for k, v in a.items()}
    floats = {k: v.astype(float) for k, v in ints.items()}
    assert d.function()(**ints) == pytest.approx(d.function()(**floats))
    grad = d.gradient_function("U")(**ints)
    assert grad.dtype == float


def test_direction_and_cotangent_shapes_are_checked(factor):
    d, a = factor
    with pytest.raises(ValueError, match="the direction dU has 2 rows but P has s = 4"):
        d.jvp_function("U")(np.ones((2, 2)), **a)
    g = derive("X: (m, n)\nF = X @ X.T", wrt="X")
    with pytest.raises(ValueError, match=r"the cotangent .* should be a matrix \(m, m\)"):
        g.vjp_function("X")(np.ones(3), X=np.ones((2, 2)))


SINGULAR = np.array([[1.0, 2.0, 3.0], [2.0, 4.0, 6.0], [0.0, 1.0, 1.0]])


@pytest.mark.parametrize(
    ("block", "wrt", "extra"),
    [
        ("A: (n, n)\nx: (n,)\nf = x @ inv(A) @ x", "x", {"x": np.ones(3)}),
        ("A: (n, n)\nx: (n,)\nf = x @ inv(A) @ x", "A", {"x": np.ones(3)}),
        ("A: (n, n)\nb: (n,)\nf = sum(solve(A, b))", "b", {"b": np.ones(3)}),
        ("A: (n, n)\nb: (n,)\nf = sum(solve(A, b))", "A", {"b": np.ones(3)}),
        ("A: (n, n)\nf = logdet(A)", "A", {}),
        ("A: (n, n)\nB: (n, k)\nF = inv(A) @ B", "B", {"B": np.ones((3, 2))}),
    ],
)
def test_singular_matrix_names_the_symbol(block, wrt, extra):
    d = derive(block, wrt=wrt)
    fns = [d.function()]
    fns.append(d.gradient_function(wrt) if d.is_scalar else d.jacobian_function(wrt))
    for fn in fns:
        with pytest.raises(np.linalg.LinAlgError, match=r"^A is singular"):
            fn(A=SINGULAR, **extra)


def test_spd_that_is_not_positive_definite_names_the_symbol():
    d = derive("S: (n, n) spd\nb: (n,)\nf = logdet(S) + b @ solve(S, b)", wrt="S")
    for fn in (d.function(), d.gradient_function("S")):
        with pytest.raises(np.linalg.LinAlgError, match=r"^S is not positive definite"):
            fn(S=-np.eye(3), b=np.ones(3))
        with pytest.raises(ValueError, match=r"^S is declared spd but is not symmetric"):
            fn(S=np.array([[2.0, 1.0], [0.0, 2.0]]), b=np.ones(2))


def test_non_finite_results_warn(factor):
    d, a = factor
    with pytest.warns(RuntimeWarning, match="the value is not finite"):
        d.function()(**{**a, "mu": np.inf})
    # array results are checked when asked for (the test is one BLAS call per result)
    g = d.gradient_function("U")
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        assert not np.isfinite(g(**{**a, "mu": np.inf})).any()
    d.warn_nonfinite = True  # also for functions made before
    with pytest.warns(RuntimeWarning, match=r"the gradient of U is not finite .* in 12 of 12"):
        g(**{**a, "mu": np.inf})
    x = derive("x: (n,)\nf = sum(log(x))", wrt="x", warn_nonfinite=True)
    with pytest.warns(RuntimeWarning, match="the gradient of x is not finite"):
        with np.errstate(divide="ignore"):
            x.gradient_function()(x=np.zeros(3))
    with pytest.warns(RuntimeWarning, match="the gradient of x is not finite"):
        with np.errstate(divide="ignore"):
            x.gradient_function()(x=torch.zeros(3, dtype=torch.float64))


def test_finite_results_do_not_warn(factor):
    d, a = factor
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        d.value_and_gradient_function()(**a)
        d.hessian_function("U")(**a)


def test_product_dims_are_inferred_or_checked():
    d = derive("A: (m, n)\ny: (m*n,)\nf = vec(A) @ y", wrt="A")
    assert d.function()(A=np.ones((2, 3)), y=np.ones(6)) == 6.0
    with pytest.raises(ValueError, match=r"^y has 5 entries but m\*n = 6$"):
        d.function()(A=np.ones((2, 3)), y=np.ones(5))
    # one unknown factor of a product dim is inferred from the other arguments
    d = derive("x: (m,)\ny: (m*n,)\nz: (n,)\nf = sum(y) + sum(z) + sum(x)", wrt="x")
    assert d.function()(x=np.ones(2), y=np.ones(6), z=np.ones(3)) == 11.0
    with pytest.raises(ValueError, match=r"^y has 6 entries but m\*n = 8$"):
        d.function()(x=np.ones(2), y=np.ones(6), z=np.ones(4))


def test_a_dim_no_argument_fixes_is_named():
    d = derive("x: (k,)\ny: (m*n,)\nF = sum(x) * (commutation(m, n) @ y)", wrt="x")
    with pytest.raises(ValueError, match=r"^the size of dim m is not known from the arrays"):
        d.function()(x=np.ones(2), y=np.ones(6))


@pytest.mark.parametrize(
    ("block", "wrt"),
    [
        ("P: ()\nU: (s, r)\nV: (w, r)\nR = P - U @ V.T\nloss = sum(R**2)", ["U", "V"]),
        ("X: (m, n)\ny: (m*n,)\nF = outer(vec(X), y - 1) @ commutation(m, n)", ["X"]),
    ],
)
def test_broadcast_scalar_in_a_distributed_product(block, wrt):
    from gradwright.evaluate import evaluate
    from gradwright.language import parse_block

    d = derive(block, wrt=wrt)
    d.source()
    arrays = d.sample_inputs(seed=0)
    reference = evaluate(parse_block(block).expr, arrays)
    np.testing.assert_allclose(d.function()(**arrays), reference)


@pytest.mark.parametrize(
    "target", ["sum(ones(n, n))", "trace(mpow(X, 0))", "norm(eye(n))", "sum(X ** 0)"]
)
def test_targets_that_depend_on_dims_only(target):
    d = derive(f"X: (n, n)\nf = {target}", wrt="X")
    value = d.function()(X=np.ones((3, 3)))
    assert value == pytest.approx({"sum(ones(n, n))": 9, "trace(mpow(X, 0))": 3,
                                   "norm(eye(n))": 3**0.5, "sum(X ** 0)": 9}[target])  # fmt: skip
