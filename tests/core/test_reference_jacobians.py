"""Jacobians of vector- and matrix-valued targets, JVPs, VJPs and Hessians against JAX.

Dense Jacobians are d vec(F) / d vec(X)^T over column-major vec, shape (size F, size X)
(reference library: JAX, jacfwd on the vec'ed function; jvp; vjp; hessian).
"""

from __future__ import annotations

import functools

import numpy as np
import pytest
from core_cases import GRADIENT_CASES, JACOBIAN_CASES, NO_KRONECKER_FORM, bug_reason, params

from checks import (
    assert_close,
    jax_hessian,
    jax_jacobian,
    jax_jvp,
    jax_vjp,
    project,
    random_direction,
    random_point,
    sizes_for,
    unvec,
    vec,
)
from gradwright import NotSupportedError, derive
from gradwright.evaluate import evaluate

RTOL = 1e-8  # the bound on the relative error against the reference library

PAIRS = [(c, v) for c in JACOBIAN_CASES for v in c.wrt]


def _pair_id(p):
    return f"{p[0].id}-{p[1]}"


def _pair_params(kind):
    out = []
    for case, var in PAIRS:
        reason = bug_reason(case, kind)
        marks = (pytest.mark.xfail(strict=True, reason=f"engine bug: {reason}"),) if reason else ()
        out.append(pytest.param((case, var), id=_pair_id((case, var)), marks=marks))
    return out


@functools.cache
def _derivation(case):
    return derive(case.block, wrt=list(case.wrt))


@functools.cache
def _reference_jacobian(case, var, seed=0):
    d = _derivation(case)
    arrays = random_point(d, seed)
    return arrays, jax_jacobian(case.ref, arrays, var)  # reference library: JAX (jacfwd)


@pytest.mark.parametrize("pair", _pair_params("dense"))
def test_dense_jacobian_matches_jax(pair):
    case, var = pair
    d = _derivation(case)
    assert not d.is_scalar
    arrays, want = _reference_jacobian(case, var)
    got = d.jacobian_function(var)(**arrays)
    n_out = int(np.size(case.ref(**arrays)))
    n_in = int(np.size(arrays[var]))
    assert np.shape(got) == (n_out, n_in)
    assert_close(got, want, RTOL, what=f"{case.id}: Jacobian wrt {var}")


@pytest.mark.parametrize("pair", PAIRS, ids=_pair_id)
def test_jvp_and_vjp_match_jax(pair):
    case, var = pair
    d = _derivation(case)
    arrays = random_point(d, 1)
    rng = np.random.default_rng(7)
    for _ in range(2):
        dx = random_direction(d.symbols[var], arrays[var], rng)
        got = d.jvp_function(var)(dx, **arrays)
        want = jax_jvp(case.ref, arrays, var, dx)  # reference library: JAX (jax.jvp)
        assert np.shape(got) == np.shape(want)
        assert_close(got, want, RTOL, what=f"{case.id}: JVP wrt {var}")
        cot = rng.standard_normal(np.shape(want))
        got = d.vjp_function(var)(cot, **arrays)
        want = jax_vjp(case.ref, arrays, var, cot)  # reference library: JAX (jax.vjp)
        want = project(want, d.symbols[var].structure)  # the structured variable's space
        assert np.shape(got) == np.shape(arrays[var])
        assert_close(got, want, RTOL, what=f"{case.id}: VJP wrt {var}")


@pytest.mark.parametrize("pair", _pair_params("kronecker"))
def test_kronecker_form_equals_dense_jacobian(pair):
    """derivation.jacobian(var), evaluated, is the dense Jacobian, or NotSupportedError."""
    case, var = pair
    d = _derivation(case)
    if case.id in NO_KRONECKER_FORM:
        with pytest.raises(NotSupportedError):
            d.jacobian(var)
        return
    arrays, want = _reference_jacobian(case, var)
    compact = evaluate(d.jacobian(var), arrays, dims=sizes_for(d))
    compact = np.asarray(compact, dtype=float)
    assert compact.size == want.size, (compact.shape, want.shape)
    assert_close(compact.reshape(want.shape), want, 1e-9, what=f"{case.id}: Kronecker form")


def test_robot_arm_jacobians_both_weights():
    """tanh(W2 tanh(W1 x)) w.r.t. both weight matrices, at three random points."""
    case = next(c for c in JACOBIAN_CASES if c.id == "map-robot-arm")
    d = _derivation(case)
    assert d.variables == ("W1", "W2")
    for seed in range(3):
        arrays = random_point(d, 10 + seed)
        for var in ("W1", "W2"):
            want = jax_jacobian(case.ref, arrays, var)  # reference library: JAX (jacfwd)
            got = d.jacobian_function(var)(**arrays)
            assert got.shape == (2, arrays[var].size)
            assert_close(got, want, RTOL, what=f"robot arm d/d{var}")


def _hessian_cases():
    out = []
    for c in GRADIENT_CASES:
        if c.xfail or not c.hessian or c.id.endswith(("-scalar", "-vector")):
            continue
        out.append(c)
    return out


def _plain(d, var):
    return not (set(d.symbols[var].structure) & {"symmetric", "spd", "diagonal"})


@pytest.mark.parametrize("case", params(_hessian_cases()))
def test_hvp_and_hessian_match_jax(case):
    """Dense Hessians for plain variables; for symmetric/diagonal ones the Hessian-vector
    product along a structured direction is the projection of JAX's H v."""
    d = _derivation(case)
    var = case.wrt[0]
    info = d.symbols[var]
    arrays = random_point(d, 0)
    want = jax_hessian(case.ref, arrays, var)  # reference library: JAX (jax.hessian)
    n = int(np.size(arrays[var]))
    if _plain(d, var):
        got = d.hessian_function(var)(**arrays)
        assert np.shape(got) == (n, n)
        assert_close(got, want, 1e-7, what=f"{case.id}: Hessian wrt {var}")
    v = random_direction(info, arrays[var], np.random.default_rng(5))
    hv = d.hvp_function(var)(v, **arrays)
    assert np.shape(hv) == np.shape(arrays[var])
    ref = project(unvec(want @ vec(v), np.shape(arrays[var])), info.structure)
    assert_close(hv, ref, 1e-7, what=f"{case.id}: Hessian-vector product")


def test_minimal_kronecker_form_of_entrywise_tanh():
    """Regression: ENGINE_BUGS.md bug 2 (fixed)."""
    d = derive("X: (m, n)\nF = tanh(X)", wrt="X")
    arrays = random_point(d, 0)
    want = np.diag(vec(1 - np.tanh(arrays["X"]) ** 2))  # d tanh = (1 - tanh^2) dX, entrywise
    got = evaluate(d.jacobian("X"), arrays, dims=sizes_for(d))
    assert_close(got, want, 1e-12, what="Kronecker form of tanh")
