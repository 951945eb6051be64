"""The smart constructors of the structural nodes (trace, vec, diag, kron, solve, inverse,
index, ...): light canonical forms as trees are built; a part of `expr`."""

from __future__ import annotations

from fractions import Fraction

from .expr_canonical import ZERO, add, is_symmetric, mul, power, split_coef, transpose, zero_like
from .expr_core import Add, Const, Expr, Identity, Mul, Ones, Symbol, Transpose, Zero
from .expr_elementwise import Sum
from .expr_shapes import Dim, OptDim, is_col, is_row, shape_size
from .expr_structural import (
    Diag,
    Diagm,
    Index,
    Inverse,
    Kron,
    Solve,
    Trace,
    Tril,
    Unvec,
    Vec,
    _need_square,
)


def _terms_broadcast(a: Add) -> list:
    """The terms of an array-shaped sum, a scalar term c written as c * ones(shape)."""
    return [mul(t, Ones(a.shape)) if t.is_scalar else t for t in a.args]


def trace(a: Expr) -> Expr:
    if type(a) is Zero:
        _need_square(a, "trace")
        return ZERO
    if type(a) is Add:
        return add(*(trace(t) for t in _terms_broadcast(a)))
    if type(a) is Mul and a.scalar_factors:
        arr = a.array_factors
        return mul(*a.scalar_factors, trace(arr[0] if len(arr) == 1 else Mul(*arr)))
    if type(a) is Identity:
        return Const(a.args[0].coef) if a.args[0].is_literal else Trace(a)
    if type(a) is Transpose:
        return trace(a.args[0])
    return Trace(a)


def summation(a: Expr) -> Expr:
    if a.is_scalar:
        return a
    if type(a) is Zero:
        return ZERO
    if type(a) is Add:
        return add(*(summation(t) for t in _terms_broadcast(a)))
    if type(a) is Mul and a.scalar_factors:
        arr = a.array_factors
        return mul(*a.scalar_factors, summation(arr[0] if len(arr) == 1 else Mul(*arr)))
    if type(a) is Transpose:
        return summation(a.args[0])
    return Sum(a)


def vec(a: Expr) -> Expr:
    if is_col(a.shape):
        return a
    if type(a) is Ones:
        return Ones((shape_size(a.shape), None))
    if type(a) is Zero:
        return Zero((shape_size(a.shape), None))
    if type(a) is Add:
        return add(*(vec(t) for t in _terms_broadcast(a)))
    if type(a) is Mul and a.scalar_factors and len(a.array_factors) == 1:
        return mul(*a.scalar_factors, vec(a.array_factors[0]))
    if is_row(a.shape) and type(a) is Transpose:
        return a.args[0]
    return Vec(a)


def unvec(g: Expr, rows: OptDim, cols: OptDim) -> Expr:
    if rows is not None and cols is None:
        return g
    if rows is None and cols is not None:
        return transpose(g)
    if type(g) is Vec and g.args[0].shape == (rows, cols):
        return g.args[0]
    if type(g) is Zero:
        return Zero((rows, cols))
    if type(g) is Mul and g.scalar_factors and len(g.array_factors) == 1:
        return mul(*g.scalar_factors, unvec(g.array_factors[0], rows, cols))
    if type(g) is Add:
        return add(*(unvec(t, rows, cols) for t in _terms_broadcast(g)))
    return Unvec(g, rows, cols)


def diag(a: Expr) -> Expr:
    if type(a) is Diagm:
        return a.args[0]
    if type(a) is Zero:
        return Zero((a.shape[0], None))
    if type(a) is Add:
        return add(*(diag(t) for t in _terms_broadcast(a)))
    if type(a) is Mul and a.scalar_factors and len(a.array_factors) == 1:
        return mul(*a.scalar_factors, diag(a.array_factors[0]))
    if type(a) is Identity or type(a) is Ones:
        return Ones((a.shape[0], None))
    if type(a) is Transpose:
        return diag(a.args[0])
    return Diag(a)


def tril(a: Expr) -> Expr:
    """The lower triangle; idempotent, and the identity on lower-triangular or diagonal
    symbols, zeros and identities."""
    t = type(a)
    if t is Tril or t in (Zero, Identity) or t is Diagm:
        return a
    if t is Symbol and a.structure & {"lower", "diagonal"}:
        return a
    if t is Add:
        return add(*(tril(x) for x in a.args))
    if t is Mul and a.scalar_factors and len(a.array_factors) == 1:
        return mul(*a.scalar_factors, tril(a.array_factors[0]))
    return Tril(a)


def diagm(x: Expr) -> Expr:
    if type(x) is Zero:
        return Zero((x.shape[0], x.shape[0]))
    if type(x) is Ones:
        return Identity(x.shape[0])
    if type(x) is Mul and x.scalar_factors and len(x.array_factors) == 1:
        return mul(*x.scalar_factors, diagm(x.array_factors[0]))
    return Diagm(x)


def kron(a: Expr, b: Expr) -> Expr:
    if a.is_scalar or b.is_scalar:
        return mul(a, b)
    out_shape = Kron(a, b).shape
    if type(a) is Zero or type(b) is Zero:
        return Zero(out_shape)
    sa = a.scalar_factors if type(a) is Mul else ()
    sb = b.scalar_factors if type(b) is Mul else ()
    if sa or sb:

        def strip(e):
            if type(e) is not Mul:
                return e
            arr = e.array_factors
            return arr[0] if len(arr) == 1 else Mul(*arr)

        return mul(*sa, *sb, kron(strip(a), strip(b)))
    if type(a) is Identity and type(b) is Identity:
        return Identity(a.args[0] * b.args[0])
    return Kron(a, b)


def solve(a: Expr, b: Expr) -> Expr:
    if type(b) is Zero:
        return Zero(Solve(a, b).shape)
    if type(a) is Identity:
        return b
    if b == a:
        return Identity(a.shape[0])
    if type(b) is Identity:
        return inverse(a)
    if type(b) is Mul and b.scalar_factors:
        arr = b.array_factors
        return mul(*b.scalar_factors, solve(a, arr[0] if len(arr) == 1 else Mul(*arr)))
    return Solve(a, b)


def inverse(a: Expr) -> Expr:
    if type(a) is Inverse:
        return a.args[0]
    if type(a) is Identity:
        return a
    if type(a) is Mul and a.scalar_factors and len(a.array_factors) == 1:
        inv_scalars = [power(f, Const(-1)) for f in a.scalar_factors]
        return mul(*inv_scalars, inverse(a.array_factors[0]))
    return Inverse(a)


FULL = ("slice", None, None)


def index(a: Expr, rows, cols) -> Expr:
    """a[rows, cols] with the canonical forms: a full selection is a itself, zeros stay zeros."""
    if rows in (None, FULL) and cols in (None, FULL):
        return a
    if type(a) is Zero:
        return zero_like(Index(a, rows, cols).shape)
    if type(a) is Mul and a.scalar_factors:
        arr = a.array_factors
        return mul(*a.scalar_factors, index(arr[0] if len(arr) == 1 else Mul(*arr), rows, cols))
    if type(a) is Add:
        return add(*(index(t, rows, cols) for t in _terms_broadcast(a)))
    return Index(a, rows, cols)


def selection(size: Dim, sel) -> Expr:
    """The constant matrix S with S @ v = v[sel] for a vector v of length `size` (eye(size)[sel]).

    For one position S is the unit vector (a column), so that v[i] = Sᵀ v.
    """
    s = Index(Identity(size), sel, FULL)
    return transpose(s) if sel[0] == "at" else s


def sym_part(g: Expr) -> Expr:
    """(G + G^T) / 2, the gradient in the space of symmetric matrices."""
    if is_symmetric(g):
        return g
    if type(g) is Add:
        return add(*(sym_part(t) for t in g.args))
    c, rest = split_coef(g)
    if c != 1 and rest is not None:
        return mul(Const(c), sym_part(rest))
    return mul(Const(Fraction(1, 2)), add(g, transpose(g)))
