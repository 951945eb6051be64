"""Layout of printed steps: long formulas break at operators into lines within the width budget
(the browser test checks the rendered widths; this checks every reference case quickly)."""

from __future__ import annotations

import re

import pytest
from core_cases import GRADIENT_CASES, JACOBIAN_CASES

from gradwright import derive
from gradwright.notebook.render import MATH_BUDGET, _wrap, derivation_html, derivation_latex
from gradwright.printing.layout import broken_lines, latex_width, rule_html, rule_segments

CASES = [c for c in GRADIENT_CASES + JACOBIAN_CASES if not c.xfail]
LONG = (
    "x: (p,)\nW1: (h, p)\nW2: (h, h)\nW3: (h, h)\nW4: (k, h)\n"
    "g = tanh(W4 @ tanh(W3 @ tanh(W2 @ tanh(W1 @ x))))"
)
MANY_TERMS = "A: (n, n)\nB: (n, n)\nC: (n, n)\nf = " + " + ".join(
    f"trace(A @ B @ A.T @ C @ A @ {m})" for m in ("B", "C", "B.T", "C.T", "A", "A.T")
)


@pytest.mark.parametrize("case", CASES, ids=[c.id for c in CASES])
def test_every_line_of_every_step_fits(case):
    d = derive(case.block, wrt=list(case.wrt))
    for step in d.steps:
        for line in broken_lines(step.expr, MATH_BUDGET):
            assert latex_width(line) <= MATH_BUDGET, line


#: a Kalman covariance update: its last differential is `1/2 tr((...) dP)`, a scaled trace whose
#: long argument must be broken inside the trace's parentheses
KALMAN = (
    "F: (m, m)\nP: (m, m) spd\nQ: (m, m) spd\nH: (q, m)\nR: (q, q) spd\n"
    "Pp = F @ P @ F.T + Q\nSg = H @ Pp @ H.T + R\nK = Pp @ H.T @ inv(Sg)\n"
    "Pn = Pp - K @ H @ Pp\nJ = trace(Pn)"
)


@pytest.mark.parametrize("block,wrt", [(LONG, ["W1", "W4"]), (MANY_TERMS, ["A"]), (KALMAN, ["P"])])
def test_long_derivations_break_at_operators(block, wrt):
    d = derive(block, wrt=wrt)
    broken = 0
    for step in d.steps:
        lines = broken_lines(step.expr, MATH_BUDGET)
        broken += len(lines) > 1
        assert all(latex_width(line) <= MATH_BUDGET for line in lines), lines
        for line in lines[1:]:  # a continuation starts with an operator or a factor, never ")"
            assert not line.startswith((r"\right", ")")), line
    assert broken, "a long derivation is broken over lines"
    latex = derivation_latex(d)
    assert r"&\qquad" in latex  # continuation lines sit in the aligned column
    page = derivation_html(d)
    assert page.count("<tr>") > len(d.steps)  # one table row per printed line


def test_rule_names_split_into_words_and_formulas():
    parts = rule_segments("rearrange under the trace: tr(A B) = tr(B A), tr(A) = tr(Aᵀ)")
    kinds = [k for k, _ in parts]
    assert kinds == ["text", "math", "text", "math"]
    assert all("ᵀ" not in v for k, v in parts if k == "math")


def test_an_equation_in_a_rules_words_wraps_as_one_word():
    # the abs rule's note "0 at x = 0" was wrapped between "x" and "= 0" in the browser
    words = "norm rule; chain rule for abs (sign(x); 0 at x = 0, the smallest subgradient)"
    assert "x\u00a0=\u00a00" in rule_html(words)
    # and "left-hand" did not break at its hyphen (the complex gradient's rule, in the browser)
    assert "left\u2011hand side" in rule_html("as the left-hand side says")
    for width in range(8, 60):
        for line in _wrap(words, width):
            assert not line.rstrip("}").endswith(" x") and "{= 0" not in line, (width, line)


def test_a_mixed_second_derivative_breaks_over_lines():
    # the ferry demo's second_derivative("W", "b").latex() was 1,785 px wide in an 1,100 px output
    block = (
        "X: (n, p)\nY: (n, k)\nW: (p, k)\nb: (k,)\nZ = X @ W + b\n"
        "nll = sum(log(1 + exp(Z) @ ones(k))) - sum(Y * Z)"
    )
    mixed = derive(block, wrt=["W", "b"]).second_derivative("W", "b")
    text = mixed.latex()
    lines = (
        text.removeprefix("\\begin{aligned}\n").removesuffix("\n\\end{aligned}").split(" \\\\\n")
    )
    assert len(lines) > 3  # continuation lines
    for line in lines:
        math = line.split("&=", 1)[-1].split("&\\qquad", 1)[-1].split(" && ", 1)[0]
        assert latex_width(math) <= mixed.LINE_BUDGET + 2, line


@pytest.mark.parametrize("budget", [18.0, 24.0, 30.0, MATH_BUDGET])
def test_every_broken_line_closes_its_braces(budget):
    # a long numerator over n o was broken inside \frac{...}{n \cdot o}: each line left a brace
    # open, which MathJax shows as an error and pdflatex refuses
    block = (
        "X: (n, d)\nY: (n, o)\nW1: (d, h)\nb1: (h,)\nW2: (h, o)\nH = tanh(X @ W1 + b1)\n"
        "loss = mean((H @ W2 - Y)**2)"
    )
    for text, wrt in ((block, ["W1", "b1", "W2"]), (KALMAN, ["P"]), (LONG, ["W1"])):
        for step in derive(text, wrt=wrt).steps:
            for line in broken_lines(step.expr, budget):
                stripped = line.replace(r"\{", "").replace(r"\}", "")
                assert stripped.count("{") == stripped.count("}"), line


def test_the_one_piece_latex_leaves_room_for_its_rules():
    # an exported notebook's derivation (the text/latex form) cut its rule column off at 1,100 px:
    # 38 em of math beside 44-character rules; now 30 em beside rules of about 28 characters
    from gradwright.notebook.render import LATEX_BUDGET, LATEX_RULE_WIDTH

    latex = derivation_latex(derive(KALMAN, wrt=["P"]))
    for line in latex.split(" \\\\\n"):
        math, _, rule = line.partition("&& ")
        math = math.split("&=", 1)[-1].split("&\\qquad", 1)[-1]
        assert latex_width(math) <= LATEX_BUDGET + 2, line
        for piece in re.findall(r"\\text\{([^}]*)\}", rule):
            assert len(piece) <= LATEX_RULE_WIDTH + 2, piece
