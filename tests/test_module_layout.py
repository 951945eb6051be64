"""The expression nodes and the reader live in modules by family; `gradwright.expr` and
`gradwright.language.parser` still answer every name they had, and the parts import one another
without cycles (a part never imports the module that gathers it)."""

from __future__ import annotations

import ast
from pathlib import Path

import gradwright.expr as E
from gradwright.language import parser

SRC = Path(E.__file__).parent

#: the names `gradwright.expr` had before it was split (tests and modules use them as E.name)
EXPR_NAMES = """
AXIS_NODES Abs Add AxisReduce AxisSoftmax COMPLEX_NODE_CLASSES Commutation Conj Const D Det Diag
Diagm Differential Dim ELEMENTWISE Expr Extremum FULL Func Identity Imag ImagUnit Index Inverse
Kron KronContract LogDet LogSumExp MatMul MatPow Mul NODE_CLASSES Named Norm ONE Ones OptDim Pi
Power Real SCALAR SYMMETRIC_WORDS Shape SizeOf Softmax Solve Sum Symbol TieWeights Trace
Transpose Tril Unvec Vec ZERO Zero _axis_take _need_square add const describe diag diagm dim_mul
div expanded_size index inline_named inverse is_col is_diagonal is_matrix_shape is_one is_row
is_scalar_shape is_spd is_symmetric is_vector_shape is_zero kron matmul matmul_mismatch mul neg
power rebuild_smart selection shape_size shape_text solve split_coef sub substitute summation
sym_part trace transpose tril unvec user_shape vec walk zero_like Fraction ShapeError
""".split()

PARSER_NAMES = """
Block FUNCTIONS LIMITS STRUCTURE_WORDS parse_block parse_shape_spec
_ASSIGN_RE _COMPOUND_OPENERS _OPENER_RE _not_in_language
""".split()

EXPR_PARTS = [p for p in sorted(SRC.glob("expr_*.py")) if p.name != "expr_axis.py"]
READER_PARTS = [
    SRC / "language" / f"{m}.py"
    for m in ("vocabulary", "carets", "declarations", "expressions", "call_dispatch")
]


def test_expr_answers_every_name_it_had():
    missing = [n for n in EXPR_NAMES if not hasattr(E, n)]
    assert not missing


def test_parser_answers_every_name_it_had():
    missing = [n for n in PARSER_NAMES if not hasattr(parser, n)]
    assert not missing


def test_node_classes_are_listed_once_each():
    assert len(set(E.NODE_CLASSES)) == len(E.NODE_CLASSES)
    for name in EXPR_NAMES:
        obj = getattr(E, name)
        if isinstance(obj, type) and issubclass(obj, E.Expr) and obj is not E.Expr:
            assert obj in E.NODE_CLASSES, name


def _module_level_imports(path: Path) -> set:
    out = set()
    for stmt in ast.parse(path.read_text(encoding="utf-8")).body:
        if isinstance(stmt, ast.ImportFrom) and stmt.level == 1:
            out.add(stmt.module or "")
            out |= {f"{stmt.module or ''}.{a.name}".lstrip(".") for a in stmt.names}
    return out


def test_expr_parts_never_import_expr_itself():
    assert EXPR_PARTS
    for path in EXPR_PARTS:
        imports = _module_level_imports(path)
        assert "expr" not in imports and not any(i.startswith("expr.") for i in imports), path


def test_reader_parts_never_import_the_parser_at_module_level():
    for path in READER_PARTS:
        assert "parser" not in _module_level_imports(path), path
