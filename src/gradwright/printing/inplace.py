"""In-place elementwise arithmetic on arrays the generated code owns.

A pass over each line of generated NumPy code: in `a * b`, `a + b`, `a - b` and `a / b`, an
operand that is itself the result of arithmetic in the same expression (`H * H`, `X @ W1`,
`np.tanh(Z)`) is a new array that nothing else can read (it has no name), so the result may be
written into it instead of into a new array. `(1 - H * H) * (R @ W2.T)` becomes
`_gw_imul(_gw_rsub(1, H * H), R @ W2.T)`: two arrays allocated instead of four.

Why it pays: a new array of a megabyte or more is fresh memory from the operating system on
every call (page faults, zero-filling), which costs more than the arithmetic itself; in-place
arithmetic reuses the memory already touched.

What makes it safe: only an operand whose *syntax* makes it a new object is written into
(the result of an arithmetic operator, of a unary minus, of an allocating NumPy ufunc, or of
one of these helpers); names, attributes (`X.T`), subscripts and other calls are never
written into, so neither a user's array nor a named temporary read later can change. At run
time the helper writes in place only when the operand is a plain `ndarray` and the result has
its shape and dtype (`casting="safe"`: a float32 array never receives float64 values, a real
one never complex values); otherwise it computes the ordinary `a op b`.

>>> rewrite_line("(1 - H * H) * (R @ W2.T)", set())[0]
'_gw_imul(_gw_rsub(1, H * H), R @ W2.T)'
"""

from __future__ import annotations

import ast
import re

#: NumPy ufuncs of one argument that always return a new array for an array argument
FRESH_UFUNCS = frozenset(
    "exp log tanh sin cos sqrt log1p expm1 square abs sign negative arctan sinh cosh".split()
)

#: helpers of the generated module that always return a new array
FRESH_HELPERS = frozenset(("_gw_softmax_axis", "_gw_softmax_axis_into", "_gw_log_softmax_axis"))

#: operator -> (helper writing into the left operand, helper writing into the right one)
_HELPERS = {
    ast.Mult: ("_gw_imul", "_gw_imul"),  # commutative: the operands are swapped
    ast.Add: ("_gw_iadd", "_gw_iadd"),
    ast.Sub: ("_gw_isub", "_gw_rsub"),
    ast.Div: ("_gw_idiv", "_gw_rdiv"),
}
_COMMUTATIVE = (ast.Mult, ast.Add)

_UFUNC = {"_gw_imul": "multiply", "_gw_iadd": "add", "_gw_isub": "subtract",
          "_gw_idiv": "divide", "_gw_rsub": "subtract", "_gw_rdiv": "divide"}  # fmt: skip
_SYMBOL = {"multiply": "*", "add": "+", "subtract": "-", "divide": "/"}


def _helper_code(name: str) -> str:
    ufunc = _UFUNC[name]
    op = _SYMBOL[ufunc]
    if name in ("_gw_rsub", "_gw_rdiv"):
        return f'''
def {name}(y, x):
    """y {op} x, written into x: an array of this expression that nothing else reads."""
    if type(x) is np.ndarray and x.size >= _GW_INPLACE_MIN:
        try:
            return np.{ufunc}(y, x, out=x, casting="safe")
        except (TypeError, ValueError):  # the result does not fit x (shape or dtype)
            pass
    return y {op} x
'''
    return f'''
def {name}(x, y):
    """x {op} y, written into x: an array of this expression that nothing else reads."""
    if type(x) is np.ndarray and x.size >= _GW_INPLACE_MIN:
        try:
            return np.{ufunc}(x, y, out=x, casting="safe")
        except (TypeError, ValueError):  # the result does not fit x (shape or dtype)
            pass
    return x {op} y
'''


#: runtime helpers of the generated module (added to printing.runtime.HELPERS)
INPLACE_HELPERS = {name: _helper_code(name) for name in _UFUNC}
INPLACE_HELPERS["_GW_INPLACE_MIN"] = """
# arrays from this many entries on are written in place: from 128 KiB of float64 on, glibc's
# malloc takes fresh pages from the system for every new array (its default mmap threshold,
# from memory); below, a new array is cheap and the plain operator is the faster call
_GW_INPLACE_MIN = 16384
"""
INPLACE_HELPERS["_gw_apply"] = '''
def _gw_apply(f, x):
    """f(x) for a NumPy ufunc f of one argument, written into x: an array of this expression
    that nothing else reads (only a real floating x: f keeps its dtype)."""
    if type(x) is np.ndarray and x.size >= _GW_INPLACE_MIN and x.dtype.kind == "f":
        return f(x, out=x)
    return f(x)
'''


def _is_fresh(node: ast.AST) -> bool:
    """True when the value of `node` is a new object no other code can hold."""
    if isinstance(node, ast.BinOp):
        return True
    if isinstance(node, ast.UnaryOp) and isinstance(node.op, ast.USub):
        return True
    if isinstance(node, ast.IfExp):  # a call-time choice between two new arrays
        return _is_fresh(node.body) and _is_fresh(node.orelse)
    if isinstance(node, ast.Call) and not node.keywords and len(node.args) == 1:
        f = node.func
        return (
            isinstance(f, ast.Attribute)
            and isinstance(f.value, ast.Name)
            and f.value.id == "np"
            and f.attr in FRESH_UFUNCS
        )
    return (
        isinstance(node, ast.Call)
        and isinstance(node.func, ast.Name)
        and (node.func.id in INPLACE_HELPERS or node.func.id in FRESH_HELPERS)
    )


def _is_scalar(node: ast.AST, scalars: set) -> bool:
    """True when `node` is certainly a number (no array to write into, no helper needed).
    Remembered on the node (a line is parsed afresh for each function, whose `scalars` are
    fixed), so that a deep expression is not walked again at every level: linear work."""
    hit = node.__dict__.get("_gw_scalar")
    if hit is None:
        hit = node._gw_scalar = _is_scalar_walk(node, scalars)
    return hit


def _is_scalar_walk(node: ast.AST, scalars: set) -> bool:
    if isinstance(node, ast.Constant):
        return True
    if isinstance(node, ast.Name):
        return node.id in scalars
    if isinstance(node, ast.UnaryOp):
        return _is_scalar(node.operand, scalars)
    if isinstance(node, ast.BinOp):
        return _is_scalar(node.left, scalars) and _is_scalar(node.right, scalars)
    if isinstance(node, ast.Subscript):  # a dim size: _dims["n"]
        return isinstance(node.value, ast.Name) and node.value.id == "_dims"
    if isinstance(node, ast.Call) and isinstance(node.func, ast.Name):
        return node.func.id in ("min", "max") and all(_is_scalar(a, scalars) for a in node.args)
    return False


def _names(node: ast.AST) -> list:
    return [n.id for n in ast.walk(node) if isinstance(n, ast.Name)]


def _mul_factors(node: ast.AST) -> list:
    """The factors of a chain `a * b * c` (left-nested products), in order."""
    if isinstance(node, ast.BinOp) and isinstance(node.op, ast.Mult):
        return _mul_factors(node.left) + _mul_factors(node.right)
    return [node]


def _call(name: str, *args) -> ast.Call:
    return ast.Call(ast.Name(name, ast.Load()), list(args), [])


#: helpers of one array argument with a variant computing in that argument when it is new;
#: the variant calls the plain helper (a dependency: DEPENDS) for arguments it cannot take
INTO_VARIANTS = {"_gw_softmax_axis": "_gw_softmax_axis_into"}
DEPENDS = {"_gw_softmax_axis_into": "_gw_softmax_axis"}


def _ndim(node: ast.AST, scalars: set, vectors: dict) -> int | None:
    """0, 1 or 2 when the syntax and the known names tell the value's number of axes (at
    most), None when they do not (remembered on the node, like _is_scalar)."""
    hit = node.__dict__.get("_gw_ndim")
    if hit is None:
        hit = node._gw_ndim = (_ndim_walk(node, scalars, vectors),)
    return hit[0]


def _ndim_walk(node: ast.AST, scalars: set, vectors: dict) -> int | None:
    if _is_scalar(node, scalars):
        return 0
    if isinstance(node, ast.Name):
        return vectors.get(node.id)
    if isinstance(node, ast.Attribute) and node.attr == "T":
        return _ndim(node.value, scalars, vectors)
    if isinstance(node, ast.UnaryOp):
        return _ndim(node.operand, scalars, vectors)
    if isinstance(node, ast.BinOp):
        a, b = _ndim(node.left, scalars, vectors), _ndim(node.right, scalars, vectors)
        if a is None or b is None:
            return None
        if isinstance(node.op, ast.MatMult):
            return max(a + b - 2, 0) if a and b else max(a, b)
        return max(a, b)
    if isinstance(node, ast.Call):
        args = [_ndim(x, scalars, vectors) for x in node.args]
        if _is_fresh(node) and args and None not in args:
            return max(args)  # a ufunc or an in-place helper: shaped like its operands
    return None


class _InPlace(ast.NodeTransformer):
    def __init__(self, scalars: set, owned: set, counts: dict, ndims: dict | None = None):
        self.scalars = scalars
        self.vectors = ndims or {}  # name -> its number of axes, where known
        self.owned = owned  # named arrays of the function this line may consume
        self.counts = counts  # occurrences of each name in the whole line
        self.used: set = set()

    def writable(self, operand: ast.AST, within: ast.AST) -> bool:
        """`operand` may be written into by the operation `within`: it is a new array, or a
        named array of the function read nowhere else in this line (nor in any later line:
        the caller's promise for `owned`) but inside `within`, so every other read of it is
        evaluated before the write."""
        if _is_scalar(operand, self.scalars):
            return False
        if (_ndim(within, self.scalars, self.vectors) or 0) <= 1 and (
            _ndim(within, self.scalars, self.vectors) is not None
        ):
            # vectors: a new one is cheap next to the helper call (a matrix intermediate
            # inside still counts, it is checked on its own)
            return False
        if _is_fresh(operand):
            return True
        if isinstance(operand, ast.Name) and operand.id in self.owned:
            inside = _names(within).count(operand.id)
            if inside == self.counts.get(operand.id, 0):
                self.owned.discard(operand.id)  # consumed: its value changes here
                return True
        return False

    def visit_BinOp(self, node):
        if isinstance(node.op, ast.Mult):
            return self.product(node)
        self.generic_visit(node)  # inner operations first: their results are new arrays too
        names = _HELPERS.get(type(node.op))
        if names is None:
            return node
        left, right = node.left, node.right
        if self.writable(left, node):
            name, args = names[0], [left, right]
        elif self.writable(right, node):
            name = names[1]
            args = [right, left] if isinstance(node.op, _COMMUTATIVE) else [left, right]
        else:
            return node
        self.used.add(name)
        return ast.copy_location(_call(name, *args), node)

    def product(self, node):
        """`s * X * Y` with Y writable becomes `_gw_imul(_gw_imul(Y, X), s)`: the numbers are
        multiplied together first and every array factor goes into one array."""
        factors = [self.visit(f) for f in _mul_factors(node)]
        numbers = [f for f in factors if _is_scalar(f, self.scalars)]
        arrays = [f for f in factors if not _is_scalar(f, self.scalars)]
        if not arrays:
            return _rebuild(factors, node)
        into = next((f for f in arrays if self.writable(f, node)), None)
        if into is None:
            if len(arrays) < 2:
                return _rebuild(factors, node)
            into = ast.BinOp(arrays[0], ast.Mult(), arrays[1])  # a new array: the rest go in
            arrays = arrays[2:]
        else:
            arrays = [f for f in arrays if f is not into]
        acc = into
        for f in arrays:
            acc = _call("_gw_imul", acc, f)
        if numbers:
            acc = _call("_gw_imul", acc, _rebuild(numbers, node))
        if acc is not into and isinstance(acc, ast.Call):
            self.used.add("_gw_imul")
        return ast.copy_location(acc, node)

    def visit_Call(self, node):
        self.generic_visit(node)
        f = node.func
        if _is_fresh(node) and isinstance(f, ast.Attribute) and self.writable(node.args[0], node):
            self.used.add("_gw_apply")  # np.tanh(X @ W + b): the tanh in the same array
            return ast.copy_location(_call("_gw_apply", f, node.args[0]), node)
        into = INTO_VARIANTS.get(f.id) if isinstance(f, ast.Name) else None
        if into is not None and node.args and self.writable(node.args[0], node):
            node.func = ast.Name(into, ast.Load())
            self.used.update((into, DEPENDS[into]))
        return node

    def visit_IfExp(self, node):
        # the condition of a call-time choice compares flop counts (numbers): left as written
        node.body, node.orelse = self.visit(node.body), self.visit(node.orelse)
        return node

    def visit_Lambda(self, node):  # pragma: no cover - generated lines hold no lambdas
        return node


def _rebuild(factors: list, like: ast.AST) -> ast.AST:
    out = factors[0]
    for f in factors[1:]:
        out = ast.BinOp(out, ast.Mult(), f)
    return ast.copy_location(out, like)


def rewrite_line(
    text: str, scalars: set, owned: set = frozenset(), ndims: dict | None = None
) -> tuple[str, set]:
    """`text` (one Python expression of generated code) with in-place arithmetic where an
    operand is an array of its own; returns the new text and the helpers it calls.

    `scalars` names variables that hold numbers and `ndims` gives the number of axes of the
    names it knows (no helper is wrapped around arithmetic whose result is 1-D); `owned`
    names arrays of the function that no later line reads and that are no view of anything
    (defined by arithmetic): this line may write into one where all its reads are evaluated
    before the write.

    >>> text, helpers = rewrite_line("2 * (X.T @ r)", set())
    >>> text, sorted(helpers)
    ('_gw_imul(X.T @ r, 2)', ['_GW_INPLACE_MIN', '_gw_imul'])
    >>> rewrite_line("A @ V - T", set())[0]
    '_gw_isub(A @ V, T)'
    >>> rewrite_line("np.tanh(X @ W + b)", set())[0]
    '_gw_apply(np.tanh, _gw_iadd(X @ W, b))'
    >>> rewrite_line("2 * c * X", {"c"})[0]
    '2 * c * X'
    >>> rewrite_line("2 * (X.T @ (X @ w - y))", set(), ndims={"X": 2, "w": 1, "y": 1})[0]
    '2 * (X.T @ (X @ w - y))'
    >>> rewrite_line("2 * c * A * (G - S)", {"c"})[0]
    '_gw_imul(_gw_imul(G - S, A), 2 * c)'
    >>> rewrite_line("A * (G - np.sum(A * G, axis=1))", set(), {"G"})[0]
    '_gw_imul(_gw_isub(G, np.sum(A * G, axis=1)), A)'
    """
    tree = ast.parse(text, mode="eval")
    counts: dict = {}
    for name in _names(tree):
        counts[name] = counts.get(name, 0) + 1
    pass_ = _InPlace(scalars, set(owned), counts, ndims)
    new = pass_.visit(tree)
    if not pass_.used:
        return text, set()
    pass_.used.add("_GW_INPLACE_MIN")
    return ast.unparse(ast.fix_missing_locations(new)), pass_.used


_ASSIGN = re.compile(r"^    ([A-Za-z_]\w*) = (.+)$")


def rewrite_function(
    lines: list, tail: str, scalars: set, ndims: dict | None = None, keep: set = frozenset()
) -> tuple[list, set]:
    """The body lines of one generated function with the in-place pass applied to every
    assignment but those of the names in `keep`; `tail` is the code after them (returns,
    loops), which reads what it names.

    A named array is *owned* by the one line that reads it when it was defined by
    arithmetic (a new array, no view of anything) and no other line nor the tail mentions
    it: that line may then write into it (`G -= s; G *= A`, as written by hand).
    """
    mentions: dict = {}
    for i, line in enumerate(lines):
        for name in set(re.findall(r"[A-Za-z_]\w*", line)):
            mentions.setdefault(name, []).append(i)
    in_tail = set(re.findall(r"[A-Za-z_]\w*", tail))
    owned_at: dict = {}  # line index -> names it may consume
    out, used = list(lines), set()
    for i, line in enumerate(lines):
        m = _ASSIGN.match(line)
        if m is None:
            continue
        name, text = m.groups()
        if name not in keep:
            text, helpers = rewrite_line(text, scalars, owned_at.get(i, set()), ndims)
            out[i] = f"    {name} = {text}"
            used |= helpers
        readers = [j for j in mentions.get(name, []) if j != i]
        if (
            len(readers) == 1
            and readers[0] > i
            and name not in in_tail
            and name not in scalars
            and _is_fresh(ast.parse(text, mode="eval").body)
        ):
            owned_at.setdefault(readers[0], set()).add(name)
    return out, used
