"""The meaning test: what NumPy computes from the same text, gradwright derives.

For every reference block (tests/core/core_cases.py), every NumPy-style block
(tests/core/numpy_cases.py) and fuzzed blocks, gradwright's value function equals NumPy
evaluating the block's own text (tests/meaning.py); the derivatives of the NumPy-style blocks
equal JAX's derivatives of that same text (reference library: JAX); and the text form of every
gradient parses back in the formula language and means, to NumPy, the gradient's value.
"""

from __future__ import annotations

import sys
from pathlib import Path

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings

sys.path.insert(0, str(Path(__file__).parent / "core"))

from core_cases import GRADIENT_CASES, JACOBIAN_CASES  # noqa: E402
from numpy_cases import NUMPY_CASES  # noqa: E402

from checks import jax, project, random_point, rel_err, sizes_for  # noqa: E402
from gradwright import FormulaError, derive  # noqa: E402
from gradwright.printing import text  # noqa: E402
from meaning import JAX_NAMES, definitions, numpy_value  # noqa: E402
from strategies import FUZZ_SIZES, blocks  # noqa: E402

RTOL_VALUE = 1e-10  # two float64 evaluations of one formula in different orders
RTOL_DERIVATIVE = 1e-8  # the suite's bound against the reference library


def _sizes(d, sizes=None) -> dict:
    every = sizes_for(d, sizes)
    return {name: every[name] for name in d.dims}


def _value_check(block: str, wrt, seed: int = 0, sizes=None):
    d = derive(block, wrt=list(wrt))
    arrays = random_point(d, seed, sizes)
    got = d.function()(**arrays)
    want = numpy_value(block, arrays, _sizes(d, sizes))
    assert np.shape(got) == np.shape(want), (np.shape(got), np.shape(want))
    assert rel_err(got, want) <= RTOL_VALUE, (block, got, want)
    return d, arrays


REFERENCE_BLOCKS = [(c.id, c.block, c.wrt) for c in GRADIENT_CASES + JACOBIAN_CASES]
ALL_BLOCKS = REFERENCE_BLOCKS + [(c.id, c.block, c.wrt) for c in NUMPY_CASES]


@pytest.mark.parametrize(
    ("block", "wrt"), [b[1:] for b in ALL_BLOCKS], ids=[b[0] for b in ALL_BLOCKS]
)
def test_value_is_what_numpy_computes_from_the_text(block, wrt):
    _value_check(block, wrt)


def _jax_function(block: str, arrays: dict, sizes: dict, var: str):
    """The target as a function of one variable, computed by JAX from the block's text."""

    def f(x):
        return numpy_value(block, {**arrays, var: x}, sizes, JAX_NAMES)

    return f


@pytest.mark.parametrize("case", NUMPY_CASES, ids=lambda c: c.id)
def test_derivatives_are_jax_derivatives_of_the_same_text(case):
    d, arrays = _value_check(case.block, case.wrt, seed=1)
    sizes = _sizes(d)
    rng = np.random.default_rng(7)
    for var in case.wrt:
        f = _jax_function(case.block, arrays, sizes, var)
        x = jax.numpy.asarray(arrays[var], dtype=float)
        if d.is_scalar:
            got = d.gradient_function(var)(**arrays)
            want = project(np.asarray(jax.grad(f)(x)), d.symbols[var].structure)
        else:
            value, pullback = jax.vjp(f, x)
            cot = rng.standard_normal(np.shape(value))
            got = d.vjp_function(var)(cot, **arrays)
            want = np.asarray(pullback(jax.numpy.asarray(cot))[0])
        assert np.shape(got) == np.shape(arrays[var]), (var, np.shape(got))
        assert rel_err(got, want) <= RTOL_DERIVATIVE, (case.id, var, got, want)


def _round_trip(block: str, wrt):
    """Each gradient's text, appended to the block, parses and means its value to NumPy."""
    d = derive(block, wrt=list(wrt))
    if not d.is_scalar:
        return
    arrays = random_point(d, 2)
    sizes = _sizes(d)
    body = [line for line in block.split("\n")]
    for var in wrt:
        shown = text(d.gradient(var))
        pasted = "\n".join(body + [f"gradient_of_{var} = {shown}"])
        again = derive(pasted, wrt=[var])  # parses back in the formula language
        want = d.gradient_function(var)(**arrays)
        assert rel_err(again.function()(**arrays), want) <= RTOL_DERIVATIVE, (var, shown)
        meant = numpy_value(pasted, arrays, sizes)
        assert rel_err(meant, want) <= RTOL_DERIVATIVE, (var, shown, meant, want)


SCALAR_BLOCKS = [b for b in ALL_BLOCKS if b[0] in {c.id for c in GRADIENT_CASES + NUMPY_CASES}]
NOT_PASTEABLE: set = set()


@pytest.mark.parametrize(
    ("block", "wrt"),
    [
        pytest.param(
            *b[1:], marks=[pytest.mark.xfail(strict=True)] if b[0] in NOT_PASTEABLE else []
        )
        for b in SCALAR_BLOCKS
    ],
    ids=[b[0] for b in SCALAR_BLOCKS],
)
def test_printed_gradients_paste_back_with_the_same_meaning(block, wrt):
    _round_trip(block, wrt)


def test_the_reader_sees_every_definition():
    assert definitions("x: (n,)\nR = 2 * x\nf = sum(R)  # the target") == [
        ("R", "2 * x"),
        ("f", "sum(R)"),
    ]


@settings(
    max_examples=60,
    deadline=None,
    suppress_health_check=[HealthCheck.too_slow, HealthCheck.filter_too_much],
)
@given(blocks(max_depth=3))
def test_fuzzed_blocks_mean_what_numpy_computes(b):
    try:
        d = derive(b.text, wrt=list(b.wrt))
    except FormulaError:
        return  # refusing is allowed; a different meaning is not
    arrays = random_point(d, 0, FUZZ_SIZES)
    with np.errstate(all="ignore"):
        want = numpy_value(b.text, arrays, _sizes(d, FUZZ_SIZES))
        if not np.all(np.isfinite(want)):
            return
        got = d.function()(**arrays)
    assert np.shape(got) == np.shape(want)
    assert rel_err(got, want) <= 1e-8, (b.text, got, want)
