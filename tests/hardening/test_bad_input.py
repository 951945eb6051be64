"""Malformed and hostile blocks end in a located, readable FormulaError, and nothing else.

The corpus lives in `bad_blocks.py`; every entry states the message, line and column.
"""

from __future__ import annotations

import re
import sys
import time
from pathlib import Path

import numpy as np
import pytest

import gradwright
from gradwright import FormulaError, derive

sys.path.insert(0, str(Path(__file__).parent))
from bad_blocks import CORPUS  # noqa: E402

# shape conflicts between two operands must name both shapes
TWO_OPERAND_SHAPE_CASES = {
    "add-mat-mat", "add-vec-mat", "add-vec-vec", "sub-mat-mat", "sub-vec-vec",
    "mul-mat-mat", "mul-vec-mat", "mul-vec-vec", "div-mat-mat", "div-vec-vec",
    "matmul-mat-mat", "matmul-mat-vec", "matmul-vec-mat", "matmul-vec-vec", "matmul-scalar",
    "solve-mismatch", "outer-matrices", "kron-vec-mat",
}  # fmt: skip

# words of Python's machinery that a newcomer should never have to read
INTERNAL_WORDS = re.compile(
    r"\b(ast|BinOp|UnaryOp|Attribute|Constant|Subscript|NoneType|Traceback|ShapeError|"
    r"lineno|col_offset|sys\.set_int_max_str_digits|object has no attribute|codec)\b"
)
SHAPE_TEXT = re.compile(r"\((?:[\w*]+(?:, [\w*]+)?,?)?\)")


def test_corpus_is_large_and_ids_unique():
    ids = [c[0] for c in CORPUS]
    assert len(ids) >= 70
    assert len(set(ids)) == len(ids)


@pytest.mark.parametrize(("block", "wrt", "expected", "line", "column"),
                         [c[1:] for c in CORPUS], ids=[c[0] for c in CORPUS])  # fmt: skip
def test_bad_block(block, wrt, expected, line, column):
    start = time.perf_counter()
    with pytest.raises(FormulaError) as info:
        derive(block, wrt=wrt)
    assert time.perf_counter() - start < 2.0
    err = info.value
    assert expected in err.reason, err.reason
    assert (err.line, err.column) == (line, column), str(err)
    text = str(err)
    assert text == err.rendered()
    assert err.reason.strip() and not INTERNAL_WORDS.search(err.reason), err.reason
    if line is None:
        assert "^" not in text and err.column is None
        return
    head, shown, caret = text.split("\n")[:3]
    assert head == f"line {line}: {err.reason}"
    assert re.fullmatch(r" {4}[ \t]*\^+", caret), text
    if len(err.source_line) <= 160:  # long lines are quoted around the caret only
        assert shown == "    " + err.source_line
        assert caret.index("^") == 4 + column - 1
        assert err.source_line == block.replace("\r", "").split("\n")[line - 1].replace(
            "\x00", "?"
        ).replace("\ud800", "?")


@pytest.mark.parametrize("case", sorted(TWO_OPERAND_SHAPE_CASES))
def test_shape_conflicts_name_both_shapes(case):
    block, wrt = next((c[1], c[2]) for c in CORPUS if c[0] == case)
    with pytest.raises(FormulaError) as info:
        derive(block, wrt=wrt)
    shapes = SHAPE_TEXT.findall(info.value.reason)
    if case == "matmul-scalar":
        assert "scalar" in info.value.reason and len(shapes) >= 1
    else:
        assert len(shapes) >= 2, info.value.reason


def test_unknown_name_suggestions():
    with pytest.raises(FormulaError, match="did you mean loss"):
        derive("X: (n,)\nloss = sum(X**2)\nf = 2 * lose", wrt="X")
    with pytest.raises(FormulaError, match="did you mean logdet"):
        derive("S: (n, n) spd\nf = log_det(S)", wrt="S")
    with pytest.raises(FormulaError, match="did you mean 'symmetric'"):
        derive("S: (n, n) symmetrc\nf = trace(S)", wrt="S")


def test_redefinition_names_the_first_line():
    with pytest.raises(FormulaError) as info:
        derive("X: (n,)\nR = 2 * X\nQ = 3 * X\nR = Q\nf = sum(R)", wrt="X")
    assert "line 2" in info.value.reason and info.value.line == 4


def test_multiline_expression_locates_the_inner_line():
    block = "A: (n, n)\nB: (n, k)\nf = trace(\n    A\n    + B\n)"
    with pytest.raises(FormulaError) as info:
        derive(block, wrt="A")
    assert (info.value.line, info.value.column) == (5, 7)


@pytest.mark.parametrize(
    ("shapes", "expected"),
    [
        ({"A": "(n, n) bogus"}, "unknown structure word 'bogus'"),
        ({"A": (0, "n")}, "positive"),
        ({"A": ("n", "n", "n")}, "3 axes"),
        ({"A": "(n, k) spd"}, "square"),
        ({"_A": ("n", "n")}, "may not start with '_'"),
        ({"lambda": ("n", "n")}, "Python keyword"),
        ({"A b": ("n", "n")}, "not a valid symbol name"),
        ({"A": ("n", 2.5)}, "a dim is a name or a positive integer"),
        ({"A": 3}, "a shape must be a tuple"),
        ({"A": ("n k",)}, "not a valid dim name"),
        ({"A": ("n", "__class__")}, "may not start with '_'"),
        ({"A": ("n", 10**30)}, "the dim is too large"),
        ({"A": ("n", "lambda")}, "Python keyword"),
        ({"A": ("n", "n"), "n": ()}, "already used as a dim"),
        ({"n": (), "A": ("n", "n")}, "n is a symbol and cannot also be a dim"),
    ],
)
def test_bad_shapes_mapping(shapes, expected):
    with pytest.raises(FormulaError, match=re.escape(expected)):
        derive("trace(A)" if "A" in shapes else "trace(B)", wrt=list(shapes)[0], shapes=shapes)


@pytest.mark.parametrize(
    "text", [None, b"X: (n,)\nf = sum(X)", 3, ["X: (n,)", "f = sum(X)"], {"X": 1}]
)
def test_text_that_is_not_text(text):
    with pytest.raises(FormulaError, match="must be text"):
        derive(text, wrt="X")


@pytest.mark.parametrize("wrt", [None, 3, {"X": 1}, [None]])
def test_wrt_that_is_not_names(wrt):
    with pytest.raises(FormulaError):
        derive("X: (n,)\nf = sum(X)", wrt=wrt)


@pytest.mark.parametrize(
    ("sizes", "expected"),
    [({"n": 0}, "positive integer"), ({"n": 2.5}, "positive integer"), ({"n": True}, "positive")],
)
def test_bad_sizes(sizes, expected):
    with pytest.raises(FormulaError, match=expected):
        derive("X: (n,)\nf = sum(X)", wrt="X", sizes=sizes)


def test_accepted_line_endings_and_layout():
    """Windows and old-Mac line ends, a byte-order mark, tabs and continuations are read."""
    for block in [
        "A: (n, n)\r\nf = trace(A)\r\n",
        "A: (n, n)\rf = trace(A)",
        "\ufeffA: (n, n)\nf = trace(A)",
        "A:\t(n, n)\nf\t=\ttrace(A)",
        "A: (n, n)\nf = trace(A) \\\n    + 1",
        "A: (n, n)\nf = (trace(A)\n     + 1)  # a comment inside",
    ]:
        d = derive(block, wrt="A")
        assert d.gradient_function()(A=[[1.0, 2.0], [3.0, 4.0]]).tolist() == [[1, 0], [0, 1]]


def test_error_pickles_and_is_a_value_error():
    import pickle

    with pytest.raises(FormulaError) as info:
        derive("X: (n,)\nf = sum(Y)", wrt="X")
    again = pickle.loads(pickle.dumps(info.value))
    assert str(again) == str(info.value) and isinstance(again, ValueError)
    assert gradwright.NotSupportedError.__mro__[1] is FormulaError


def test_numpy_integers_are_dims():
    import numpy as np

    d = derive("trace(A)", wrt="A", shapes={"A": (np.int64(3), np.int32(3))})
    assert d.target_shape == ()


def test_sizes_that_is_not_a_mapping():
    with pytest.raises(FormulaError, match="sizes"):
        derive("X: (n,)\nf = sum(X)", wrt="X", sizes="n=3")
    assert derive("X: (n,)\nf = sum(X)", wrt="X", sizes={"n": np.int64(3)}).size_hints == {"n": 3}


# odd but small text: each is derived or refused with a FormulaError, nothing else
ODD = [
    "A: (n, n)\r\nf = trace(A)\r\n",
    "A: (n, n)\n\x0cf = trace(A)",
    "A: (n, n)\nf = trace(A) * 10**400",
    "A: (n, n)\nf = trace(A) ** 1e300",
    "A: (n, n)\nf = sum(A ** -1)",
    "A: (n, n)\nf = sum(A) ** 10000000",
    "A: (n, n)\nf = trace(A) * 1.5e-400",
    "A: (n, n)\nf = trace(A) * (1/3)**100000",
    "A: (n, n)\nf = trace(A) * 2**-100000",
    "A: (n, n)\nf = trace(A) + " + " + ".join(f"1/{p}" for p in range(2, 1500)),
    "match A:\n case 1: pass",
    "async def f(): pass",
    ":",
    "A:",
    "A: int = 3\nf = 1",
    "A: trace(B)\nf = 1",
    "A: [n, n]\nf = trace(A)",
    "A: (f(n), n)\nf = 1",
    "A: (n*0, n)\nf = 1",
    "A: (n, n)\nf = = = trace(A)",
    "A: (n, n)\nf = trace(A" + ".T" * 100 + ")",
    "A: (n, n)\nf = " + "{" * 150 + "}" * 150,
    "A: (n, n)\nf = " + "lambda: " * 500 + "1",
    "A: (n, n)\nf = trace(d(A))",
    "A: (n, n)\nf = trace(A)\n\n\n# trailing comment\n   \n",
    "A: (n, n)\n    # an indented comment\nf = trace(A)",
    "A: (n, n)\nf = (trace(A)  # open bracket, comment\n)",
    "A: (n, n)\nf = trace(A)\n)",
    "A: (n, n)\nf = trace(A)\n(",
    "A: (n, n)\nf = trace((A)\ng = 1",
    "A: (n, n)\nf = trace(A) \\\n\n + 1",
    "A: (n, n) spd\nf = logdet(A) + trace(inv(A)) + det(A) ** 0.5",
    "A: (n, n)\nT = A\nf = trace(T)",
    "A: (n, n)\nf = trace(A.T.T)\nf2 = f",
    "A: (n, n)\nf = trace(A)\nA: (n, n)",
    "\n".join(f"X{i}: (n, n)" for i in range(500)) + "\nf = trace(X499)",
]


@pytest.mark.parametrize("block", ODD, ids=[f"odd{i}" for i in range(len(ODD))])
def test_odd_text_is_derived_or_refused(block):
    start = time.perf_counter()
    wrt = "X499" if "X499" in block else "A"
    try:
        d = derive(block, wrt=wrt)
    except FormulaError as err:
        assert err.reason
    else:
        d.latex()
        d.source()
    assert time.perf_counter() - start < 2.0


def test_caret_lines_up_after_tabs():
    with pytest.raises(FormulaError) as info:
        derive("A: (n, n)\nf =\ttrace(A)\t+\tQ", wrt="A")
    err = info.value
    _, shown, caret = str(err).split("\n")
    assert err.column == 16
    assert caret.expandtabs(8).index("^") == shown.expandtabs(8).index("Q")
