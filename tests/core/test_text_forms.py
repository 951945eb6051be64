"""The text form of every displayed formula is in the language, has the value of the expression,
and shows the same simplifications as its LaTeX.

Over every reference case, the demos' blocks and fuzzed blocks: each step without a pending
d(...) and each gradient or Jacobian prints as text that the parser reads back (with the block's
declarations and definitions) to an expression of the same value at a random point with random
differentials; and the text and the LaTeX name the same operations the same number of times
(`trace(eye(k)) * inv(A)` against `k A⁻¹` has a trace the LaTeX does not show;
`kron(x, eye(h))` against `xᵀ ⊗ I` has lost a transpose, and does not even parse).
"""

from __future__ import annotations

import functools
import pathlib
import re

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from test_steps import ALL_CASES, _close, _head

from checks import random_direction, random_point, sizes_for
from gradwright import FormulaError, derive
from gradwright import expr as E
from gradwright.evaluate import evaluate
from gradwright.language import parse_block
from gradwright.printing import latex, text
from strategies import blocks

DEMO_BLOCKS = pathlib.Path(__file__).parents[2] / "notebooks_demo" / "blocks"

#: operation -> (pattern in the text form, pattern in the LaTeX); each must occur as often in one
#: as in the other. Counted only where both spellings are one-to-one (a vector's transpose is
#: dropped in NumPy text, so transposes are not counted).
OPERATIONS = {
    # the blocks of a Kronecker contraction are paired with a trace in the LaTeX: not counted
    "trace": (r"\btrace\(", r"(?<!\\left\[)\\operatorname\{tr\}"),
    "kron": (r"\bkron\(", r"\\otimes"),
    "kron_contract": (r"\bkron_contract_(left|right)\(", r"_\{\[ij\]\}"),
    "unvec": (r"\bunvec\(", r"\\operatorname\{vec\}\^\{-1\}"),
    "inverse": (r"\b(inv|solve)\(", r"(?<!\\operatorname\{vec\})\^\{-1\}|\^\{-\\top\}"),
    "logdet": (r"\blogdet\(", r"\\log\\det|\\log\\left\|\\det"),
    "det": (r"(?<!log)\bdet\(", r"(?<!\\log)(?<!\\left\|)\\det"),
    "vec": (r"\bvec\(", r"\\operatorname\{vec\}(?!\^)"),
    "diagm": (r"\bdiagm\(", r"\\operatorname\{Diag\}"),
    "diag": (r"\bdiag\(", r"\\operatorname\{diag\}"),
    "commutation": (r"\bcommutation\(", r"K_\{"),
    "eye": (r"\beye\(", r"(?<![\\\w{])I(?![A-Za-z0-9}])"),
}


def operation_counts(printed_text: str, printed_latex: str) -> dict:
    """{operation: (count in text, count in LaTeX)} for the operations whose counts differ."""
    out = {}
    for name, (in_text, in_latex) in OPERATIONS.items():
        t = len(re.findall(in_text, printed_text))
        ltx = len(re.findall(in_latex, printed_latex))
        if t != ltx:
            out[name] = (t, ltx)
    return out


def _pending(e: E.Expr, declared) -> bool:
    """A d(...) of an expression or of a definition: notation of a step, not of the language."""
    for n in E.walk(e):
        if type(n) is E.D:
            return True
        if type(n) is E.Differential and n.symbol.name not in declared:
            return True
    return False


def displayed(d) -> list[tuple[str, E.Expr]]:
    """(what, expression) for every step and every gradient or Jacobian of a derivation."""
    out = [(f"step [{s.rule}]", s.expr) for s in d.steps]
    for v in d.variables:
        try:
            out.append((f"derivative in {v}", d.gradient(v) if d.is_scalar else d.jacobian(v)))
        except FormulaError:  # no compact form (the dense Jacobian is offered instead)
            continue
    return out


def check_text_forms(d, block: str, seed: int = 3) -> int:
    """Both checks over one derivation; returns how many formulas were read back."""
    head, target = _head(block)
    declared = set(parse_block(block).declarations)
    arrays = random_point(d, seed)
    rng = np.random.default_rng(seed + 100)
    diffs = {v: random_direction(d.symbols[v], arrays[v], rng) for v in d.variables}
    sizes = sizes_for(d)
    checked = 0
    for what, e in displayed(d):
        printed = text(e)
        differs = operation_counts(printed, latex(e))
        assert not differs, f"{what}: text and LaTeX differ in {differs}\n{printed}\n{latex(e)}"
        if _pending(e, declared):
            continue
        again = parse_block(head + f"{target} = {printed}", allow_differentials=True).expr
        want = evaluate(e, arrays, differentials=diffs, dims=sizes)
        got = evaluate(again, arrays, differentials=diffs, dims=sizes)
        if not np.all(np.isfinite(want)):  # exp(exp(exp(X))) overflows: nothing to compare
            continue
        assert _close(got, want, 1e-9), f"{what}: the text reads back to another value\n{printed}"
        checked += 1
    return checked


@functools.cache
def _derivation(block: str, wrt: tuple):
    return derive(block, wrt=list(wrt))


@pytest.mark.parametrize("case", [c for c in ALL_CASES if not c.xfail], ids=lambda c: c.id)
def test_reference_case_text_forms(case):
    try:
        d = _derivation(case.block, tuple(case.wrt))
    except FormulaError as err:
        pytest.skip(f"not derivable: {err}")
    assert check_text_forms(d, case.block) >= 1


@pytest.mark.parametrize("path", sorted(DEMO_BLOCKS.glob("*.gw")), ids=lambda p: p.stem)
def test_demo_block_text_forms(path):
    block = "\n".join(
        line.split("#", 1)[0].rstrip()
        for line in path.read_text().splitlines()
        if line.split("#", 1)[0].strip()
    )
    wrt = tuple(parse_block(block).declarations)
    assert check_text_forms(_derivation(block, wrt), block) >= 1


_FUZZ_SEEN: list = []


@settings(
    max_examples=40,
    deadline=None,
    derandomize=True,
    database=None,
    suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large],
)
@given(blocks())
def _fuzzed_text_forms(drawn):
    try:
        d = derive(drawn.text, wrt=list(drawn.wrt))
    except FormulaError:
        _FUZZ_SEEN.append(False)
        return
    check_text_forms(d, drawn.text)
    _FUZZ_SEEN.append(True)


def test_fuzzed_block_text_forms():
    _FUZZ_SEEN.clear()
    _fuzzed_text_forms()
    assert sum(_FUZZ_SEEN) >= 0.7 * len(_FUZZ_SEEN), (sum(_FUZZ_SEEN), len(_FUZZ_SEEN))


# --- the checks catch the faults seen before ---------------------------------------------------


def _expr(block: str) -> E.Expr:
    return parse_block(block).expr


def test_a_trace_of_the_identity_reads_as_its_size_in_both_forms():
    # built as the engine builds it (the reader already turns trace(eye(k)) into k)
    a = _expr("A: (k, k)\nf = inv(A)")
    e = E.mul(E.Trace(E.Identity(E.Dim.of("k"))), a)
    assert latex(e) == r"k\,A^{-1}"
    assert text(e) == "k * inv(A)"
    assert operation_counts("trace(eye(k)) * inv(A)", latex(e)) == {"trace": (1, 0), "eye": (1, 0)}
    prod = _expr("A: (m, n)\nf = sum(A) / sum(ones(m, n))")
    assert text(prod) == "sum(A) / (m * n)"
    assert not operation_counts(text(prod), latex(prod))


def test_a_row_vector_under_kron_keeps_its_transpose_in_text():
    d = derive("A: (n, k)\nx: (k,)\nf = A @ x", wrt=["A"])
    jac = d.jacobian("A")
    assert r"x^{\top} \otimes I" in latex(jac)
    assert "kron(x[None, :], eye(n))" in text(jac)
    assert operation_counts("kron(x, eye(n))", latex(jac)) == {}  # counts alone pass ...
    with pytest.raises(FormulaError):  # ... but the old spelling did not read back
        parse_block("A: (n, k)\nx: (k,)\nf = kron(x, eye(n))")
    check_text_forms(d, "A: (n, k)\nx: (k,)\nf = A @ x")


def test_a_column_beside_a_matrix_under_kron():
    e = _expr("x: (n,)\nB: (k, k)\nf = kron(B, x[:, None])")
    again = parse_block(f"x: (n,)\nB: (k, k)\nf = {text(e)}").expr
    rng = np.random.default_rng(0)
    arrays = {"x": rng.standard_normal(3), "B": rng.standard_normal((2, 2))}
    sizes = {"n": 3, "k": 2}
    assert np.allclose(evaluate(again, arrays, dims=sizes), evaluate(e, arrays, dims=sizes))
    # two columns stay NumPy's own kron of 1-D arrays
    assert text(_expr("x: (n,)\ny: (k,)\nf = kron(x, y)")) == "kron(x, y)"
