"""Complex arrays for real-declared symbols are refused by every generated function.

The formulas for real arrays use plain transposes: fed complex arrays they return a gradient
that is simply wrong. For `norm(y - A @ x)**2` the correct gradient with respect to the
conjugate (Wirtinger) is `2 Aᴴ(Ax − y)` (D. H. Brandwood, "A complex gradient operator and its
application in adaptive array theory", 1983, from memory); the real formula gives `−2Aᵀ(y −
Ax)`. This test shows that the silent wrong answer is real, then that it can no longer happen.
"""

from __future__ import annotations

import numpy as np
import pytest

from gradwright import derive
from gradwright.notebook.fdcheck import fit_namespace, run_check

SHAPES = {"A": ("m", "n"), "x": ("n",), "y": ("m",)}


@pytest.fixture(scope="module")
def least_squares():
    return derive("norm(y - A @ x)**2", wrt="x", shapes=SHAPES)


@pytest.fixture(scope="module")
def arrays():
    rng = np.random.default_rng(7)
    return {
        "A": rng.standard_normal((5, 3)) + 1j * rng.standard_normal((5, 3)),
        "x": rng.standard_normal(3),
        "y": rng.standard_normal(5),
    }


def test_real_formula_is_wrong_for_complex_input(arrays):
    # why the refusal exists: the real formula's gradient differs from the Wirtinger one
    A, x, y = arrays["A"], arrays["x"], arrays["y"]
    real_formula = -2 * A.T @ (y - A @ x)
    wirtinger = 2 * A.conj().T @ (A @ x - y)
    assert np.linalg.norm(real_formula - wirtinger) > 0.1 * np.linalg.norm(wirtinger)


def _calls(d, arrays):
    real = {k: np.real(v) for k, v in arrays.items()}
    dx = np.ones(3) + 1j
    return {
        "value": lambda: d.function()(**arrays),
        "gradient": lambda: d.gradient_function("x")(**arrays),
        "value_and_gradient": lambda: d.value_and_gradient_function()(**arrays),
        "hvp": lambda: d.hvp_function("x")(np.ones(3), **arrays),
        "hessian": lambda: d.hessian_function("x")(**arrays),
        "hvp direction": lambda: d.hvp_function("x")(dx, **real),
    }


@pytest.mark.parametrize(
    "which", ["value", "gradient", "value_and_gradient", "hvp", "hessian", "hvp direction"]
)
def test_every_function_refuses_complex(least_squares, arrays, which):
    call = _calls(least_squares, arrays)[which]
    with pytest.raises(TypeError, match="complex array"):
        call()


def test_message_names_the_symbol_and_the_declaration(least_squares, arrays):
    with pytest.raises(TypeError) as info:
        least_squares.gradient_function("x")(**arrays)
    text = str(info.value)
    assert "A is a complex array" in text
    assert "declared real" in text
    assert "A: (m, n) complex" in text


def test_array_target_functions_refuse_complex():
    d = derive("A @ x", wrt="x", shapes={"A": ("m", "n"), "x": ("n",)})
    A = np.ones((2, 3)) * (1 + 1j)
    x = np.ones(3)
    for call in (
        lambda: d.function()(A=A, x=x),
        lambda: d.jvp_function("x")(x, A=A, x=x),
        lambda: d.vjp_function("x")(np.ones(2), A=A, x=x),
        lambda: d.jacobian_function("x")(A=A, x=x),
        lambda: d.jvp_function("x")(x + 1j, A=A.real, x=x),
        lambda: d.vjp_function("x")(np.ones(2) * 1j, A=A.real, x=x),
    ):
        with pytest.raises(TypeError, match="complex array"):
            call()


def test_check_panel_does_not_take_complex_namespace_arrays(least_squares, arrays):
    taken, _bound, refused = fit_namespace(least_squares, arrays, ["A", "x", "y"])
    assert "A" not in taken
    assert "complex" in refused["A"]


def test_complex_step_check_still_works():
    # the check's own complex step is the one complex evaluation that is meant
    d = derive("sum(exp(A @ x))", wrt="x", shapes={"A": ("m", "n"), "x": ("n",)})
    assert d.supports_complex_step
    rng = np.random.default_rng(3)
    arrays = {"A": rng.standard_normal((4, 3)) * 0.3, "x": rng.standard_normal(3)}
    result = run_check(d, ["x"], arrays, method="complex step")
    assert result.passed, result.summary()
