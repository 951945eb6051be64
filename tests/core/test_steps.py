"""Every displayed step of every derivation in the reference suites is checkable.

Each "differential" step evaluates equal to the one before it at random points and random
differentials (pending d(...) nodes are evaluated by the reference evaluator with finite
differences, hence the 1e-6 tolerance); the "vec(dF)" step is vec of the one before; the
gradient and Jacobian lines equal the generated functions' output. The text printer
round-trips through the parser.
"""

from __future__ import annotations

import functools

import numpy as np
import pytest
from core_cases import GRADIENT_CASES, JACOBIAN_CASES, Case, params

from checks import random_direction, random_point, rel_err, sizes_as_numbers, sizes_for, vec
from gradwright import FormulaError, derive
from gradwright import expr as E
from gradwright.evaluate import evaluate
from gradwright.language import parse_block
from gradwright.printing import text


def _more_cases():
    """The blocks of the cookbook and stationary-point suites, as cases without a reference."""
    from test_cookbook import COOKBOOK
    from test_stationary import CASES

    out = [
        Case(f"cookbook-{i}", block, (var,), None) for i, (_, block, var, _) in enumerate(COOKBOOK)
    ]
    out += [Case(f"stationary-{name}", block, (var,), None) for name, block, var, _ in CASES]
    return out


ALL_CASES = GRADIENT_CASES + JACOBIAN_CASES + _more_cases()
STEP_RTOL = 1e-6  # the evaluator's d(...) is a 4th-order central difference with h = 1e-3
SEEDS = (0, 1)


@functools.cache
def _derivation(case):
    return derive(case.block, wrt=list(case.wrt))


def _close(a, b, rtol):
    a = np.asarray(a, dtype=float)
    b = np.asarray(b, dtype=float)
    assert a.shape == b.shape, (a.shape, b.shape)
    scale = max(np.linalg.norm(a), np.linalg.norm(b), 1e-8)
    return np.linalg.norm(a - b) <= rtol * scale


def _is_vec_step(step):
    return step.kind == "differential" and step.lhs_latex.startswith(r"\operatorname{vec}")


@pytest.mark.parametrize("case", params(ALL_CASES, "steps-equal"))
def test_differential_steps_evaluate_equal(case):
    d = _derivation(case)
    steps = d.steps
    kinds = [s.kind for s in steps]
    assert kinds[0] == "differential" and kinds[1] == "differential"
    assert steps[1].rule == "write d in front"
    assert len([s for s in steps if s.kind == "differential"]) >= 3
    for seed in SEEDS:
        arrays = random_point(d, seed)
        rng = np.random.default_rng(100 + seed)
        diffs = {v: random_direction(d.symbols[v], arrays[v], rng) for v in d.variables}
        prev = None
        for i, step in enumerate(steps):
            if step.kind != "differential":
                continue
            value = evaluate(step.expr, arrays, differentials=diffs, dims=sizes_for(d))
            if prev is not None:
                want = vec(prev) if _is_vec_step(step) else prev
                got = np.asarray(value, dtype=float)
                if _is_vec_step(step):
                    got = got.reshape(-1)
                assert _close(got, want, STEP_RTOL), (
                    f"{case.id}, seed {seed}: step {i} [{step.rule}] differs from step {i - 1}: "
                    f"relative error {rel_err(got, want):.2e}\n  {step.text()}\n"
                    f"  previous: {steps[i - 1].text()}"
                )
            prev = value


@pytest.mark.parametrize("case", params(ALL_CASES, "readoff"))
def test_read_off_lines_equal_the_generated_functions(case):
    d = _derivation(case)
    arrays = random_point(d, 2)
    kind = "gradient" if d.is_scalar else "jacobian"
    lines = [s for s in d.steps if s.kind in ("gradient", "jacobian")]
    assert all(s.kind == kind for s in lines)
    if d.is_scalar:
        assert [s.var for s in lines] == list(d.variables)
    for step in lines:
        got = evaluate(step.expr, arrays, dims=sizes_for(d))
        if kind == "gradient":
            want = d.gradient_function(step.var)(**arrays)
            assert _close(got, want, 1e-10), (case.id, step.var, step.text())
            ex = evaluate(d.gradient(step.var), arrays, dims=sizes_for(d))
            assert _close(ex, want, 1e-10), (case.id, step.var)
        else:
            want = d.jacobian_function(step.var)(**arrays)
            got = np.asarray(got, dtype=float).reshape(np.shape(want))
            assert _close(got, want, 1e-10), (case.id, step.var, step.text())


@pytest.mark.parametrize("case", params(ALL_CASES, "steps"))
def test_latex_and_text_renderings_are_non_empty(case):
    d = _derivation(case)
    latex = d.latex()
    assert latex.startswith("\\begin{aligned}") and latex.rstrip().endswith("\\end{aligned}")
    assert len(latex) > 40
    plain = d.text_steps()
    assert plain.strip()
    assert len(plain.splitlines()) == len(d.steps) - 1
    for step in d.steps:
        assert step.latex().strip() and step.text().strip()


def _head(block: str) -> tuple[str, str]:
    """(every line but the target's, the target's name)."""
    lines = block.rstrip("\n").split("\n")
    return "\n".join(lines[:-1]) + "\n", lines[-1].split("=")[0].strip()


@pytest.mark.parametrize("case", ALL_CASES, ids=lambda c: c.id)
def test_text_printer_round_trips(case):
    head, target = _head(case.block)
    e = parse_block(case.block).expr
    again = parse_block(head + f"{target} = " + text(e)).expr
    assert again == sizes_as_numbers(e, head, target), (text(e), text(again))
    # every definition's expression too
    block = parse_block(case.block)
    for name, body in block.definitions.items():
        if name == target:
            continue
        inner = body.body if isinstance(body, E.Named) else body
        printed = text(inner)
        assert parse_block(head + f"{target} = " + printed).expr == inner, printed


def _has_pending(e):
    return any(type(n) is E.D for n in E.walk(e))


@pytest.mark.parametrize("case", params(ALL_CASES, "steps"))
def test_text_of_finished_steps_reads_back_to_the_same_value(case):
    """Steps without pending d(...) print as text that, where it is in the language (internal
    notation such as kron_contract_left or eye(m*n) is not), reads back to an expression of the
    same value at a random point with random differentials."""
    d = _derivation(case)
    head, target = _head(case.block)
    arrays = random_point(d, 3)
    rng = np.random.default_rng(103)
    diffs = {v: random_direction(d.symbols[v], arrays[v], rng) for v in d.variables}
    checked = 0
    for step in d.steps:
        if _has_pending(step.expr):
            continue
        printed = step.text()
        try:
            again = parse_block(head + f"{target} = " + printed, allow_differentials=True).expr
        except FormulaError:
            continue
        want = evaluate(step.expr, arrays, differentials=diffs, dims=sizes_for(d))
        got = evaluate(again, arrays, differentials=diffs, dims=sizes_for(d))
        assert _close(got, want, 1e-10), (case.id, step.rule, printed)
        checked += 1
    assert checked >= 1, f"{case.id}: no step reads back"
