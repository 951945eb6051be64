"""The formula language: what it accepts, and round trips through the text printer."""

from __future__ import annotations

import pytest

from gradwright import FormulaError, derive
from gradwright import expr as E
from gradwright.language import parse_block
from gradwright.printing import text

DECLS = "A: (n, n)\nB: (n, k)\nC: (k, n)\nS: (n, n) spd\nx: (n,)\ny: (n,)\nz: (k,)\nc: ()\n"

ROUND_TRIP = [
    "A @ B", "B.T @ A", "x @ A @ x", "A @ x", "x @ B", "outer(x, y)", "trace(A @ B @ C)",
    "inv(A) @ B", "solve(S, B)", "logdet(S) + det(A)", "kron(A, B)", "vec(B)", "diag(A)",
    "diagm(x) @ A", "sum(B**2)", "norm(B) + norm(x)", "logsumexp(B)", "softmax(x)",
    "exp(B) * sin(B) / cos(B)", "tanh(x) + sigmoid(x) - softplus(x)", "sqrt(exp(B))",
    "mpow(A, 3)", "eye(n) + ones(n, n) * c", "2 * A - 0.5 * A.T", "c / (1 + c**2)",
    "B ** c", "-(A @ A)", "x @ y * c", "commutation(n, k) @ vec(B)", "1 / x",
]  # fmt: skip


@pytest.mark.parametrize("formula", ROUND_TRIP)
def test_text_round_trip(formula):
    e = parse_block(DECLS + "f = " + formula).expr
    again = parse_block(DECLS + "f = " + text(e)).expr
    assert again == e, (text(e), text(again))


def test_block_with_comments_definitions_and_target():
    b = parse_block(
        "# demand table\nP: (s, w)   # constant\nU: (s, r)\nV: (w, r)\nmu: scalar\n"
        "R = P - U @ V.T\nloss = sum(R**2) + mu * sum(U**2)\n"
    )
    assert b.target == "loss"
    assert list(b.declarations) == ["P", "U", "V", "mu"]
    assert list(b.definitions) == ["R", "loss"]
    assert b.dims == {
        "s": [("P", 0), ("U", 0)],
        "w": [("P", 1), ("V", 0)],
        "r": [("U", 1), ("V", 1)],
    }


def test_continuation_lines_inside_parentheses():
    b = parse_block("A: (n, n)\nf = trace(A @\n          A)")
    assert b.expr == E.Trace(E.MatMul(b.declarations["A"], b.declarations["A"]))


def test_single_expression_with_shapes_mapping():
    d = derive(
        "sum((X @ w - y)**2)",
        wrt="w",
        shapes={"X": ("n", "p"), "w": ("p",), "y": "(n,)", "S": "(n, n) spd"},
    )
    assert d.target == "f"
    assert d.symbols["S"].structure == ("spd",)


def test_literal_and_product_dims():
    b = parse_block("A: (3, n)\nK: (3*n, 2)\nf = sum(K)")
    assert str(b.declarations["K"].shape[0]) == "3*n"


def test_error_has_line_column_and_caret():
    with pytest.raises(FormulaError) as info:
        parse_block("U: (s, r)\nV: (s, r)\nloss = sum((U @ V)**2)")
    err = info.value
    assert (err.line, err.column) == (3, 13)
    assert "cannot multiply (s, r) @ (s, r): inner dimensions r and s differ" in str(err)
    assert str(err).splitlines()[-1].strip() == "^^^^^"


def test_structure_words_imply_their_consequences():
    b = parse_block("S: (n, n) spd\nQ: (n, n) orthogonal\nf = logdet(S) + trace(Q)")
    assert {"symmetric", "invertible"} <= b.declarations["S"].structure
    assert "invertible" in b.declarations["Q"].structure
