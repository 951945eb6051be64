"""The generated functions on PyTorch tensors and JAX arrays (CPU) give NumPy's numbers, return
the library's own arrays and keep float32 as float32.

Reference libraries: PyTorch and JAX compute every operation of the generated code themselves;
the value is also compared with the hand-written JAX reference of each case (core_cases.py).
"""

from __future__ import annotations

import functools

import numpy as np
import pytest
from core_cases import GRADIENT_CASES, JACOBIAN_CASES

from checks import jax, jnp, random_direction, random_point, rel_err
from gradwright import derive

torch = pytest.importorskip("torch")

RTOL64 = 1e-12  # the bound, float64 against NumPy
RTOL32 = 1e-5  # float32 against NumPy's float64 numbers

CASES = [c for c in GRADIENT_CASES + JACOBIAN_CASES if not c.xfail]

LIBRARIES = {
    "torch": (lambda a, dt: torch.asarray(np.asarray(a, dtype=dt)), torch.Tensor),
    "jax": (lambda a, dt: jnp.asarray(np.asarray(a, dtype=dt)), jax.Array),
}
try:  # the standard's reference namespace: only what the standard has (no einsum, kron, diag)
    import array_api_strict

    LIBRARIES["array-api-strict"] = (
        lambda a, dt: array_api_strict.asarray(np.asarray(a, dtype=dt)),
        array_api_strict._array_object.Array,
    )
except ImportError:  # pragma: no cover - a test dependency
    pass


@functools.cache
def _numpy_results(case, rounded=False):
    """Every product function of the case on NumPy arrays: {(function, var): (args, result)}.

    `rounded`: at the point rounded to float32 (and computed in float64), the numbers a float32
    evaluation approximates without the rounding of its inputs."""
    d = derive(case.block, wrt=list(case.wrt))
    arrays = random_point(d, 0)
    if rounded:
        arrays = {k: np.float32(v).astype(np.float64) for k, v in arrays.items()}
    rng = np.random.default_rng(1)
    out = {("value", None): ((), d.function()(**arrays))}
    if d.is_scalar:
        out[("value_and_gradient", None)] = ((), d.value_and_gradient_function()(**arrays))
    target = np.asarray(out[("value", None)][1])
    for v in case.wrt:
        info = d.symbols[v]
        direction = random_direction(info, arrays[v], rng)
        if rounded:
            direction = np.float32(direction).astype(np.float64)
        out[("jvp", v)] = ((direction,), d.jvp_function(v)(direction, **arrays))
        cot = rng.standard_normal(target.shape)
        if rounded:
            cot = np.float32(cot).astype(np.float64)
        out[("vjp", v)] = ((cot,), d.vjp_function(v)(cot, **arrays))
        if d.is_scalar and ("hvp_" + v) in d._namespace():
            out[("hvp", v)] = ((direction,), d.hvp_function(v)(direction, **arrays))
    return d, arrays, out


def _function(d, kind, var):
    if kind == "value":
        return d.function()
    if kind == "value_and_gradient":
        return d.value_and_gradient_function()
    return getattr(d, f"{kind}_function")(var)


def _leaves(x):
    return [y for item in x for y in _leaves(item)] if isinstance(x, tuple) else [x]


@pytest.mark.parametrize("library", sorted(LIBRARIES))
@pytest.mark.parametrize("case", CASES, ids=lambda c: c.id)
def test_float64_equals_numpy(case, library):
    convert, kind_of_array = LIBRARIES[library]
    d, arrays, results = _numpy_results(case)
    data = {k: convert(v, np.float64) for k, v in arrays.items()}
    for (kind, var), (args, want) in results.items():
        got = _function(d, kind, var)(*(convert(a, np.float64) for a in args), **data)
        for g, w in zip(_leaves(got), _leaves(want), strict=True):
            assert isinstance(g, kind_of_array), (kind, var, type(g))
            assert str(g.dtype).endswith("float64"), (kind, var, g.dtype)
            g = np.asarray(g)
            assert g.shape == np.shape(w), (kind, var, g.shape, np.shape(w))
            err = rel_err(g, w)
            assert err <= RTOL64, f"{case.id} {kind} {var} on {library}: {err:.1e}"
    # and the value against the case's hand-written JAX reference (reference library: JAX)
    value = np.asarray(_function(d, "value", None)(**data))
    assert rel_err(value, np.asarray(case.ref(**arrays))) <= 1e-10


@pytest.mark.parametrize("library", sorted(LIBRARIES))
@pytest.mark.parametrize("case", CASES, ids=lambda c: c.id)
def test_float32_stays_float32(case, library):
    convert, kind_of_array = LIBRARIES[library]
    d, arrays, results = _numpy_results(case, rounded=True)
    data = {k: convert(v, np.float32) for k, v in arrays.items()}
    for (kind, var), (args, want) in results.items():
        got = _function(d, kind, var)(*(convert(a, np.float32) for a in args), **data)
        for g, w in zip(_leaves(got), _leaves(want), strict=True):
            assert isinstance(g, kind_of_array), (kind, var, type(g))
            assert str(g.dtype).endswith("float32"), f"{case.id} {kind} {var}: {g.dtype}"
            # the 1e-5, relative to the result's size or absolute below size 1 (sums of
            # terms of both signs lose digits to cancellation: common practice), amplified by
            # the condition of the inverses and determinants of the point
            g = np.asarray(g, dtype=np.float64)
            err = np.linalg.norm(g - w) / max(1.0, float(np.linalg.norm(w)))
            assert err <= RTOL32 * _condition(arrays), f"{case.id} {kind} {var}: {err:.1e}"


def _condition(arrays) -> float:
    """The largest condition number of the square matrices of the point (1 without any)."""
    out = 1.0
    for a in arrays.values():
        if np.ndim(a) == 2 and a.shape[0] == a.shape[1]:
            out = max(out, float(np.linalg.cond(a)))
    return out
