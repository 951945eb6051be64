"""The simplifier keeps values equal and reaches the short forms users expect."""

from __future__ import annotations

import numpy as np
import pytest

from gradwright import derive
from gradwright.evaluate import evaluate
from gradwright.language import parse_block
from gradwright.printing import text
from gradwright.sampling import default_sizes, sample_inputs
from gradwright.simplify import expand, simplify

DECLS = "X: (n, p)\nW: (p, k)\nY: (n, k)\nA: (n, n)\nS: (n, n) symmetric\nx: (n,)\nc: ()\n"
FORMULAS = [
    "X.T @ X @ W - X.T @ Y",
    "(X @ W - Y).T @ (X @ W - Y)",
    "(A @ A.T).T + (A.T).T",
    "solve(A, X) + inv(A) @ X",
    "S.T @ x + S @ x",
    "2 * c * X - c * X + 0 * X",
    "trace(A + A.T) + trace(2 * A)",
    "(x @ A).T * 3",
    "vec(X) * 2 - vec(X)",
    "exp(X) * exp(X) / exp(X)",
]


@pytest.mark.parametrize("formula", FORMULAS)
@pytest.mark.parametrize("rewrite", [simplify, expand], ids=["simplify", "expand"])
def test_rewrites_keep_values(formula, rewrite):
    b = parse_block(DECLS + "f = " + formula)
    arrays = sample_inputs(b.declarations, default_sizes(b.dims), seed=7)
    before = evaluate(b.expr, arrays)
    after = evaluate(rewrite(b.expr), arrays)
    np.testing.assert_allclose(after, before, rtol=1e-11, atol=1e-11)


def test_least_squares_gradient_is_short():
    d = derive("X: (n, p)\nW: (p, k)\nY: (n, k)\nf = sum((X @ W - Y)**2)", wrt="W")
    assert text(d.gradient("W")) == "2 * (X.T @ (X @ W - Y))"
    d = derive("X: (n, p)\nW: (p, k)\nY: (n, k)\nf = trace((X @ W - Y).T @ (X @ W - Y))", wrt="W")
    assert text(d.gradient("W")) == "2 * (X.T @ (X @ W - Y))"


def test_symmetric_transpose_is_dropped():
    d = derive("S: (n, n) spd\nA: (n, n)\nf = trace(A @ S) + logdet(S)", wrt="S")
    assert text(d.gradient("S")) == "(A.T + A) / 2 + inv(S)"
