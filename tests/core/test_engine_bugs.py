"""Minimal reproductions of engine bugs found by the core suites (see ENGINE_BUGS.md).

Open bugs are xfail(strict=True): when the engine is fixed the test passes, strict turns that
into a failure, and the marker should be removed. Fixed bugs stay here as regression tests.
"""

from __future__ import annotations

import numpy as np

from checks import assert_close
from gradwright import derive


def test_sum_of_array_plus_broadcast_scalar():
    """Regression: bug 1 (fixed)."""
    d = derive("X: (n,)\nc: ()\nf = sum(X + c)", wrt="c")
    X = np.array([0.0, 1.0, 2.0])
    # NumPy's own meaning of the same line: the scalar is added to each of the 3 entries
    assert_close(d.function()(X=X, c=0.5), np.sum(X + 0.5), 1e-14, what="value")
    assert_close(d.gradient_function("c")(X=X, c=0.5), 3.0, 1e-14, what="d/dc")


def test_gradient_of_squared_deviation_from_a_scalar():
    """Regression: bug 1 (fixed)."""
    d = derive("X: (n,)\nc: ()\nf = sum((X - c) ** 2)", wrt="c")
    X = np.array([0.0, 1.0, 2.0])
    # d/dc sum((x_i - c)^2) = -2 sum(x_i - c)
    assert_close(d.gradient_function("c")(X=X, c=0.5), -2 * np.sum(X - 0.5), 1e-14)


def test_kronecker_form_of_tanh_of_a_matrix():
    """Regression: bug 2 (fixed)."""
    d = derive("X: (m, n)\nF = tanh(X)", wrt="X")
    d.jacobian("X")
    assert d.steps


def test_steps_of_an_array_target_with_a_scalar_variable():
    """Regression: bug 3 (fixed)."""
    d = derive("c: ()\nX: (m, n)\nF = c * X", wrt="c")
    assert d.steps


def test_gradient_of_a_target_that_simplifies_to_a_constant():
    """Regression: bug 4a (fixed)."""
    d = derive("x: (n,)\nf = sum(x - x)", wrt="x")
    assert_close(d.gradient_function("x")(x=np.ones(3)), np.zeros(3), 0.0)


def test_value_with_a_dim_bound_only_by_an_unused_symbol():
    """Regression: bug 4b (fixed)."""
    d = derive("c: ()\nx: (n,)\nf = c * sum(ones(n))", wrt="c")
    # x fixes n = 3; the function should accept it (or derive() should refuse the block)
    assert_close(d.function()(c=2.0, x=np.ones(3)), 6.0, 1e-15)


def test_gradient_wrt_the_second_vector_of_a_kronecker_product():
    """Regression: bug 5 (fixed)."""
    d = derive("x: (n,)\ny: (k,)\nf = sum(kron(x, y) ** 2)", wrt="y")
    x, y = np.array([1.0, 2.0, 3.0]), np.array([1.0, -1.0])
    # sum((x_i y_j)^2) = |x|^2 |y|^2, so the gradient is 2 |x|^2 y = [28, -28]
    assert_close(d.gradient_function("y")(x=x, y=y), 2 * (x @ x) * y, 1e-14)


def test_stationary_point_function_runs():
    """Regression: bug 6 (fixed)."""
    d = derive("X: (n, p)\nw: (p,)\ny: (n,)\nf = sum((X @ w - y)**2)", wrt="w")
    X = np.array([[1.0, 0.0], [0.0, 2.0], [1.0, 1.0]])
    y = np.array([1.0, 2.0, 3.0])
    got = d.stationary_point("w").function()(X=X, y=y)
    assert_close(got, np.linalg.lstsq(X, y, rcond=None)[0], 1e-12)


def test_dense_jacobian_of_the_inverse_of_an_spd_variable():
    """Regression: bug 7 (fixed)."""
    d = derive("S: (n, n) spd\nF = inv(S)", wrt="S")
    S = np.array([[2.0, 0.5], [0.5, 1.0]])
    Si = np.linalg.inv(S)
    # d inv(S) = -inv(S) dS inv(S), so d vec / d vec^T = -(inv(S)^T kron inv(S))
    assert_close(d.jacobian_function("S")(S=S), -np.kron(Si.T, Si), 1e-12)


def test_gradient_of_det_at_a_singular_matrix():
    d = derive("X: (n, n)\nf = det(X)", wrt="X")
    X = np.array([[1.0, 2.0], [2.0, 4.0]])
    # d det(X) = tr(adj(X) dX), so the gradient is the cofactor matrix adj(X)^T, which exists
    # for every X (The Matrix Cookbook (2012) eq. (49) is its form for invertible X)
    cofactor = np.array([[X[1, 1], -X[1, 0]], [-X[0, 1], X[0, 0]]])
    assert_close(d.gradient_function("X")(X=X), cofactor, 1e-14)
