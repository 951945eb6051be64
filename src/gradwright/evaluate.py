"""A reference evaluator: computes an expression tree with NumPy, straight from the tree.

Independent of the code generator, so tests can compare the two. Values are kept 2-D inside
(unit axes of length 1) and returned in NumPy's shapes: float, 1-D vector or 2-D matrix.
"""

from __future__ import annotations

import numpy as np

from . import expr as E
from .errors import FormulaError

__all__ = ["evaluate", "to_internal", "to_user"]


def to_internal(value, shape) -> np.ndarray:
    a = np.asarray(value)
    if a.dtype.kind not in "biufc":
        raise TypeError(f"expected a numeric array, got {a.dtype}")
    if a.dtype.kind in "bi":
        a = a.astype(float)
    r, c = shape
    if r is None and c is None:
        return a.reshape(1, 1)
    if c is None:
        return a.reshape(-1, 1)
    if r is None:
        return a.reshape(1, -1)
    return a


def to_user(a: np.ndarray, shape):
    r, c = shape
    if r is None and c is None:
        v = a.reshape(())
        return v.item() if v.dtype.kind == "f" else v[()]
    if r is None or c is None:
        return a.reshape(-1)
    return a


def _commutation(m: int, n: int) -> np.ndarray:
    K = np.zeros((m * n, m * n))
    for i in range(m):
        for j in range(n):
            # vec(A)[i + j m] = A[i, j]; vec(A.T)[j + i n] = A[i, j]
            K[j + i * n, i + j * m] = 1.0
    return K


def _softplus(x):
    return np.logaddexp(0.0, x) if np.isrealobj(x) else np.log1p(np.exp(x))


def _sigmoid(x):
    return 1.0 / (1.0 + np.exp(-x))


FUNCS = {
    "exp": np.exp,
    "log": np.log,
    "sqrt": np.sqrt,
    "sin": np.sin,
    "cos": np.cos,
    "tanh": np.tanh,
    "sigmoid": _sigmoid,
    "softplus": _softplus,
}


class _Evaluator:
    def __init__(self, arrays, differentials, dims):
        self.arrays = arrays
        self.differentials = differentials or {}
        self.dims = dims
        self.memo: dict = {}

    def size(self, d) -> int:
        if d is None:
            return 1
        if d.is_literal:
            return d.coef
        try:
            return d.value(self.dims)
        except KeyError as err:
            raise FormulaError(f"the size of dim {err.args[0]} is not known") from None

    def ev(self, e: E.Expr) -> np.ndarray:
        key = id(e)
        hit = self.memo.get(key)
        if hit is not None:
            return hit[1]
        out = getattr(self, "_" + type(e).__name__)(e)
        self.memo[key] = (e, out)
        return out

    def _Symbol(self, e):
        if e.name not in self.arrays:
            raise FormulaError(f"no value given for {e.name}")
        return self.arrays[e.name]

    def _Differential(self, e):
        name = e.symbol.name
        if name not in self.differentials:
            return (
                np.zeros_like(self.arrays[name])
                if name in self.arrays
                else np.zeros((self.size(e.shape[0]), self.size(e.shape[1])))
            )
        return self.differentials[name]

    def _Const(self, e):
        return np.array([[float(e.value)]])

    def _Identity(self, e):
        return np.eye(self.size(e.args[0]))

    def _Ones(self, e):
        return np.ones((self.size(e.shape[0]), self.size(e.shape[1])))

    def _Zero(self, e):
        return np.zeros((self.size(e.shape[0]), self.size(e.shape[1])))

    def _Commutation(self, e):
        return _commutation(self.size(e.args[0]), self.size(e.args[1]))

    def _Add(self, e):
        out = self.ev(e.args[0])
        for t in e.args[1:]:
            out = out + self.ev(t)
        return out

    def _Mul(self, e):
        out = self.ev(e.args[0])
        for t in e.args[1:]:
            out = out * self.ev(t)
        return out

    def _MatMul(self, e):
        out = self.ev(e.args[0])
        for t in e.args[1:]:
            out = out @ self.ev(t)
        return out

    def _Transpose(self, e):
        return self.ev(e.args[0]).T

    def _Power(self, e):
        return self.ev(e.args[0]) ** self.ev(e.args[1])[0, 0]

    def _Func(self, e):
        return FUNCS[e.name](self.ev(e.arg))

    def _Trace(self, e):
        return np.array([[np.trace(self.ev(e.args[0]))]])

    def _Det(self, e):
        return np.array([[np.linalg.det(self.ev(e.args[0]))]])

    def _LogDet(self, e):
        a = self.ev(e.args[0])
        if np.iscomplexobj(a):
            return np.array([[np.log(np.linalg.det(a))]])
        return np.array([[np.linalg.slogdet(a)[1]]])

    def _Inverse(self, e):
        return np.linalg.inv(self.ev(e.args[0]))

    def _Solve(self, e):
        return np.linalg.solve(self.ev(e.args[0]), self.ev(e.args[1]))

    def _Kron(self, e):
        return np.kron(self.ev(e.args[0]), self.ev(e.args[1]))

    def _Vec(self, e):
        return self.ev(e.args[0]).reshape(-1, 1, order="F")

    def _Unvec(self, e):
        g, r, c = e.args
        return self.ev(g).reshape(self.size(r), self.size(c), order="F")

    def _Diag(self, e):
        return np.diag(self.ev(e.args[0])).reshape(-1, 1)

    def _Diagm(self, e):
        return np.diag(self.ev(e.args[0])[:, 0])

    def _Sum(self, e):
        return np.array([[np.sum(self.ev(e.args[0]))]])

    def _Norm(self, e):
        a = self.ev(e.args[0])
        return np.array([[np.sqrt(np.sum(a * a))]])

    def _LogSumExp(self, e):
        a = self.ev(e.args[0])
        m = np.max(a.real)
        return np.array([[m + np.log(np.sum(np.exp(a - m)))]])

    def _Softmax(self, e):
        a = self.ev(e.args[0])
        z = np.exp(a - np.max(a.real))
        return z / np.sum(z)

    def _MatPow(self, e):
        return np.linalg.matrix_power(self.ev(e.args[0]), e.args[1])

    def _Named(self, e):
        return self.ev(e.body)

    def _KronContract(self, e):
        g, other, r, c, side = e.args
        G = self.ev(g)
        B = self.ev(other)
        if side == "left":
            m, n = self.size(r), self.size(c)
            p, q = B.shape
            return np.einsum("ikjl,kl->ij", G.reshape(m, p, n, q), B)
        p, q = self.size(r), self.size(c)
        m, n = B.shape
        return np.einsum("ikjl,ij->kl", G.reshape(m, p, n, q), B)

    def _SizeOf(self, e):
        return np.array([[float(self.size(e.dim))]])

    def _Pi(self, e):
        return np.array([[np.pi]])

    def _Index(self, e):
        a, rows, cols = e.args
        v = self.ev(a)
        return v[self._take(rows, a.shape[0]), :][:, self._take(cols, a.shape[1])]

    def _take(self, sel, size) -> slice:
        """A selector (see expr.Index) as a slice of the internal 2-D array (axes kept)."""
        if sel is None:
            return slice(None)
        if sel[0] == "at":
            i = sel[1] % self.size(size)
            return slice(i, i + 1)
        start, stop = (self.size(b) if isinstance(b, E.Dim) else b for b in sel[1:])
        return slice(start, stop)

    def _D(self, e):
        # directional derivative along the given differentials, 4th-order central difference
        inner = e.args[0]
        h = 1e-3
        vals = []
        for t in (2 * h, h, -h, -2 * h):
            shifted = dict(self.arrays)
            for name, dx in self.differentials.items():
                if name in shifted:
                    shifted[name] = shifted[name] + t * dx
            vals.append(_Evaluator(shifted, None, self.dims).ev(inner))
        return (-vals[0] + 8 * vals[1] - 8 * vals[2] + vals[3]) / (12 * h)


def _infer_dims(e: E.Expr, arrays: dict) -> dict:
    dims: dict = {}
    for node in E.walk(e):
        if type(node) is E.Symbol and node.name in arrays:
            a = arrays[node.name]
            for d, n in zip(node.shape, a.shape):
                if d is not None and len(d.names) == 1 and d.coef == 1:
                    dims.setdefault(d.names[0], n)
    return dims


def evaluate(e: E.Expr, arrays: dict, differentials: dict | None = None, dims: dict | None = None):
    """Evaluate e with NumPy; `arrays` maps symbol names to values in NumPy's shapes.

    >>> from gradwright.language import parse_block
    >>> b = parse_block("x: (n,)\\nf = x @ x")
    >>> evaluate(b.expr, {"x": np.array([3.0, 4.0])})
    25.0
    """
    shapes = {n.name: n.shape for n in E.walk(e) if type(n) in (E.Symbol,)}
    for n in E.walk(e):
        if type(n) is E.Differential:
            shapes.setdefault(n.symbol.name, n.symbol.shape)
    internal = {k: to_internal(v, shapes[k]) for k, v in arrays.items() if k in shapes}
    diffs = {k: to_internal(v, shapes[k]) for k, v in (differentials or {}).items() if k in shapes}
    all_dims = _infer_dims(e, internal)
    all_dims.update(dims or {})
    out = _Evaluator(internal, diffs, all_dims).ev(e)
    return to_user(out, e.shape)


from . import matrix_evaluate  # noqa: E402, F401  (evaluation of the matrix-function family)
