"""Gradients of scalar targets against JAX at random float64 points (reference library: JAX).

Every operation of the language, over scalar, vector and matrix variables, several variables
at once (tuple in wrt order), and structured variables: for symmetric/spd variables the
reference is the symmetric part of JAX's gradient, for diagonal ones its diagonal part.
"""

from __future__ import annotations

import functools

import numpy as np
import pytest
from core_cases import GRADIENT_CASES, params

from checks import (
    assert_close,
    central_difference_check,
    jax_grad,
    project,
    random_point,
    run_over_shapes,
)
from gradwright import derive

RTOL = 1e-8  # the bound on the relative error against the reference library
SEEDS = (0, 1)


@functools.cache
def _reference(case, seed):
    """The random point and JAX's gradients there, computed once per case and seed."""
    d = derive(case.block, wrt=list(case.wrt))
    arrays = random_point(d, seed)
    return arrays, jax_grad(case.ref, arrays, case.wrt)  # reference library: JAX


def _as_tuple(g, n):
    return tuple(g) if n > 1 else (g,)


@pytest.mark.parametrize("case", params(GRADIENT_CASES))
def test_gradient_matches_jax(case):
    d = derive(case.block, wrt=list(case.wrt))
    assert d.is_scalar
    grads = d.gradient_function()
    for seed in SEEDS:
        arrays, want = _reference(case, seed)
        got = _as_tuple(grads(**arrays), len(case.wrt))
        assert len(got) == len(case.wrt)
        for v, g, w in zip(case.wrt, got, want):
            w = project(w, d.symbols[v].structure)
            assert np.shape(g) == np.shape(arrays[v]), (v, np.shape(g), np.shape(arrays[v]))
            assert_close(g, w, RTOL, what=f"{case.id}: gradient wrt {v} (seed {seed})")


@pytest.mark.parametrize("case", params(GRADIENT_CASES))
def test_single_gradient_functions_and_value(case):
    """Each variable alone, the value function, and value_and_gradient agree with JAX."""
    d = derive(case.block, wrt=list(case.wrt))
    arrays, want = _reference(case, SEEDS[0])
    value = d.function()(**arrays)
    assert_close(value, float(case.ref(**arrays)), 1e-12, what=f"{case.id}: value")
    v_and_g = d.value_and_gradient_function()(**arrays)
    assert_close(v_and_g[0], value, 1e-12, what="value_and_gradient value")
    both = _as_tuple(v_and_g[1], len(case.wrt))
    for i, v in enumerate(case.wrt):
        w = project(want[i], d.symbols[v].structure)
        assert_close(d.gradient_function(v)(**arrays), w, RTOL, what=f"gradient_function({v})")
        assert_close(both[i], w, RTOL, what=f"value_and_gradient[{v}]")
    if len(case.wrt) > 1:  # a sub-tuple in the order asked for
        rev = tuple(reversed(case.wrt))
        got = d.gradient_function(*rev)(**arrays)
        for v, g in zip(rev, got):
            w = project(want[case.wrt.index(v)], d.symbols[v].structure)
            assert_close(g, w, RTOL, what=f"gradient_function{rev}[{v}]")


@pytest.mark.parametrize(
    "case", [c for c in GRADIENT_CASES if c.id.endswith("-matrix")][:6], ids=lambda c: c.id
)
def test_central_differences_along_random_directions(case):
    """An independent finite-difference check beside the autodiff one (central differences)."""
    d = derive(case.block, wrt=list(case.wrt))
    arrays = random_point(d, 3)
    f = d.function()
    v = case.wrt[0]
    g = d.gradient_function(v)(**arrays)

    def along(x):
        return f(**{**arrays, v: x})

    for fd, an in central_difference_check(along, arrays[v], g, n_dirs=3, seed=4):
        assert abs(fd - an) <= 1e-6 * max(1.0, abs(an)), (fd, an)


@pytest.mark.parametrize(
    "template",
    [
        "X: {shape}\nY: {shape}\nf = sum(sigmoid(X) * Y) + sum((X * Y) ** 2) * sum(Y)",
        "X: {shape} positive\nc: ()\nf = sum(log(X) / (1 + c ** 2)) + sum(X ** 1.5)",
    ],
)
def test_central_differences_over_scalar_vector_and_matrix_shapes(template):
    """The shared combinator: one finite-difference check run at each kind of shape."""

    def check(block):
        d = derive(block, wrt="X")
        arrays = random_point(d, 6)
        f = d.function()
        g = d.gradient_function("X")(**arrays)
        for fd, an in central_difference_check(
            lambda x: f(**{**arrays, "X": x}), arrays["X"], g, n_dirs=2, seed=8
        ):
            assert abs(fd - an) <= 1e-6 * max(1.0, abs(an)), (block, fd, an)

    run_over_shapes(check, template)
