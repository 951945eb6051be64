"""Node invariants and the meta-tests that keep the operation table complete."""

from __future__ import annotations

import pathlib

import pytest

from gradwright import expr as E
from gradwright import matrix_functions as M
from gradwright.calculus import ADJOINTS, RULES
from gradwright.language import parse_block
from gradwright.printing.latex import LatexPrinter
from gradwright.printing.numpy_code import NumpyPrinter
from gradwright.printing.text import TextPrinter

n, k = E.Dim.of("n"), E.Dim.of("k")
A = E.Symbol("A", (n, n))
B = E.Symbol("B", (n, k))
x = E.Symbol("x", (n, None))
s = E.Symbol("s", E.SCALAR)

#: one instance of every node class
EXAMPLES = {
    E.Symbol: A,
    E.Differential: E.Differential(A),
    E.Const: E.Const(3),
    E.Identity: E.Identity(n),
    E.Ones: E.Ones((n, k)),
    E.Zero: E.Zero((n, k)),
    E.Commutation: E.Commutation(n, k),
    E.Add: E.Add(A, E.Transpose(A)),
    E.Mul: E.Mul(s, B),
    E.MatMul: E.MatMul(A, B),
    E.Transpose: E.Transpose(B),
    E.Power: E.Power(B, E.Const(2)),
    E.Func: E.Func("exp", B),
    E.Trace: E.Trace(A),
    E.Det: E.Det(A),
    E.LogDet: E.LogDet(A),
    E.Inverse: E.Inverse(A),
    E.Solve: E.Solve(A, B),
    E.Kron: E.Kron(A, B),
    E.Vec: E.Vec(B),
    E.Unvec: E.Unvec(E.Vec(B), n, k),
    E.Diag: E.Diag(A),
    E.Diagm: E.Diagm(x),
    E.Sum: E.Sum(B),
    E.Norm: E.Norm(B),
    E.LogSumExp: E.LogSumExp(B),
    E.Softmax: E.Softmax(x),
    E.MatPow: E.MatPow(A, 3),
    E.Named: E.Named("R", B),
    E.D: E.D(B),
    E.KronContract: E.KronContract(E.Kron(A, B), B, n, n, "left"),
    E.SizeOf: E.SizeOf(n),
    E.Pi: E.Pi(),
    E.Index: E.Index(B, ("slice", 1, 3), ("at", -1)),
}

# the spectral, factorization and matrix-equation family (gradwright.matrix_functions)
S = E.Symbol("S", (n, n), frozenset({"spd"}))
EXAMPLES.update(
    {
        M.Eigvalsh: M.Eigvalsh(S),
        M.EigvalshJvp: M.EigvalshJvp(S, E.Differential(S)),
        M.EigvalshVjp: M.EigvalshVjp(S, x),
        M.Cholesky: M.Cholesky(S),
        M.CholeskyJvp: M.CholeskyJvp(M.Cholesky(S), E.Differential(S)),
        M.CholeskyVjp: M.CholeskyVjp(M.Cholesky(S), A),
        M.MatrixFunction: M.MatrixFunction("expm", A),
        M.SpectralFrechet: M.SpectralFrechet("logm", S, A),
        M.ExpmFrechet: M.ExpmFrechet(A, E.Differential(A)),
        M.LogmFrechet: M.LogmFrechet(A, E.Differential(A)),
        M.SolveSylvester: M.SolveSylvester(A, A, A),
        M.SolveContinuousLyapunov: M.SolveContinuousLyapunov(A, S),
        M.SolveDiscreteLyapunov: M.SolveDiscreteLyapunov(A, S),
    }
)

#: classes that never occur inside a differential (or are its leaves, handled by the driver),
#: so they need no adjoint rule
NOT_LINEAR = {
    E.Differential,
    E.Symbol, E.Const, E.Identity, E.Ones, E.Zero, E.Commutation, E.Power, E.Func, E.Det,
    E.LogDet, E.Inverse, E.Norm, E.LogSumExp, E.Softmax, E.MatPow, E.Named, E.D,
    M.Eigvalsh, M.Cholesky, M.MatrixFunction,
}  # fmt: skip
NOT_LINEAR |= {E.SizeOf, E.Pi}  # numbers of the language: constants
#: classes the code generator never prints (pending differentials exist only in displayed steps)
NOT_CODE = {E.D}


def test_every_node_class_has_an_example():
    assert set(EXAMPLES) == set(E.NODE_CLASSES)


@pytest.mark.parametrize("cls", E.NODE_CLASSES, ids=lambda c: c.__name__)
def test_func_of_args_rebuilds_the_node(cls):
    node = EXAMPLES[cls]
    assert node.func(*node.args) == node
    assert hash(node.func(*node.args)) == hash(node)


@pytest.mark.parametrize("cls", E.NODE_CLASSES, ids=lambda c: c.__name__)
def test_every_node_has_a_rule_an_adjoint_and_printers(cls):
    assert cls in RULES, f"{cls.__name__} has no differential rule"
    assert cls in ADJOINTS or cls in NOT_LINEAR, f"{cls.__name__} has no adjoint rule"
    for printer in (LatexPrinter, TextPrinter):
        assert any(hasattr(printer, f"_print_{c.__name__}") for c in cls.__mro__), (
            f"{printer.__name__} cannot print {cls.__name__}"
        )
    if cls not in NOT_CODE:
        assert hasattr(NumpyPrinter, f"_print_{cls.__name__}") or hasattr(
            TextPrinter, f"_print_{cls.__name__}"
        )


def test_every_node_class_is_named_in_some_test():
    tests = pathlib.Path(__file__).parent
    corpus = "\n".join(p.read_text() for p in tests.rglob("test_*.py"))
    missing = [
        c.__name__
        for c in E.NODE_CLASSES
        if f"E.{c.__name__}" not in corpus and f"M.{c.__name__}" not in corpus
    ]
    assert not missing, f"node classes without a test: {missing}"


def test_nodes_are_immutable_values():
    a = E.MatMul(A, B)
    assert a == E.MatMul(E.Symbol("A", (n, n)), E.Symbol("B", (n, k)))
    assert a != E.MatMul(A, E.Symbol("B", (n, k), frozenset({"positive"})))
    assert a.shape == (n, k)


def test_shapes_and_errors_name_both_operands():
    with pytest.raises(E.ShapeError, match=r"\(n, k\) @ \(n, k\)"):
        E.matmul(B, B)
    with pytest.raises(E.ShapeError, match="trace needs a square matrix"):
        E.Trace(B)


def test_smart_constructors_keep_canonical_forms():
    assert E.transpose(E.transpose(B)) == B
    assert E.matmul(A, E.Identity(n)) == A
    assert E.matmul(E.Inverse(A), A) == E.Identity(n)
    assert E.add(B, B) == E.Mul(E.Const(2), B)
    assert E.add(B, E.neg(B)) == E.Zero((n, k))
    assert E.mul(E.Const(2), E.Const(3)) == E.Const(6)
    assert E.mul(B, B) == E.Power(B, E.Const(2))
    sym = E.Symbol("S", (n, n), frozenset({"symmetric"}))
    assert E.transpose(sym) == sym
    assert E.transpose(E.matmul(E.transpose(B), B)) == E.matmul(E.transpose(B), B)
    assert E.is_symmetric(E.matmul(E.transpose(B), sym, B))


def test_vectors_follow_numpy_one_dimensional_rules():
    b = parse_block("x: (n,)\nA: (n, n)\nf = x @ A @ x")
    assert b.expr.shape == E.SCALAR
    assert b.expr == E.MatMul(
        E.Transpose(b.declarations["x"]), b.declarations["A"], b.declarations["x"]
    )
    b = parse_block("x: (n,)\nA: (n, k)\nf = x @ A")
    assert b.expr.shape == (E.Dim.of("k"), None)  # a 1-D result, held as a column
    b = parse_block("x: (n,)\nf = x.T")
    assert b.expr == b.declarations["x"]
