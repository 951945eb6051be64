"""Expression nodes: immutable, each knowing its shape; structure predicates; smart constructors.

Shapes are internal 2-tuples `(rows, cols)` of `Dim`, where `None` marks the unit axis:
`(None, None)` is a scalar, `(n, None)` a (column) vector, `(None, n)` its transpose.
"""

from __future__ import annotations

import hashlib
import math
from collections.abc import Iterable
from dataclasses import dataclass
from fractions import Fraction

from .errors import ShapeError

# ---------------------------------------------------------------------------------------------
# dims and shapes
# ---------------------------------------------------------------------------------------------


@dataclass(frozen=True)
class Dim:
    """A dimension: a product of named dims times a positive integer (`n`, `3`, `m*n`)."""

    names: tuple[str, ...] = ()
    coef: int = 1

    @staticmethod
    def of(value: int | str | Dim) -> Dim:
        if isinstance(value, Dim):
            return value
        if isinstance(value, int):
            return Dim((), value)
        return Dim((value,), 1)

    def __mul__(self, other: Dim) -> Dim:
        return Dim(tuple(sorted(self.names + other.names)), self.coef * other.coef)

    def __str__(self) -> str:
        parts = list(self.names)
        if self.coef != 1 or not parts:
            parts.insert(0, str(self.coef))
        return "*".join(parts)

    def value(self, sizes: dict[str, int]) -> int:
        out = self.coef
        for name in self.names:
            out *= sizes[name]
        return out

    @property
    def is_literal(self) -> bool:
        return not self.names

    def user(self) -> int | str:
        """The dim as a user sees it: an int for a literal, else its text."""
        return self.coef if not self.names else str(self)


OptDim = Dim | None
Shape = tuple  # tuple[OptDim, OptDim]
SCALAR: Shape = (None, None)


def dim_mul(a: OptDim, b: OptDim) -> OptDim:
    if a is None:
        return b
    if b is None:
        return a
    return a * b


def shape_size(shape: Shape) -> OptDim:
    return dim_mul(shape[0], shape[1])


def is_scalar_shape(shape: Shape) -> bool:
    return shape[0] is None and shape[1] is None


def is_col(shape: Shape) -> bool:
    return shape[0] is not None and shape[1] is None


def is_row(shape: Shape) -> bool:
    return shape[0] is None and shape[1] is not None


def is_vector_shape(shape: Shape) -> bool:
    return (shape[0] is None) != (shape[1] is None)


def is_matrix_shape(shape: Shape) -> bool:
    return shape[0] is not None and shape[1] is not None


def user_shape(shape: Shape) -> tuple:
    """NumPy's view of an internal shape: () scalar, (n,) vector, (m, n) matrix."""
    return tuple(d.user() for d in shape if d is not None)


def shape_text(shape: Shape) -> str:
    dims = [str(d) for d in shape if d is not None]
    if not dims:
        return "()"
    if len(dims) == 1:
        return f"({dims[0]},)"
    return f"({dims[0]}, {dims[1]})"


def describe(e: Expr) -> str:
    """'(n, k) matrix', '(n,) vector', 'scalar' for error messages."""
    if is_scalar_shape(e.shape):
        return "scalar"
    kind = "vector" if is_vector_shape(e.shape) else "matrix"
    return f"{shape_text(e.shape)} {kind}"


# ---------------------------------------------------------------------------------------------
# nodes
# ---------------------------------------------------------------------------------------------


class Expr:
    """Base class. `args` holds everything that defines the node; `func(*args) == self`."""

    __slots__ = ("args", "shape", "_hash", "_symbols", "_hasdiff", "_key", "_sym")

    def __init__(self, *args):
        self.args = args
        self._hash = None
        self._symbols = None
        self._hasdiff = None
        self._key = None
        self._sym = None
        self.shape = self._infer_shape()

    def _infer_shape(self) -> Shape:  # pragma: no cover - every class overrides
        raise NotImplementedError

    @property
    def func(self):
        return type(self)

    @property
    def children(self) -> tuple[Expr, ...]:
        return tuple(a for a in self.args if isinstance(a, Expr))

    def rebuild(self, children: Iterable[Expr]) -> Expr:
        """The same node with new children (non-Expr args kept)."""
        it = iter(children)
        return self.func(*[next(it) if isinstance(a, Expr) else a for a in self.args])

    def __eq__(self, other):
        if self is other:
            return True
        if type(self) is not type(other):
            return False
        if hash(self) != hash(other):
            return False
        return self.args == other.args

    def __ne__(self, other):
        return not self == other

    def __hash__(self):
        if self._hash is None:
            self._hash = hash((type(self).__name__, self.args))
        return self._hash

    def key(self) -> str:
        """A deterministic text key (independent of hash seeds) used to order operands."""
        if self._key is None:
            if type(self) is Named:
                # a definition is known by its name; its body may be a large shared DAG
                self._key = f"Named({self.args[0]}:{self.args[1].key()[:40]})"
                return self._key
            parts = []
            for a in self.args:
                parts.append(a.key() if isinstance(a, Expr) else _arg_key(a))
            key = f"{type(self).__name__}({','.join(parts)})"
            if len(key) > 240:  # keep keys bounded on shared DAGs: a digest of the parts
                digest = hashlib.blake2b(key.encode(), digest_size=10).hexdigest()
                key = f"{key[:120]}#{digest}"
            self._key = key
        return self._key

    def __repr__(self):
        """The formula in the formula language, e.g. `2 * (X.T @ (X @ W - Y))`."""
        return self._printed("text", self.key)

    def __str__(self) -> str:
        return self.__repr__()

    def _repr_latex_(self) -> str:
        """The formula as math in a notebook."""
        return "$\\displaystyle " + self._printed("latex", lambda: r"\text{(not printable)}") + "$"

    def _printed(self, kind: str, fallback) -> str:
        from .printing import latex, text  # the printers import this module

        try:
            return (text if kind == "text" else latex)(self)
        except Exception:  # a node without a printer yet: its key still identifies it
            return fallback()

    @property
    def symbols(self) -> frozenset[str]:
        """Names of the symbols this expression depends on."""
        if self._symbols is None:
            out: frozenset[str] = frozenset()
            for c in self.children:
                out = out | c.symbols
            self._symbols = out
        return self._symbols

    @property
    def has_differential(self) -> bool:
        if self._hasdiff is None:
            self._hasdiff = any(c.has_differential for c in self.children)
        return self._hasdiff

    @property
    def is_scalar(self) -> bool:
        return is_scalar_shape(self.shape)


def _arg_key(a) -> str:
    if isinstance(a, frozenset):
        return "{" + ",".join(sorted(map(str, a))) + "}"
    if isinstance(a, tuple):
        return "(" + ",".join("_" if x is None else str(x) for x in a) + ")"
    return str(a)


# --- leaves ----------------------------------------------------------------------------------


class Symbol(Expr):
    """A declared symbol: name, internal shape, structure words."""

    __slots__ = ()

    def __init__(self, name: str, shape: Shape, structure: frozenset = frozenset()):
        super().__init__(name, tuple(shape), frozenset(structure))

    @property
    def name(self) -> str:
        return self.args[0]

    @property
    def structure(self) -> frozenset:
        return self.args[2]

    def _infer_shape(self):
        return self.args[1]

    @property
    def symbols(self):
        if self._symbols is None:
            self._symbols = frozenset([self.args[0]])
        return self._symbols


class Differential(Expr):
    """The differential leaf dX of a symbol X."""

    __slots__ = ()

    def _infer_shape(self):
        return self.args[0].shape

    @property
    def symbol(self) -> Symbol:
        return self.args[0]

    @property
    def has_differential(self):
        return True

    @property
    def symbols(self):
        return frozenset()


class Const(Expr):
    """An exact rational scalar constant."""

    __slots__ = ()

    def __init__(self, value):
        if isinstance(value, float):
            value = Fraction(value).limit_denominator(10**12) if math.isfinite(value) else value
        super().__init__(Fraction(value))

    @property
    def value(self) -> Fraction:
        return self.args[0]

    def _infer_shape(self):
        return SCALAR


class Identity(Expr):
    __slots__ = ()

    def _infer_shape(self):
        return (self.args[0], self.args[0])


class Ones(Expr):
    __slots__ = ()

    def _infer_shape(self):
        return tuple(self.args[0])


class Zero(Expr):
    __slots__ = ()

    def _infer_shape(self):
        return tuple(self.args[0])


class Commutation(Expr):
    """K(m, n): the mn x mn matrix with K vec(A) = vec(A.T) for A of shape (m, n)."""

    __slots__ = ()

    def _infer_shape(self):
        size = self.args[0] * self.args[1]
        return (size, size)


# --- n-ary -----------------------------------------------------------------------------------


def _common_shape(terms, what: str) -> Shape:
    shape = SCALAR
    for t in terms:
        if t.is_scalar:
            continue
        if is_scalar_shape(shape):
            shape = t.shape
        elif t.shape != shape:
            first = next(x for x in terms if not x.is_scalar)
            raise ShapeError(
                f"cannot {what} a {describe(first)} and a {describe(t)}: shapes differ"
            )
    return shape


class Add(Expr):
    __slots__ = ()

    def _infer_shape(self):
        if len(self.args) < 2:
            raise ShapeError("a sum needs two terms")
        return _common_shape(self.args, "add")


class Mul(Expr):
    """Product of scalars and/or entrywise (Hadamard) product of equal-shaped arrays."""

    __slots__ = ()

    def _infer_shape(self):
        if len(self.args) < 2:
            raise ShapeError("a product needs two factors")
        return _common_shape(self.args, "multiply entrywise")

    @property
    def scalar_factors(self):
        return tuple(f for f in self.args if f.is_scalar)

    @property
    def array_factors(self):
        return tuple(f for f in self.args if not f.is_scalar)


class MatMul(Expr):
    """A chain of matrix products (vectors are columns, their transposes rows)."""

    __slots__ = ()

    def _infer_shape(self):
        fs = self.args
        if len(fs) < 2:
            raise ShapeError("a matrix product needs two factors")
        for a, b in zip(fs, fs[1:]):
            if a.shape[1] != b.shape[0]:
                raise ShapeError(matmul_mismatch(a, b))
        return (fs[0].shape[0], fs[-1].shape[1])


def matmul_mismatch(a: Expr, b: Expr) -> str:
    ia = "1" if a.shape[1] is None else str(a.shape[1])
    ib = "1" if b.shape[0] is None else str(b.shape[0])
    return (
        f"cannot multiply {shape_text(a.shape)} @ {shape_text(b.shape)}: "
        f"inner dimensions {ia} and {ib} differ"
    )


# --- unary and others ------------------------------------------------------------------------


def _need_square(a: Expr, what: str):
    r, c = a.shape
    if r is None or c is None or r != c:
        raise ShapeError(f"{what} needs a square matrix, got a {describe(a)}")


class Transpose(Expr):
    __slots__ = ()

    def _infer_shape(self):
        r, c = self.args[0].shape
        return (c, r)


class Power(Expr):
    """Entrywise power a ** k with a scalar exponent k."""

    __slots__ = ()

    def _infer_shape(self):
        if not self.args[1].is_scalar:
            raise ShapeError(f"the exponent of ** must be a scalar, got a {describe(self.args[1])}")
        return self.args[0].shape


ELEMENTWISE = ("exp", "log", "sqrt", "sin", "cos", "tanh", "sigmoid", "softplus")


class Func(Expr):
    """An entrywise function: Func('exp', A)."""

    __slots__ = ()

    def _infer_shape(self):
        if self.args[0] not in ELEMENTWISE:
            raise ShapeError(f"unknown entrywise function {self.args[0]}")
        return self.args[1].shape

    @property
    def name(self) -> str:
        return self.args[0]

    @property
    def arg(self) -> Expr:
        return self.args[1]


class Trace(Expr):
    __slots__ = ()

    def _infer_shape(self):
        _need_square(self.args[0], "trace")
        return SCALAR


class Det(Expr):
    __slots__ = ()

    def _infer_shape(self):
        _need_square(self.args[0], "det")
        return SCALAR


class LogDet(Expr):
    """log |det A|."""

    __slots__ = ()

    def _infer_shape(self):
        _need_square(self.args[0], "logdet")
        return SCALAR


class Inverse(Expr):
    __slots__ = ()

    def _infer_shape(self):
        _need_square(self.args[0], "inv")
        return self.args[0].shape


class Solve(Expr):
    """solve(A, B) = A^{-1} B."""

    __slots__ = ()

    def _infer_shape(self):
        a, b = self.args
        _need_square(a, "solve")
        if b.shape[0] != a.shape[0]:
            raise ShapeError(
                f"cannot solve with a {describe(a)} and a right-hand side {describe(b)}: "
                f"{a.shape[0]} rows against {'1' if b.shape[0] is None else b.shape[0]}"
            )
        return b.shape


class Kron(Expr):
    __slots__ = ()

    def _infer_shape(self):
        a, b = self.args
        if a.is_scalar or b.is_scalar:
            raise ShapeError("kron needs two arrays; use * for a scalar multiple")
        return (dim_mul(a.shape[0], b.shape[0]), dim_mul(a.shape[1], b.shape[1]))


class Vec(Expr):
    __slots__ = ()

    def _infer_shape(self):
        a = self.args[0]
        if a.is_scalar:
            raise ShapeError("vec needs an array, got a scalar")
        return (shape_size(a.shape), None)


class Unvec(Expr):
    """The inverse of vec: a column of length r*c reshaped (column-major) to (r, c)."""

    __slots__ = ()

    def _infer_shape(self):
        g, r, c = self.args
        if g.shape != (dim_mul(r, c), None):
            raise ShapeError("unvec size mismatch")
        return (r, c)


class Diag(Expr):
    """The diagonal of a square matrix as a vector."""

    __slots__ = ()

    def _infer_shape(self):
        _need_square(self.args[0], "diag")
        return (self.args[0].shape[0], None)


class Diagm(Expr):
    """The diagonal matrix with a vector on its diagonal."""

    __slots__ = ()

    def _infer_shape(self):
        x = self.args[0]
        if not is_col(x.shape):
            raise ShapeError(f"diagm needs a vector, got a {describe(x)}")
        return (x.shape[0], x.shape[0])


class Sum(Expr):
    __slots__ = ()

    def _infer_shape(self):
        return SCALAR


class Norm(Expr):
    """Euclidean norm of a vector, Frobenius norm of a matrix."""

    __slots__ = ()

    def _infer_shape(self):
        return SCALAR


class LogSumExp(Expr):
    __slots__ = ()

    def _infer_shape(self):
        return SCALAR


class Softmax(Expr):
    __slots__ = ()

    def _infer_shape(self):
        x = self.args[0]
        if not is_col(x.shape):
            raise ShapeError(f"softmax needs a vector, got a {describe(x)}")
        return x.shape


class MatPow(Expr):
    """A ** k as a matrix power, k a non-negative integer."""

    __slots__ = ()

    def _infer_shape(self):
        _need_square(self.args[0], "mpow")
        if not isinstance(self.args[1], int) or self.args[1] < 0:
            raise ShapeError("mpow needs a non-negative integer power")
        return self.args[0].shape


class Named(Expr):
    """A definition of the block used by name (`R` for `R = P - U @ V.T`)."""

    __slots__ = ()

    def _infer_shape(self):
        return self.args[1].shape

    @property
    def name(self) -> str:
        return self.args[0]

    @property
    def body(self) -> Expr:
        return self.args[1]


class D(Expr):
    """A pending differential d(e), used in the displayed steps before its rule is applied."""

    __slots__ = ()

    def _infer_shape(self):
        return self.args[0].shape

    @property
    def has_differential(self):
        return True


class KronContract(Expr):
    """Adjoint of one factor of a Kronecker product.

    side 'left': for F = L kron B, the map G -> sum_kl G[i p + k, j q + l] B[k, l] (shape of L).
    side 'right': for F = A kron L, the map G -> sum_ij G[i p + k, j q + l] A[i, j] (shape of L).
    args: (G, other, rows, cols, side).
    """

    __slots__ = ()

    def _infer_shape(self):
        return (self.args[2], self.args[3])


class SizeOf(Expr):
    """The size of a declared dim used as a number (`n / 2`): a scalar known at call time."""

    __slots__ = ()

    def _infer_shape(self):
        return SCALAR

    @property
    def dim(self) -> Dim:
        return self.args[0]


class Pi(Expr):
    """The constant π (`pi` in the formula language)."""

    __slots__ = ()

    def _infer_shape(self):
        return SCALAR


def _axis_take(size: OptDim, sel) -> OptDim:
    """The length an axis keeps under a selector (see `Index`)."""
    if sel is None:
        if size is not None:
            raise ShapeError("an index selector is missing for an axis")
        return None
    if size is None:
        raise ShapeError("an index selector for a unit axis")
    if sel[0] == "at":
        return None
    start, stop = sel[1], sel[2]
    if start is None and stop is None:
        return size
    if isinstance(stop, Dim) and start is None:
        return stop
    if start is None and isinstance(stop, int) and stop > 0:
        return Dim.of(stop)
    if isinstance(start, int) and isinstance(stop, int) and (start < 0) == (stop < 0):
        return Dim.of(stop - start)
    if isinstance(start, int) and start < 0 and stop is None:
        return Dim.of(-start)
    raise ShapeError("not supported yet: a slice whose length is not a dim or a number")


class Index(Expr):
    """Constant indexing `a[rows, cols]`, linear in a; NumPy's positions (negative from the end).

    Each selector is None for a unit axis, ("at", i) for one position (the axis is dropped) or
    ("slice", start, stop) with bounds an int, a Dim (its size, from the start) or None (open).
    """

    __slots__ = ()

    def _infer_shape(self):
        a, rows, cols = self.args
        return (_axis_take(a.shape[0], rows), _axis_take(a.shape[1], cols))


NODE_CLASSES = (
    Symbol, Differential, Const, Identity, Ones, Zero, Commutation, Add, Mul, MatMul, Transpose,
    Power, Func, Trace, Det, LogDet, Inverse, Solve, Kron, Vec, Unvec, Diag, Diagm, Sum, Norm,
    LogSumExp, Softmax, MatPow, Named, D, KronContract,
)  # fmt: skip
NODE_CLASSES += (SizeOf, Pi, Index)

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
    ones = False
    for f in flat:
        if type(f) is Const:
            coef *= f.value
            continue
        if type(f) is Zero:
            return zero_like(shape)
        if type(f) is Ones:
            ones = True
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
    if ones and not arrays and not is_scalar_shape(shape):
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


# ---------------------------------------------------------------------------------------------
# traversal helpers
# ---------------------------------------------------------------------------------------------


def substitute(e: Expr, mapping: dict) -> Expr:
    """Replace subexpressions (by equality) and rebuild through the smart constructors."""
    memo: dict = {}

    def go(x: Expr) -> Expr:
        if x in mapping:
            return mapping[x]
        if not x.children:
            return x
        hit = memo.get(id(x))
        if hit is not None:
            return hit[1]
        new_children = [go(c) for c in x.children]
        if all(a is b for a, b in zip(new_children, x.children)):
            out = x
        else:
            out = rebuild_smart(x, new_children)
        memo[id(x)] = (x, out)
        return out

    return go(e)


def rebuild_smart(x: Expr, ch: list[Expr]) -> Expr:
    """Rebuild x with new children using the canonicalizing constructors."""
    t = type(x)
    if t is Add:
        return add(*ch)
    if t is Mul:
        return mul(*ch)
    if t is MatMul:
        return matmul(*ch)
    if t is Transpose:
        return transpose(ch[0])
    if t is Power:
        return power(ch[0], ch[1])
    if t is Trace:
        return trace(ch[0])
    if t is Sum:
        return summation(ch[0])
    if t is Vec:
        return vec(ch[0])
    if t is Diag:
        return diag(ch[0])
    if t is Diagm:
        return diagm(ch[0])
    if t is Kron:
        return kron(ch[0], ch[1])
    if t is Solve:
        return solve(ch[0], ch[1])
    if t is Inverse:
        return inverse(ch[0])
    if t is Unvec:
        return unvec(ch[0], x.args[1], x.args[2])
    if t is Index:
        return index(ch[0], x.args[1], x.args[2])
    return x.rebuild(ch)


def walk(e: Expr):
    """Every node once (pre-order, deterministic), without recursion."""
    seen: set = set()
    stack = [e]
    while stack:
        x = stack.pop()
        if id(x) in seen:
            continue
        seen.add(id(x))
        yield x
        stack.extend(reversed(x.children))


def inline_named(e: Expr) -> Expr:
    """Replace every Named node by its body."""
    mapping = {x: inline_named(x.body) for x in walk(e) if type(x) is Named}
    return substitute(e, mapping) if mapping else e


def expanded_size(e: Expr, limit: int) -> int:
    """The size of e with every definition written out (linear time); capped at limit + 1."""
    memo: dict = {}
    stack: list = [(e, False)]
    while stack:
        x, done = stack.pop()
        if done:
            memo[id(x)] = min(limit + 1, 1 + sum(memo[id(c)] for c in x.children))
            continue
        if id(x) in memo:
            continue
        memo[id(x)] = 0
        stack.append((x, True))
        stack.extend((c, False) for c in x.children if id(c) not in memo)
    return memo[id(e)]


# node families in their own modules; imported last because they build on the classes above
from .matrix_functions import NODES as _MATRIX_NODES  # noqa: E402

NODE_CLASSES = NODE_CLASSES + _MATRIX_NODES
