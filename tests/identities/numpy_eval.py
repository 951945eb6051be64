"""An independent NumPy reading of the formula language, for checking the catalogue only.

It walks Python's `ast` of a formula and maps each function straight to NumPy; it never imports
gradwright, so a catalogue record that passes here is right independently of the engine.
"""

from __future__ import annotations

import ast
import re

import numpy as np

STRUCTURE_WORDS = frozenset(
    {"symmetric", "spd", "diagonal", "positive", "orthogonal", "square", "invertible"}
)

_DECL = re.compile(r"^\s*([A-Za-z_]\w*)\s*:\s*(\(.*?\)|scalar)\s*(.*?)\s*(#.*)?$")


def parse_declaration(line: str) -> tuple[str, tuple, tuple[str, ...]]:
    """`"S: (n, n) spd"` -> `("S", ("n", "n"), ("spd",))`; dims are str names or ints."""
    m = _DECL.match(line)
    if not m:
        raise ValueError(f"not a declaration: {line!r}")
    name, shape_text, words = m.group(1), m.group(2), m.group(3)
    if shape_text == "scalar":
        dims: tuple = ()
    else:
        inner = shape_text.strip()[1:-1]
        dims = tuple(
            int(p) if p.strip().isdigit() else p.strip() for p in inner.split(",") if p.strip()
        )
    return name, dims, tuple(words.split())


def dim_names(declarations) -> list[str]:
    out: list[str] = []
    for line in declarations:
        for d in parse_declaration(line)[1]:
            if isinstance(d, str) and d not in out:
                out.append(d)
    return out


def _well_conditioned(rng, n):
    q1, _ = np.linalg.qr(rng.standard_normal((n, n)))
    q2, _ = np.linalg.qr(rng.standard_normal((n, n)))
    s = rng.uniform(0.6, 1.8, n)
    return q1 @ np.diag(s) @ q2


def sample(dims_values: tuple[int, ...], words: tuple[str, ...], rng) -> np.ndarray | float:
    """A random value of the given shape honouring the structure words."""
    words = set(words)
    if not dims_values:
        x = rng.uniform(0.5, 2.0) if "positive" in words else rng.standard_normal()
        return float(x)
    if len(dims_values) == 1:
        x = rng.standard_normal(dims_values)
        return np.abs(x) + 0.5 if "positive" in words else x
    m, n = dims_values
    if "orthogonal" in words:
        q, r = np.linalg.qr(rng.standard_normal((m, n)))
        return q * np.sign(np.diag(r))
    if "spd" in words:
        g = rng.standard_normal((m, m))
        return g @ g.T / m + 0.5 * np.eye(m)
    if "diagonal" in words:
        d = rng.standard_normal(m)
        if "positive" in words:
            d = np.abs(d) + 0.5
        return np.diag(d)
    if "symmetric" in words:
        g = rng.standard_normal((m, m))
        return (g + g.T) / 2
    if "positive" in words:
        return rng.uniform(0.5, 2.0, (m, n))
    if "invertible" in words:
        return _well_conditioned(rng, m)
    return rng.standard_normal((m, n))


def sample_declarations(declarations, sizes: dict[str, int], rng) -> dict:
    arrays = {}
    for line in declarations:
        name, dims, words = parse_declaration(line)
        values = tuple(sizes[d] if isinstance(d, str) else d for d in dims)
        arrays[name] = sample(values, words, rng)
    return arrays


def direction_like(value, words, rng):
    """A random direction in the tangent space of the structure (symmetric stays symmetric)."""
    words = set(words)
    if np.ndim(value) == 0:
        return float(rng.standard_normal())
    e = rng.standard_normal(np.shape(value))
    if np.ndim(value) == 2 and ({"symmetric", "spd"} & words):
        e = (e + e.T) / 2
    if np.ndim(value) == 2 and "diagonal" in words:
        e = np.diag(np.diag(e))
    return e


def commutation_matrix(m: int, n: int) -> np.ndarray:
    """K with K @ vec(A) == vec(A.T) for A of shape (m, n), vec column-major."""
    k = np.zeros((m * n, m * n))
    for i in range(m):
        for j in range(n):
            # vec(A)[i + j*m] = A[i, j]; vec(A.T)[j + i*n] = A[i, j]
            k[j + i * n, i + j * m] = 1.0
    return k


def _vec(a):
    a = np.asarray(a)
    return a.reshape(-1, order="F") if a.ndim == 2 else a


def _logsumexp(a):
    a = np.asarray(a, dtype=float)
    m = np.max(a)
    return float(m + np.log(np.sum(np.exp(a - m))))


def _softmax(x):
    e = np.exp(x - np.max(x))
    return e / np.sum(e)


def _diag(a):
    a = np.asarray(a)
    if a.ndim != 2:
        raise ValueError("diag expects a matrix (use diagm for a vector)")
    return np.diag(a).copy()


def _diagm(x):
    x = np.asarray(x)
    if x.ndim != 1:
        raise ValueError("diagm expects a vector")
    return np.diag(x)


def _outer(x, y):
    return np.outer(x, y)


def _mpow(a, k):
    return np.linalg.matrix_power(a, int(k))


_FUNCS = {
    "trace": lambda a: float(np.trace(a)),
    "det": lambda a: float(np.linalg.det(a)),
    "logdet": lambda a: float(np.linalg.slogdet(a)[1]),
    "inv": np.linalg.inv,
    "solve": np.linalg.solve,
    "kron": np.kron,
    "vec": _vec,
    "diag": _diag,
    "diagm": _diagm,
    "sum": lambda a: float(np.sum(a)),
    "norm": lambda a: float(np.linalg.norm(a)),
    "exp": np.exp,
    "log": np.log,
    "sqrt": np.sqrt,
    "sin": np.sin,
    "cos": np.cos,
    "tanh": np.tanh,
    "sigmoid": lambda a: 1.0 / (1.0 + np.exp(-a)),
    "softplus": lambda a: np.logaddexp(0.0, a),
    "logsumexp": _logsumexp,
    "softmax": _softmax,
    "outer": _outer,
    "mpow": _mpow,
}

_DIM_FUNCS = {"eye", "ones", "zeros", "commutation"}


class NumpyEvaluator(ast.NodeVisitor):
    """Evaluate one formula-language expression with NumPy."""

    def __init__(self, arrays: dict, sizes: dict[str, int], differentials: dict | None = None):
        self.arrays = arrays
        self.sizes = sizes
        self.differentials = differentials or {}

    def evaluate(self, text: str):
        tree = ast.parse(text.strip(), mode="eval")
        return self.visit(tree.body)

    # -- leaves -----------------------------------------------------------------------------
    def visit_Constant(self, node):
        if not isinstance(node.value, (int, float)):
            raise ValueError(f"unsupported constant {node.value!r}")
        return float(node.value)

    def visit_Name(self, node):
        if node.id in self.arrays:
            return self.arrays[node.id]
        if node.id in self.sizes:  # a dim used as a number (`c**n`) is its size
            return float(self.sizes[node.id])
        raise NameError(f"unknown name {node.id!r}")

    # -- operators --------------------------------------------------------------------------
    def visit_UnaryOp(self, node):
        v = self.visit(node.operand)
        if isinstance(node.op, ast.USub):
            return -v
        if isinstance(node.op, ast.UAdd):
            return v
        raise ValueError("unsupported unary operator")

    def visit_BinOp(self, node):
        a, b = self.visit(node.left), self.visit(node.right)
        op = node.op
        if isinstance(op, ast.MatMult):
            if np.ndim(a) == 0 or np.ndim(b) == 0:
                raise ValueError("@ needs arrays on both sides")
            return a @ b
        if isinstance(op, ast.Add):
            return a + b
        if isinstance(op, ast.Sub):
            return a - b
        if isinstance(op, ast.Mult):
            if np.ndim(a) and np.ndim(b) and np.shape(a) != np.shape(b):
                raise ValueError(f"* needs equal shapes, got {np.shape(a)} and {np.shape(b)}")
            return a * b
        if isinstance(op, ast.Div):
            return a / b
        if isinstance(op, ast.Pow):
            return a**b
        raise ValueError(f"unsupported operator {type(op).__name__}")

    def visit_Attribute(self, node):
        if node.attr != "T":
            raise ValueError(f"unsupported attribute .{node.attr}")
        v = self.visit(node.value)
        return v.T if np.ndim(v) == 2 else v

    def _dim(self, node) -> int:
        if isinstance(node, ast.Constant) and isinstance(node.value, int):
            return node.value
        if isinstance(node, ast.Name):
            return self.sizes[node.id]
        if isinstance(node, ast.BinOp) and isinstance(node.op, ast.Mult):
            return self._dim(node.left) * self._dim(node.right)
        raise ValueError("a dim must be a name or an integer")

    def visit_Call(self, node):
        if not isinstance(node.func, ast.Name):
            raise ValueError("only plain function calls")
        name = node.func.id
        if name == "d":
            (arg,) = node.args
            if not isinstance(arg, ast.Name):
                raise ValueError("d(...) takes a declared symbol")
            return self.differentials[arg.id]
        if name in _DIM_FUNCS:
            dims = [self._dim(a) for a in node.args]
            if name == "eye":
                return np.eye(dims[0])
            if name == "ones":
                return np.ones(dims)
            if name == "zeros":
                return np.zeros(dims)
            return commutation_matrix(*dims)
        if name not in _FUNCS:
            raise ValueError(f"unknown function {name!r}")
        args = [self.visit(a) for a in node.args]
        return _FUNCS[name](*args)

    def generic_visit(self, node):
        raise ValueError(f"unsupported syntax {type(node).__name__}")


def evaluate(text: str, arrays: dict, sizes: dict[str, int], differentials=None):
    return NumpyEvaluator(arrays, sizes, differentials).evaluate(text)


def differential_argument(lhs: str) -> str:
    """`"d(inv(X))"` -> `"inv(X)"`: the function whose differential a record states."""
    tree = ast.parse(lhs.strip(), mode="eval").body
    if not (
        isinstance(tree, ast.Call)
        and isinstance(tree.func, ast.Name)
        and tree.func.id == "d"
        and len(tree.args) == 1
    ):
        raise ValueError(f"a differential record's lhs must be d(...), got {lhs!r}")
    return ast.unparse(tree.args[0])


def differential_symbols(text: str) -> list[str]:
    """Names X that appear as d(X) in a formula."""
    out = []
    for node in ast.walk(ast.parse(text.strip(), mode="eval")):
        if (
            isinstance(node, ast.Call)
            and isinstance(node.func, ast.Name)
            and node.func.id == "d"
            and isinstance(node.args[0], ast.Name)
            and node.args[0].id not in out
        ):
            out.append(node.args[0].id)
    return out


def close(a, b, rtol=1e-8, atol=1e-10) -> bool:
    a, b = np.asarray(a, dtype=float), np.asarray(b, dtype=float)
    if a.shape != b.shape:
        return False
    scale = max(1.0, float(np.max(np.abs(a), initial=0.0)), float(np.max(np.abs(b), initial=0.0)))
    return bool(np.all(np.abs(a - b) <= atol * scale + rtol * np.abs(b)))


def numeric_gradient(f, x, h=1e-6):
    """Central-difference gradient of the scalar function f at x (scalar, vector or matrix)."""
    x = np.asarray(x, dtype=float)
    g = np.zeros_like(x)
    it = np.nditer(x, flags=["multi_index"])
    for _ in it:
        idx = it.multi_index
        xp, xm = x.copy(), x.copy()
        xp[idx] += h
        xm[idx] -= h
        g[idx] = (f(xp) - f(xm)) / (2 * h)
    return g if x.ndim else float(g)


__all__ = [
    "STRUCTURE_WORDS",
    "close",
    "commutation_matrix",
    "differential_argument",
    "differential_symbols",
    "dim_names",
    "direction_like",
    "evaluate",
    "numeric_gradient",
    "parse_declaration",
    "sample",
    "sample_declarations",
]
