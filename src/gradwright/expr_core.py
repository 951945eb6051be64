"""The base node `Expr`, the leaves, sums and products, transposes, definitions used by name,
pending differentials and the scalars of sizes and pi; a part of `expr`."""

from __future__ import annotations

import hashlib
import math
from collections.abc import Iterable
from fractions import Fraction

from .errors import ShapeError
from .expr_shapes import SCALAR, Dim, Shape, describe, is_scalar_shape, shape_text

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


class Transpose(Expr):
    __slots__ = ()

    def _infer_shape(self):
        r, c = self.args[0].shape
        return (c, r)


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
