"""Minimal reproductions of engine bugs found by the core suites (see ENGINE_BUGS.md).

Each is xfail(strict=True): when the engine is fixed, the test passes, strict turns that into
a failure, and the marker (and the entry in ENGINE_BUGS.md) should be removed.
"""

from __future__ import annotations

import numpy as np
import pytest

from checks import assert_close
from gradwright import derive


@pytest.mark.xfail(strict=True, reason="engine bug 1: sum(X + c) is read as sum(X) + c")
def test_sum_of_array_plus_broadcast_scalar():
    d = derive("X: (n,)\nc: ()\nf = sum(X + c)", wrt="c")
    X = np.array([0.0, 1.0, 2.0])
    # NumPy's own meaning of the same line: the scalar is added to each of the 3 entries
    assert_close(d.function()(X=X, c=0.5), np.sum(X + 0.5), 1e-14, what="value")
    assert_close(d.gradient_function("c")(X=X, c=0.5), 3.0, 1e-14, what="d/dc")


@pytest.mark.xfail(strict=True, reason="engine bug 1: sum(X - c) loses the entry count")
def test_gradient_of_squared_deviation_from_a_scalar():
    d = derive("X: (n,)\nc: ()\nf = sum((X - c) ** 2)", wrt="c")
    X = np.array([0.0, 1.0, 2.0])
    # d/dc sum((x_i - c)^2) = -2 sum(x_i - c)
    assert_close(d.gradient_function("c")(X=X, c=0.5), -2 * np.sum(X - 0.5), 1e-14)


@pytest.mark.xfail(strict=True, raises=Exception, reason="engine bug 2: ShapeError from tanh")
def test_kronecker_form_of_tanh_of_a_matrix():
    d = derive("X: (m, n)\nF = tanh(X)", wrt="X")
    d.jacobian("X")
    assert d.steps


@pytest.mark.xfail(strict=True, raises=Exception, reason="engine bug 3: ShapeError in steps")
def test_steps_of_an_array_target_with_a_scalar_variable():
    d = derive("c: ()\nX: (m, n)\nF = c * X", wrt="c")
    assert d.steps
