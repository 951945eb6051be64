"""Structure predicates (symmetric, SPD, diagonal) and the smart constructors of the algebra
(add, mul, matmul, transpose, power, div) that keep trees canonical; a part of `expr`."""

from __future__ import annotations

from fractions import Fraction

from .errors import ShapeError
from .expr_core import (
    Add,
    Commutation,
    Const,
    D,
    Differential,
    Expr,
    Identity,
    MatMul,
    Mul,
    Named,
    Ones,
    Symbol,
    Transpose,
    Zero,
    _common_shape,
    matmul_mismatch,
)
from .expr_elementwise import Func, Power
from .expr_shapes import SCALAR, Dim, Shape, is_matrix_shape, is_scalar_shape
from .expr_structural import Diagm, Inverse, Kron, MatPow, Solve

# ---------------------------------------------------------------------------------------------
# structure predicates
# ---------------------------------------------------------------------------------------------

SYMMETRIC_WORDS = frozenset({"symmetric", "spd", "diagonal"})


def is_symmetric(e: Expr) -> bool:
    """True when e is known to be symmetric (scalars count; vectors do not)."""
    if e._sym is None:
        e._sym = _is_symmetric(e)
    return e._sym


def _is_symmetric(e: Expr) -> bool:
    if e.is_scalar:
        return True
    if not is_matrix_shape(e.shape) or e.shape[0] != e.shape[1]:
        return False
    t = type(e)
    if t is Symbol:
        return bool(e.structure & SYMMETRIC_WORDS)
    if t is Differential:
        # dX is not assumed symmetric even when X is: JVPs and dense Jacobians take any
        # direction, and gradients are projected onto the structure afterwards
        return False
    if t in (Identity, Diagm, Zero, Ones):
        return True
    if t is Commutation:
        return e.args[0] == e.args[1]
    if t in (Inverse, Transpose, Named, D):
        return is_symmetric(e.children[-1])
    if t is MatPow:
        return is_symmetric(e.args[0])
    if t in (Power, Func):
        return is_symmetric(e.children[0])
    if t in (Add, Mul):
        return all(is_symmetric(c) for c in e.args)
    if t is Kron:
        return is_symmetric(e.args[0]) and is_symmetric(e.args[1])
    if t is MatMul:
        fs = e.args
        n = len(fs)
        for i in range(n // 2):
            if fs[i] != transpose(fs[n - 1 - i]):
                return False
        return n % 2 == 0 or is_symmetric(fs[n // 2])
    known = getattr(e, "known_symmetric", None)  # node families in their own modules
    return known() if known is not None else False


def is_spd(e: Expr) -> bool:
    t = type(e)
    if t is Symbol:
        return "spd" in e.structure
    if t is Identity:
        return True
    if t in (Inverse, Named):
        return is_spd(e.children[-1])
    if t is Mul:
        consts = [f for f in e.args if isinstance(f, Const)]
        others = [f for f in e.args if not isinstance(f, Const)]
        return len(others) == 1 and all(c.value > 0 for c in consts) and is_spd(others[0])
    known = getattr(e, "known_spd", None)  # node families in their own modules
    return known() if known is not None else False


def is_diagonal(e: Expr) -> bool:
    t = type(e)
    if t is Symbol:
        return "diagonal" in e.structure
    return t in (Identity, Diagm)


# ---------------------------------------------------------------------------------------------
# smart constructors: light canonical forms as trees are built
# ---------------------------------------------------------------------------------------------

ZERO = Const(0)


ONE = Const(1)


def const(value) -> Const:
    return Const(value)


def zero_like(shape: Shape) -> Expr:
    return ZERO if is_scalar_shape(shape) else Zero(tuple(shape))


def is_zero(e: Expr) -> bool:
    return type(e) is Zero or (type(e) is Const and e.value == 0)


def is_one(e: Expr) -> bool:
    return type(e) is Const and e.value == 1


def split_coef(e: Expr) -> tuple[Fraction, Expr | None]:
    """e = coef * rest, rest None for a pure constant."""
    if type(e) is Const:
        return e.value, None
    if type(e) is Mul and type(e.args[0]) is Const:
        rest = e.args[1:]
        return e.args[0].value, rest[0] if len(rest) == 1 else Mul(*rest)
    return Fraction(1), e


def add(*terms: Expr) -> Expr:
    flat: list[Expr] = []
    stack = list(reversed(terms))
    while stack:
        t = stack.pop()
        if type(t) is Add:
            stack.extend(reversed(t.args))
        else:
            flat.append(t)
    shape = _common_shape(flat, "add")
    groups: dict = {}
    order: list = []
    constant = Fraction(0)
    const_at = None
    for t in flat:
        if is_zero(t):
            continue
        c, rest = split_coef(t)
        if rest is None:
            constant += c
            if const_at is None:
                const_at = len(order)
            continue
        if rest in groups:
            groups[rest] += c
        else:
            groups[rest] = c
            order.append(rest)
    out = []
    for i, rest in enumerate(order):
        if i == const_at and constant != 0:
            out.append(Const(constant))
        c = groups[rest]
        if c != 0:
            out.append(rest if c == 1 else mul(Const(c), rest))
    if constant != 0 and (const_at is None or const_at >= len(order)):
        out.append(Const(constant))
    if not out:
        return zero_like(shape)
    if len(out) == 1:
        only = out[0]
        if only.is_scalar and not is_scalar_shape(shape):
            return mul(only, Ones(shape))
        return only
    return Add(*out)


def neg(e: Expr) -> Expr:
    return mul(Const(-1), e)


def sub(a: Expr, b: Expr) -> Expr:
    return add(a, neg(b))


def mul(*factors: Expr) -> Expr:
    flat: list[Expr] = []
    stack = list(reversed(factors))
    while stack:
        f = stack.pop()
        if type(f) is Mul:
            stack.extend(reversed(f.args))
        else:
            flat.append(f)
    shape = _common_shape(flat, "multiply entrywise")
    coef = Fraction(1)
    bases: dict = {}
    order: list = []
    for f in flat:
        if type(f) is Const:
            coef *= f.value
            continue
        if type(f) is Zero:
            return zero_like(shape)
        if type(f) is Ones:
            continue
        if type(f) is Power and type(f.args[1]) is Const:
            base, k = f.args[0], f.args[1].value
        else:
            base, k = f, Fraction(1)
        if base in bases:
            bases[base] += k
        else:
            bases[base] = k
            order.append(base)
    if coef == 0:
        return zero_like(shape)
    out = []
    for base in order:
        k = bases[base]
        if k == 0:
            continue
        out.append(base if k == 1 else power(base, Const(k)))
    scalars = sorted((f for f in out if f.is_scalar), key=_factor_order)
    arrays = sorted((f for f in out if not f.is_scalar), key=_factor_order)
    if not arrays and not is_scalar_shape(shape):
        # array factors that cancelled (s * s**-1) still leave an array: the scalars broadcast
        arrays = [Ones(shape)]
    parts = ([Const(coef)] if coef != 1 else []) + scalars + arrays
    if not parts:
        return ONE if is_scalar_shape(shape) else Ones(shape)
    if len(parts) == 1:
        return parts[0]
    return Mul(*parts)


def _factor_order(e: Expr):
    base = e.args[0] if type(e) is Power else e
    rank = 0 if type(base) is Symbol else 1 if type(base) is Named else 2
    return (rank, e.key())


def matmul(*factors: Expr) -> Expr:
    flat: list[Expr] = []
    scalars: list[Expr] = []
    stack = list(reversed(factors))
    while stack:
        f = stack.pop()
        if type(f) is MatMul:
            stack.extend(reversed(f.args))
        elif type(f) is Mul and f.scalar_factors and not f.is_scalar:
            scalars.extend(f.scalar_factors)
            arr = f.array_factors
            stack.append(arr[0] if len(arr) == 1 else Mul(*arr))
        else:
            flat.append(f)
    if len(flat) == 1 and not scalars:
        return flat[0]
    # shapes first, so a mismatch is reported before anything is simplified away
    for a, b in zip(flat, flat[1:]):
        if a.shape[1] != b.shape[0] and not (a.is_scalar or b.is_scalar):
            raise ShapeError(matmul_mismatch(a, b))
    chain: list[Expr] = []
    for f in flat:
        if f.is_scalar:
            scalars.append(f)
            continue
        chain.append(f)
    result_shape = (chain[0].shape[0], chain[-1].shape[1]) if chain else SCALAR
    if any(type(f) is Zero for f in chain):
        return zero_like(result_shape)
    reduced: list[Expr] = []
    for f in chain:
        if type(f) is Identity and (reduced or len(chain) > 1):
            continue
        if reduced and _cancels(reduced[-1], f):
            reduced.pop()
            continue
        if reduced and type(f) is Ones and type(reduced[-1]) is Ones and f.shape[0] in _UNIT:
            reduced[-1] = Ones((reduced[-1].shape[0], f.shape[1]))  # 1 1ᵀ of ones is ones
            continue
        if reduced and type(f) is Solve and reduced[-1] == f.args[0]:
            reduced.pop()
            f = f.args[1]
        reduced.append(f)
    if not reduced:
        core: Expr = Identity(result_shape[0])
    elif len(reduced) == 1:
        core = reduced[0]
    else:
        core = MatMul(*reduced)
    return mul(*scalars, core) if scalars else core


_UNIT = (None, Dim((), 1))


def _cancels(a: Expr, b: Expr) -> bool:
    return (type(a) is Inverse and a.args[0] == b) or (type(b) is Inverse and b.args[0] == a)


def transpose(e: Expr, _memo: dict | None = None) -> Expr:
    if e.is_scalar:
        return e
    if _memo is None:
        _memo = {}
    hit = _memo.get(id(e))
    if hit is not None:
        return hit[1]
    out = _transpose(e, _memo)
    _memo[id(e)] = (e, out)
    return out


def _transpose(e: Expr, memo: dict) -> Expr:
    t = type(e)
    if e.is_scalar:
        return e
    if t is Transpose:
        return e.args[0]
    if is_matrix_shape(e.shape) and is_symmetric(e):
        return e
    if t is Add:
        return add(*(transpose(a, memo) for a in e.args))
    if t is Mul:
        return mul(*(transpose(a, memo) for a in e.args))
    if t is MatMul:
        return matmul(*(transpose(a, memo) for a in reversed(e.args)))
    if t in (Ones, Zero):
        return t((e.shape[1], e.shape[0]))
    if t is Inverse:
        return Inverse(transpose(e.args[0], memo))
    if t is Func and is_matrix_shape(e.shape):  # a vector's transpose stays outside: f(x)^T
        return Func(e.args[0], transpose(e.args[1], memo))
    if t is Power and is_matrix_shape(e.shape):
        return Power(transpose(e.args[0], memo), e.args[1])
    if t is Kron:
        return Kron(transpose(e.args[0], memo), transpose(e.args[1], memo))
    if t is MatPow:
        return MatPow(transpose(e.args[0], memo), e.args[1])
    if t is Commutation:
        return Commutation(e.args[1], e.args[0])
    return Transpose(e)


def power(base: Expr, k: Expr) -> Expr:
    if type(k) is Const:
        if k.value == 1:
            return base
        if k.value == 0:
            return ONE if base.is_scalar else Ones(base.shape)
        if type(base) is Const and k.value.denominator == 1:
            if base.value != 0 or k.value > 0:
                return Const(base.value ** int(k.value))
        if type(base) is Power and type(base.args[1]) is Const and k.value.denominator == 1:
            return power(base.args[0], Const(base.args[1].value * k.value))
    return Power(base, k)


def div(a: Expr, b: Expr) -> Expr:
    if type(b) is Const:
        if b.value == 0:
            raise ShapeError("division by the constant 0")
        return mul(Const(1 / b.value), a)
    return mul(a, power(b, Const(-1)))
