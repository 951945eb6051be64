"""NumPy code from expression trees, written the way an expert writes it by hand.

solve instead of inv, slogdet, a Cholesky factor reused for spd symbols, trace and sum of
products without temporaries, diagonal products by broadcasting, no Kronecker product formed
for derivatives, shared subexpressions computed once, chains ordered by a cost model.
"""

from __future__ import annotations

import keyword
from dataclasses import dataclass, field
from types import SimpleNamespace

from .. import expr as E
from . import precedence as P
from .base import split_numerator
from .text import TextPrinter

# ---------------------------------------------------------------------------------------------
# runtime helpers (emitted into the generated module when used; plain NumPy/SciPy)
# ---------------------------------------------------------------------------------------------

HELPERS = {
    "_gw_check": '''
class _GwDims(dict):
    """Dim sizes bound by the arguments; a size no argument fixes is a clear error."""

    def __missing__(self, key):
        raise ValueError(
            f"the size of dim {key} is not known from the arrays passed (none of them has "
            f"{key} as a dim of its own)"
        )


# set only while the finite-difference check evaluates the value function at a complex step
_GW_COMPLEX_STEP = []


def _gw_check(specs):
    """Validate the arguments; returns the arrays and the dims they bind."""
    dims, owner, out, products = _GwDims(), {}, [], []
    for name, value, spec in specs:
        if isinstance(value, (str, bytes)) or value is None:
            raise TypeError(f"{name} must be a numeric array, got {type(value).__name__}")
        try:
            a = np.asarray(value)
        except Exception as err:
            raise TypeError(
                f"{name} must be a numeric array; NumPy cannot read it ({err})"
            ) from None
        if a.dtype.kind not in "biufc":
            got = f"dtype {a.dtype}" if isinstance(value, np.ndarray) else type(value).__name__
            raise TypeError(f"{name} must be a numeric array, got {got}")
        if a.dtype.kind == "c" and not _GW_COMPLEX_STEP:
            if " " in name:  # a direction or cotangent, not a declared symbol
                raise TypeError(
                    f"{name} is a complex array, but the block is real: pass a real array"
                )
            shown = "(" + ", ".join(map(str, spec)) + ("," if len(spec) == 1 else "") + ")"
            raise TypeError(
                f"{name} is a complex array, but {name} is declared real: the derivative of a "
                f"real formula is wrong for complex input. Declare it `{name}: {shown} complex` "
                f"or pass a real array (for example {name}.real)"
            )
        if a.dtype.kind in "bi":
            a = a.astype(float)
        if a.ndim != len(spec):
            want = ("a scalar", "a vector", "a matrix")[len(spec)]
            shown = "(" + ", ".join(map(str, spec)) + ("," if len(spec) == 1 else "") + ")"
            axes = "1 axis" if a.ndim == 1 else f"{a.ndim} axes"
            raise ValueError(f"{name} should be {want} {shown} but has {axes}, shape {a.shape}")
        for axis, (d, n) in enumerate(zip(spec, a.shape)):
            word = ("rows", "columns")[axis] if len(spec) == 2 else "entries"
            if isinstance(d, int):
                if n != d:
                    raise ValueError(f"{name} has {n} {word} but its declaration says {d}")
            elif "*" in d:
                products.append((name, word, d, n))
            elif d in dims:
                if dims[d] != n:
                    other, other_word = owner[d]
                    raise ValueError(
                        f"{name} has {n} {word} but {other} has {d} = {dims[d]}"
                        + (f" {other_word}" if other_word != word else "")
                    )
            else:
                dims[d], owner[d] = n, (name, word)
        out.append(a)
    for _ in range(len(products)):  # after every plain dim is bound; a lone unknown is inferred
        pending = []
        for name, word, d, n in products:
            want, unknown = 1, []
            for part in d.split("*"):
                if part.isdigit() or part in dims:
                    want *= int(part) if part.isdigit() else dims[part]
                else:
                    unknown.append(part)
            if not unknown:
                if n != want:
                    raise ValueError(f"{name} has {n} {word} but {d} = {want}")
            elif len(unknown) == 1 and n % want == 0:
                dims[unknown[0]], owner[unknown[0]] = n // want, (name, word)
            else:
                pending.append((name, word, d, n))
        if len(pending) == len(products):
            break  # what stays unknown is reported where a size is needed
        products = pending
    return out, dims
''',
    "_gw_unit": """
def _gw_unit(n, i):
    # the unit vector of length n with its 1 at NumPy position i (the adjoint of x[i])
    out = np.zeros(n)
    out[i] = 1.0
    return out
""",
    "_gw_place": """
def _gw_place(g, n, lo, hi, axis):
    # zeros of length n along axis with g at positions lo:hi (the adjoint of slicing)
    g = np.asarray(g)
    axis = axis if g.ndim == 2 else 0
    shape = list(g.shape)
    shape[axis] = n
    out = np.zeros(shape, dtype=np.result_type(g.dtype, float))
    where = [slice(None)] * g.ndim
    where[axis] = slice(lo, hi)
    out[tuple(where)] = g
    return out
""",
    "_gw_finite": """
def _gw_finite(value, what):
    bad = np.size(value) - np.count_nonzero(np.isfinite(value))
    if bad:
        where = "" if np.ndim(value) == 0 else f" in {bad} of {np.size(value)} entries"
        warnings.warn(f"{what} is not finite (inf or nan){where}", RuntimeWarning, stacklevel=3)
    return value
""",
    "_gw_solve": """
def _gw_solve(a, b, label):
    try:
        return np.linalg.solve(a, b)
    except np.linalg.LinAlgError:
        who = label[:-2] if label.endswith(".T") and label[:-2].isidentifier() else label
        raise np.linalg.LinAlgError(
            f"{who} is singular: the formula or its derivative solves with it (inv, solve, "
            "logdet), which needs an invertible matrix"
        ) from None
""",
    "_gw_inv": """
def _gw_inv(a, label):
    try:
        return np.linalg.inv(a)
    except np.linalg.LinAlgError:
        who = label[:-2] if label.endswith(".T") and label[:-2].isidentifier() else label
        raise np.linalg.LinAlgError(
            f"{who} is singular: the formula or its derivative needs its inverse (inv, solve, "
            "det, logdet), which does not exist"
        ) from None
""",
    "_gw_logdet": """
def _gw_logdet(a, label):
    sign, value = np.linalg.slogdet(a)
    if sign == 0:
        who = label[:-2] if label.endswith(".T") and label[:-2].isidentifier() else label
        raise np.linalg.LinAlgError(
            f"{who} is singular (determinant 0): logdet needs an invertible matrix"
        )
    return value
""",
    "_gw_cho": """
def _gw_cho(a, label):
    # cho_factor reads one triangle only: an unsymmetric input would give a silently wrong
    # answer; the tolerance is relative to the largest entry (common practice)
    if np.max(np.abs(a - a.T), initial=0.0) > 1e-8 * max(1.0, np.max(np.abs(a), initial=0.0)):
        raise ValueError(f"{label} is declared spd but is not symmetric")
    try:
        return cho_factor(a)
    except np.linalg.LinAlgError:
        raise np.linalg.LinAlgError(
            f"{label} is not positive definite (it is declared spd)"
        ) from None
""",
    "_gw_adjugate": """
def _gw_adjugate(a):
    \"\"\"adj(A) = det(A) inv(A); through the SVD where A is singular, where it still exists.\"\"\"
    d = np.linalg.det(a)
    if d != 0 and np.isfinite(d):
        try:
            return d * np.linalg.inv(a)
        except np.linalg.LinAlgError:
            pass
    u, s, vt = np.linalg.svd(a)
    others = np.array([np.prod(np.delete(s, i)) for i in range(s.shape[0])])
    return np.linalg.det(u) * np.linalg.det(vt) * ((vt.T * others) @ u.T)
""",
    "_gw_sigmoid": """
def _gw_sigmoid(x):
    return 0.5 * (1.0 + np.tanh(0.5 * x))
""",
    "_gw_logsumexp": """
def _gw_logsumexp(a):
    m = np.max(np.real(a))
    return m + np.log(np.sum(np.exp(a - m)))
""",
    "_gw_softmax": """
def _gw_softmax(x):
    z = np.exp(x - np.max(np.real(x)))
    return z / np.sum(z)
""",
    "_gw_commutation": """
def _gw_commutation(m, n):
    k = np.zeros((m * n, m * n))
    for i in range(m):
        for j in range(n):
            k[j + i * n, i + j * m] = 1.0
    return k
""",
    "_gw_kron_contract": """
def _gw_kron_contract(g, other, rows, cols, side):
    \"\"\"The adjoint of one factor of a Kronecker product (g and other are 2-D).\"\"\"
    if side == "left":
        p, q = other.shape
        return np.einsum("ikjl,kl->ij", g.reshape(rows, p, cols, q), other)
    m, n = other.shape
    return np.einsum("ikjl,ij->kl", g.reshape(m, rows, n, cols), other)
""",
}

FUNC_CODE = {
    "exp": "np.exp",
    "log": "np.log",
    "sqrt": "np.sqrt",
    "sin": "np.sin",
    "cos": "np.cos",
    "tanh": "np.tanh",
    "sigmoid": "_gw_sigmoid",
    "softplus": "np.logaddexp(0.0, {})",
}

# ---------------------------------------------------------------------------------------------
# cost model
# ---------------------------------------------------------------------------------------------


#: longest product chain ordered by dynamic programming (cubic in the length)
MAX_DP_CHAIN = 16


class CostModel:
    """Flop estimates from guessed dim sizes (user hints first)."""

    def __init__(self, sizes: dict):
        self.sizes = sizes
        self._orders: dict = {}
        self._flops: dict = {}

    def dim(self, d) -> float:
        if d is None:
            return 1.0
        out = float(d.coef)
        for n in d.names:
            out *= self.sizes.get(n, 1000.0)
        return out

    def size(self, shape) -> float:
        return self.dim(shape[0]) * self.dim(shape[1])

    def chain_order(self, factors):
        """Optimal parenthesization (dynamic programming, memoized on the dims); returns
        (cost, tree). Chains longer than MAX_DP_CHAIN are multiplied left to right."""
        dims = (self.dim(factors[0].shape[0]),) + tuple(self.dim(f.shape[1]) for f in factors)
        hit = self._orders.get(dims)
        if hit is None:
            hit = self._chain_order(dims)
            self._orders[dims] = hit
        return hit

    def _chain_order(self, dims):
        n = len(dims) - 1
        if n > MAX_DP_CHAIN:
            cost, tree = 0.0, 0
            for j in range(1, n):
                cost += dims[0] * dims[j] * dims[j + 1]
                tree = (tree, j)
            return cost, tree
        cost = [[0.0] * n for _ in range(n)]
        split = [[0] * n for _ in range(n)]
        for length in range(2, n + 1):
            for i in range(n - length + 1):
                j = i + length - 1
                best, arg = None, i
                for k in range(i, j):
                    c = cost[i][k] + cost[k + 1][j] + dims[i] * dims[k + 1] * dims[j + 1]
                    if best is None or c < best:
                        best, arg = c, k
                cost[i][j], split[i][j] = best, arg

        def tree(i, j):
            if i == j:
                return i
            k = split[i][j]
            return (tree(i, k), tree(k + 1, j))

        return cost[0][n - 1], tree(0, n - 1)

    def flops(self, e: E.Expr, free=frozenset(), memo=None) -> float:
        if memo is None:
            key = (e, free)
            hit = self._flops.get(key)
            if hit is None:
                hit = self.flops(e, free, {})
                self._flops[key] = hit
            return hit
        if e in free:
            return 0.0
        if e in memo:
            return 0.0  # computed once, shared
        t = type(e)
        if t in (E.Symbol, E.Const, E.Differential):
            return 0.0
        sub = sum(self.flops(c, free, memo) for c in e.children)
        memo[e] = True
        if t is E.MatMul:
            return sub + self.chain_order(e.args)[0]
        if t in (E.Solve, E.Inverse, E.Det, E.LogDet):
            n = self.dim(e.args[0].shape[0])
            k = self.dim(e.args[1].shape[1]) if t is E.Solve else (n if t is E.Inverse else 0)
            return sub + n**3 / 3 + n * n * k
        return sub + self.size(e.shape) + sum(self.size(c.shape) for c in e.children)


def guess_sizes(e: E.Expr, hints: dict | None = None) -> dict:
    """Dims that only ever appear as contracted inner dims of products (ranks, feature counts)
    are guessed small, the inner dim of a Gram product A.T @ A (observations) large, every
    other named dim in between. User hints override (common practice: low-rank factors are much
    smaller than the data dims, and samples outnumber features)."""
    outer, inner = set(), set()
    for node in E.walk(e):
        for d in node.shape:
            if d is not None:
                outer.update(d.names)
    for node in E.walk(e):
        if type(node) is E.MatMul:
            for a in node.args[:-1]:
                if a.shape[1] is not None:
                    inner.update(a.shape[1].names)
    result_dims = set()
    for node in E.walk(e):
        if type(node) is not E.Symbol:
            for d in node.shape:
                if d is not None:
                    result_dims.update(d.names)
    gram = set()  # the inner dim of A.T @ A counts observations: usually the largest
    for node in E.walk(e):
        if type(node) is E.MatMul:
            for a, b in zip(node.args, node.args[1:]):
                if a == E.transpose(b) and a.shape[1] is not None:
                    gram.update(a.shape[1].names)
    sizes = {}
    for name in outer | inner:
        small = name in inner and not _appears_as_result(e, name)
        sizes[name] = 10000.0 if name in gram else 30.0 if small else 1000.0
    sizes.update({k: float(v) for k, v in (hints or {}).items()})
    return sizes


def _appears_as_result(e: E.Expr, name: str) -> bool:
    for node in E.walk(e):
        if type(node) is E.MatMul:
            r, c = node.shape
            if (r is not None and name in r.names) or (c is not None and name in c.names):
                return True
    return False


# ---------------------------------------------------------------------------------------------
# lowering: rewrites for computation (before CSE and printing)
# ---------------------------------------------------------------------------------------------


def lower(e: E.Expr, cost: CostModel, free=frozenset()) -> E.Expr:
    """inv(A) @ B -> solve(A, B); distribute products over sums where the cost model says so."""
    memo: dict = {}

    def go(x: E.Expr) -> E.Expr:
        hit = memo.get(x)
        if hit is not None:
            return hit
        if type(x) is E.Named:
            out = E.Named(x.name, go(x.body))
        elif not x.children:
            out = x
        else:
            new = [go(c) for c in x.children]
            out = x if all(a is b for a, b in zip(new, x.children)) else E.rebuild_smart(x, new)
            if type(out) is E.MatMul:
                out = _distribute(out, cost, free, go)
                if type(out) is E.MatMul:
                    out = _solves(out)
        memo[x] = out
        return out

    return go(e)


def _unwrap(f: E.Expr) -> E.Expr:
    return f.body if type(f) is E.Named else f


def _distribute(m: E.MatMul, cost: CostModel, free, go) -> E.Expr:
    fs = m.args
    for i, f in enumerate(fs):
        body = _unwrap(f)
        if type(body) is not E.Add or f in free:
            continue
        factored = cost.flops(m, free)
        # a scalar term of a broadcast sum is c * ones(shape) inside a product
        parts = [E.mul(t, E.Ones(body.shape)) if t.is_scalar else t for t in body.args]
        terms = [E.matmul(*fs[:i], t, *fs[i + 1 :]) for t in parts]
        distributed = sum(cost.flops(t, free) for t in terms) + cost.size(m.shape) * len(terms)
        if distributed < 0.8 * factored:
            return go(E.add(*terms))
    return m


def _solves(m: E.MatMul) -> E.Expr:
    fs = list(m.args)
    # a trailing inverse: P inv(A) = solve(A.T, P.T).T
    for i in range(len(fs) - 1, -1, -1):
        if type(fs[i]) is E.Inverse and len(fs) > 1:
            a = fs[i].args[0]
            if i < len(fs) - 1:
                rest = E.matmul(*fs[i + 1 :])
                return E.matmul(*fs[:i], E.Solve(a, rest)) if i > 0 else E.Solve(a, rest)
            left = E.matmul(*fs[:i])
            return E.transpose(E.Solve(E.transpose(a), E.transpose(left)))
    return m


# ---------------------------------------------------------------------------------------------
# printing with temporaries
# ---------------------------------------------------------------------------------------------


class NumpyPrinter(TextPrinter):
    names = {
        "trace": "np.trace", "det": "np.linalg.det", "kron": "np.kron", "sum": "np.sum",
        "norm": "np.linalg.norm", "outer": "np.outer", "eye": "np.eye", "ones": "np.ones",
        "zeros": "np.zeros", "mpow": "np.linalg.matrix_power", "diagm": "np.diag",
        "diag": "np.diagonal", "logsumexp": "_gw_logsumexp", "softmax": "_gw_softmax",
        "commutation": "_gw_commutation",
    }  # fmt: skip

    def __init__(self, gen: CodeGen):
        super().__init__()
        self.gen = gen

    def _print(self, e):
        name = self.gen.temps.get(e)
        if name is not None:
            return name
        return super()._print(e)

    def use(self, helper: str):
        self.gen.helpers.add(helper)

    def dim(self, d) -> str:
        parts = [f'_dims["{n}"]' for n in d.names]
        if d.coef != 1 or not parts:
            parts.insert(0, str(d.coef))
        return " * ".join(parts)

    def shape_tuple(self, shape) -> str:
        dims = self.dims(shape)
        return f"({dims[0]},)" if len(dims) == 1 else f"({', '.join(dims)})"

    def _print_Symbol(self, e):
        return self.gen.arg_name(e.name)

    def _print_Differential(self, e):
        name = self.gen.directions.get(e.symbol.name)
        if name is None:
            raise AssertionError(f"no direction for d{e.symbol.name}")
        return name

    def _print_Named(self, e):
        return self._print(e.body)

    def _print_Const(self, e):
        v = e.value
        if v.denominator == 1:
            return str(v.numerator)
        return repr(float(v))

    def _print_Identity(self, e):
        return f"np.eye({self.dim(e.args[0])})"

    def _print_Ones(self, e):
        return f"np.ones({self.shape_tuple(e.shape)})"

    def _print_Zero(self, e):
        return f"np.zeros({self.shape_tuple(e.shape)})"

    def _print_Commutation(self, e):
        self.use("_gw_commutation")
        return f"_gw_commutation({self.dim(e.args[0])}, {self.dim(e.args[1])})"

    def _print_Mul(self, e):
        coef, num, den = split_numerator(e)
        if len(num) == 1 and type(num[0]) is E.Ones and not den:
            return f"{self._print(E.Const(coef))} * {self._print(num[0])}"
        adjugate = self._adjugate(e)
        if adjugate is not None:
            return adjugate
        return super()._print_Mul(e)

    def _adjugate(self, e: E.Mul) -> str | None:
        """det(A) inv(B) with B = A or A.T is adj(B): defined (and computed) at singular A too."""
        fs = list(e.args)
        for i, f in enumerate(fs):
            if type(f) is not E.Det:
                continue
            a = f.args[0]
            for j, g in enumerate(fs):
                if type(g) is E.Inverse and g.args[0] in (a, E.transpose(a)):
                    self.use("_gw_adjugate")
                    adj = f"_gw_adjugate({self._print(g.args[0])})"
                    rest = [x for k, x in enumerate(fs) if k not in (i, j)]
                    if not rest:
                        return adj
                    other = rest[0] if len(rest) == 1 else E.Mul(*rest)
                    return f"{self.paren(other, P.PRODUCT + 1)} * {adj}"
        return None

    def segment(self, seg) -> str:
        """One product without unit inner axes: diagonal factors folded in, cost-ordered."""
        if len(seg) > 1:  # Sᵀ @ G and G @ S for a selection S: G put in place, no eye(n)
            first = seg[0].args[0] if type(seg[0]) is E.Transpose else None
            left = self._placement(first) if first is not None else None
            right = self._placement(seg[-1])
            if left is not None or right is not None:
                self.use("_gw_place")
                rest = seg[1:] if left is not None else seg[:-1]
                n, lo, hi = left if left is not None else right
                axis = 0 if left is not None else 1
                return f"_gw_place({self.segment(rest)}, {n}, {lo}, {hi}, {axis})"
        items = []  # (text, shape, is_simple)
        pending_diag = None
        for f in seg:
            if type(f) is E.Diagm and self.gen.temps.get(f) is None:
                v = self._print(f.args[0])
                if items:
                    text, shape, _ = items.pop()
                    items.append((f"{self.wrap(text)} * {self.wrap(v)}", shape, False))
                else:
                    pending_diag = v
                continue
            text = self.factor(f)
            if pending_diag is not None:
                if E.is_matrix_shape(f.shape):
                    text = f"{self.wrap(pending_diag)}[:, None] * {self.wrap(text)}"
                else:
                    text = f"{self.wrap(pending_diag)} * {self.wrap(text)}"
                pending_diag = None
            items.append((text, f.shape, True))
        if pending_diag is not None:  # the chain was only diagonal factors
            return f"np.diag({pending_diag})"
        if len(items) == 1:
            return items[0][0]
        if len(items) == 2:
            return f"{self.wrap(items[0][0])} @ {self.wrap(items[1][0])}"
        shapes = [SimpleNamespace(shape=shape) for _, shape, _ in items]
        _, tree = self.gen.cost.chain_order(shapes)

        def emit(t):
            if isinstance(t, int):
                return self.wrap(items[t][0])
            return f"({emit(t[0])} @ {emit(t[1])})"

        out = emit(tree)
        return out[1:-1] if out.startswith("(") and out.endswith(")") else out

    @staticmethod
    def wrap(text: str) -> str:
        simple = text.replace("_", "").replace(".", "").replace('"', "")
        if simple.isalnum() or (text.endswith(")") and _balanced_call(text)):
            return text
        if text.endswith(".T") and text[:-2].replace("_", "").isalnum():
            return text
        return f"({text})"

    def factor(self, f) -> str:
        if type(f) is E.Transpose and E.is_vector_shape(f.shape):
            return self._print(f.args[0])
        return self.paren(f, P.PRODUCT + 1)

    def _print_Transpose(self, e):
        a = e.args[0]
        if not E.is_matrix_shape(a.shape):
            return self._print(a)
        return self.wrap(self._print(a)) + ".T"

    def _print_Power(self, e):
        a, k = e.args
        return f"{self.wrap(self._print(a))}**{self.wrap(self._print(k))}"

    def _print_Func(self, e):
        code = FUNC_CODE[e.name]
        if e.name == "sigmoid":
            self.use("_gw_sigmoid")
        if "{}" in code:
            return code.format(self._print(e.arg))
        return f"{code}({self._print(e.arg)})"

    def label(self, e: E.Expr) -> str:
        words = TextPrinter().doprint(e)
        return repr(words if len(words) <= 60 else words[:57] + "...")

    def _print_Trace(self, e):
        a = e.args[0]
        if type(a) is E.MatMul and self.gen.temps.get(a) is None:
            fs = a.args
            best = None
            for k in range(1, len(fs)) if len(fs) <= MAX_DP_CHAIN else (len(fs) // 2,):
                left, right = fs[:k], fs[k:]
                c = (self.gen.cost.chain_order(left)[0] if len(left) > 1 else 0) + (
                    self.gen.cost.chain_order(right)[0] if len(right) > 1 else 0
                )
                if best is None or c < best[0]:
                    best = (c, k)
            k = best[1]
            left = E.matmul(*fs[:k]) if k > 1 else fs[0]
            right = E.matmul(*fs[k:]) if len(fs) - k > 1 else fs[k]
            lt, rt = self._print(left), self._print(right)
            if E.is_vector_shape(left.shape):
                return f"{self.wrap(lt)} @ {self.wrap(rt)}"
            return f'np.einsum("ij,ji->", {lt}, {rt})'
        return f"np.trace({self._print(a)})"

    def _print_Sum(self, e):
        a = e.args[0]
        if type(a) is E.Power and a.args[1] == E.Const(2) and self.gen.temps.get(a) is None:
            x = self._print(a.args[0])
            sub = "ij,ij->" if E.is_matrix_shape(a.shape) else "i,i->"
            return f'np.einsum("{sub}", {x}, {x})'  # no temporary for the squares
        if type(a) is E.Mul and len(a.array_factors) == 2 and not a.scalar_factors:
            x, y = a.args
            if not any(type(f) is E.Power and type(f.args[1]) is E.Const and f.args[1].value < 0
                       for f in (x, y)):  # fmt: skip
                sub = "ij,ij->" if E.is_matrix_shape(a.shape) else "i,i->"
                return f'np.einsum("{sub}", {self._print(x)}, {self._print(y)})'
        return f"np.sum({self._print(a)})"

    def _spd_factor(self, a: E.Expr) -> str | None:
        if E.is_spd(a) and self.gen.use_cholesky:
            self.use("_gw_cho")
            return self.gen.cholesky_for(a, self)
        return None

    def _print_LogDet(self, e):
        a = e.args[0]
        cho = self._spd_factor(a)
        if cho is not None:
            return f"2.0 * np.sum(np.log(np.diagonal({cho}[0])))"
        self.use("_gw_logdet")
        return f"_gw_logdet({self._print(a)}, {self.label(a)})"

    def _print_Inverse(self, e):
        a = e.args[0]
        cho = self._spd_factor(a)
        if cho is not None:
            return f"cho_solve({cho}, np.eye({self.dim(a.shape[0])}))"
        self.use("_gw_inv")
        return f"_gw_inv({self._print(a)}, {self.label(a)})"

    def _print_Solve(self, e):
        a, b = e.args
        cho = self._spd_factor(a)
        if cho is not None:
            return f"cho_solve({cho}, {self._print(b)})"
        self.use("_gw_solve")
        return f"_gw_solve({self._print(a)}, {self._print(b)}, {self.label(a)})"

    def _print_Vec(self, e):
        a = e.args[0]
        if not E.is_matrix_shape(a.shape):
            return self._print(a)
        return f'{self.wrap(self._print(a))}.reshape(-1, order="F")'

    def _print_Unvec(self, e):
        g, r, c = e.args
        return f'{self.wrap(self._print(g))}.reshape(({self.dim(r)}, {self.dim(c)}), order="F")'

    def _print_Diag(self, e):
        a = e.args[0]
        if type(a) is E.MatMul and len(a.args) == 2 and self.gen.temps.get(a) is None:
            x, y = a.args
            if E.is_matrix_shape(x.shape) and E.is_matrix_shape(y.shape):
                return f'np.einsum("ij,ji->i", {self._print(x)}, {self._print(y)})'
        return f"np.diagonal({self._print(a)})"

    def _print_Diagm(self, e):
        return f"np.diag({self._print(e.args[0])})"

    def _print_Kron(self, e):
        a, b = e.args
        return f"np.kron({self._print(a)}, {self._print(b)})"

    def _print_KronContract(self, e):
        g, other, r, c, side = e.args
        self.use("_gw_kron_contract")
        rows = self.dim(r) if r is not None else "1"
        cols = self.dim(c) if c is not None else "1"
        out = f'_gw_kron_contract({self.as_2d(g)}, {self.as_2d(other)}, {rows}, {cols}, "{side}")'
        if E.is_vector_shape(e.shape):
            return f"{out}.reshape(-1)"
        return out

    def as_2d(self, e: E.Expr) -> str:
        """e as a 2-D array in its internal orientation (a 1-D vector as a column or a row)."""
        text = self._print(e)
        if E.is_matrix_shape(e.shape):
            return text
        r = self.dim(e.shape[0]) if e.shape[0] is not None else "1"
        c = self.dim(e.shape[1]) if e.shape[1] is not None else "1"
        return f"np.reshape({text}, ({r}, {c}))"

    def _print_Norm(self, e):
        return f"np.linalg.norm({self._print(e.args[0])})"

    def _print_LogSumExp(self, e):
        self.use("_gw_logsumexp")
        return f"_gw_logsumexp({self._print(e.args[0])})"

    def _print_Softmax(self, e):
        self.use("_gw_softmax")
        return f"_gw_softmax({self._print(e.args[0])})"

    def _print_MatPow(self, e):
        return f"np.linalg.matrix_power({self._print(e.args[0])}, {e.args[1]})"

    def _print_Pi(self, e):
        return "np.pi"

    def _print_Index(self, e):
        a, rows, cols = e.args
        if type(a) is E.Identity and rows[0] == "at" and cols == E.FULL:
            self.use("_gw_unit")  # e_i without forming eye(n)
            return f"_gw_unit({self.dim(a.args[0])}, {rows[1]})"
        return super()._print_Index(e)

    def _placement(self, f):
        """(n, lo, hi) when f is a slice of eye(n) (a selection S) as a chain factor, else None."""
        if type(f) is not E.Index or type(f.args[0]) is not E.Identity:
            return None
        rows, cols = f.args[1], f.args[2]
        if rows[0] != "slice" or cols != E.FULL or self.gen.temps.get(f) is not None:
            return None
        lo, hi = ("None" if b is None else self.dim(b) if isinstance(b, E.Dim) else str(b)
                  for b in rows[1:])  # fmt: skip
        return self.dim(f.args[0].args[0]), lo, hi

    def _print_D(self, e):  # pragma: no cover
        raise AssertionError("pending differentials are never printed as code")


def _balanced_call(text: str) -> bool:
    """True for `name(...)` whose parentheses close only at the end."""
    i = text.find("(")
    if i <= 0 or not text[:i].replace(".", "").replace("_", "").isalnum():
        return False
    depth = 0
    for k, ch in enumerate(text[i:], i):
        if ch == "(":
            depth += 1
        elif ch == ")":
            depth -= 1
            if depth == 0 and k != len(text) - 1:
                return False
    return True


# ---------------------------------------------------------------------------------------------
# functions
# ---------------------------------------------------------------------------------------------


@dataclass
class Output:
    name: str  # local name of the result
    expr: E.Expr
    shape: tuple  # internal shape of the result
    what: str  # words for warnings ("the value", "the gradient of U")


@dataclass
class FunctionSpec:
    name: str
    doc: str
    outputs: list  # [Output]
    returns: str  # the return expression in terms of output names
    direction: tuple | None = None  # (param name, symbol name or None, internal shape)
    loop: str | None = None  # for dense Jacobians/Hessians: template of the body
    extra: dict = field(default_factory=dict)


class CodeGen:
    """Emits one function: argument checks, temporaries, outputs."""

    def __init__(self, symbols: dict, required: list, cost: CostModel, use_cholesky=True):
        self.symbols = symbols  # name -> Symbol (declared)
        self.required = required  # names every function requires (block order)
        self.cost = cost
        self.use_cholesky = use_cholesky
        self.helpers: set = set()
        self.uses_scipy = False
        self.temps: dict = {}
        self.directions: dict = {}
        self.lines: list[str] = []
        self.cholesky: dict = {}

    def arg_name(self, name: str) -> str:
        if keyword.iskeyword(name) or name.startswith("_"):  # pragma: no cover - parser refuses
            raise AssertionError(name)
        return name

    def cholesky_for(self, a: E.Expr, printer: NumpyPrinter) -> str:
        name = self.cholesky.get(a)
        if name is None:
            name = f"_chol{len(self.cholesky)}"
            self.cholesky[a] = name
            self.uses_scipy = True
            self.lines.append(f"    {name} = _gw_cho({printer._print(a)}, {printer.label(a)})")
        return name

    def signature(self, direction: str | None) -> str:
        req = [self.arg_name(n) for n in self.required]
        opt = [f"{self.arg_name(n)}=None" for n in self.symbols if n not in self.required]
        params = ([direction, "/"] if direction else []) + ["*"] + req + opt
        if params == ["*"]:
            return ""
        return ", ".join(params)

    def spec_of(self, shape) -> str:
        dims = [d for d in shape if d is not None]
        parts = []
        for d in dims:
            parts.append(str(d.coef) if d.is_literal else repr(str(d)))
        if len(parts) == 1:
            return f"({parts[0]},)"
        return "(" + ", ".join(parts) + ")"

    def check_lines(self, direction) -> list[str]:
        names = list(self.required)
        specs = [f"({n!r}, {n}, {self.spec_of(self.symbols[n].shape)})" for n in names]
        if direction is not None:
            pname, _sym, shape = direction
            specs.append(f"({_direction_label(direction)!r}, {pname}, {self.spec_of(shape)})")
            names.append(pname)
        if not specs:
            return ["    _dims = {}"]
        self.helpers.add("_gw_check")
        targets = ", ".join(names) + ("," if len(names) == 1 else "")
        return [
            f"    ({targets}), _dims = _gw_check((",
            *[f"        {s}," for s in specs],
            "    ))",
        ]

    def function(self, spec: FunctionSpec) -> str:
        self.temps, self.lines, self.cholesky = {}, [], {}
        printer = NumpyPrinter(self)
        direction = spec.direction
        if direction is not None:
            pname, sym, _shape = direction
            if sym is not None:
                self.directions = {sym: pname}
        head = [f"def {spec.name}({self.signature(direction[0] if direction else None)}):"]
        head.append(f'    """{spec.doc}"""')
        head += self.check_lines(direction)
        exprs = [o.expr for o in spec.outputs]
        shared = _shared_nodes(exprs)
        counter = [0]

        def temp_name(node):
            if type(node) is E.Named and node.name not in self.symbols:
                base = node.name
                if base in self.temps.values() or base in self.required:
                    base = f"{base}_{counter[0]}"
                return base
            counter[0] += 1
            return f"_t{counter[0]}"

        visited: set = set()

        def emit(node):
            if id(node) in visited:
                return
            visited.add(id(node))
            for c in node.children:
                emit(c)
            if node in shared and node not in self.temps:
                text = printer._print(node)
                name = temp_name(node)
                self.lines.append(f"    {name} = {text}")
                self.temps[node] = name

        for o in spec.outputs:
            emit(o.expr)
            text = printer._print(o.expr)
            self.lines.append(f"    {o.name} = {text}")
            if not E.is_matrix_shape(o.shape) and not E.is_scalar_shape(o.shape):
                pass
            self.helpers.add("_gw_finite")
            self.lines.append(f"    _gw_finite({o.name}, {o.what!r})")
        body = head + self.lines
        if spec.loop:
            body.append(spec.loop)
        body.append(f"    return {spec.returns}")
        self.directions = {}
        return "\n".join(body)


def _direction_label(direction) -> str:
    pname, sym, _shape = direction
    if pname == "_direction":
        return f"the direction d{sym}" if sym else "the direction"
    return "the cotangent (shaped like the target)"


def _shared_nodes(exprs) -> set:
    """Nodes worth a temporary: used more than once, or definitions of the block."""
    count: dict = {}
    stack = list(exprs)
    visited: set = set()
    for e in exprs:
        count[e] = count.get(e, 0)
    while stack:
        x = stack.pop()
        if x in visited:
            continue
        visited.add(x)
        for c in x.children:
            count[c] = count.get(c, 0) + 1
            if c not in visited:
                stack.append(c)
    out = set()
    for node, k in count.items():
        if _trivial(node):
            continue
        if type(node) is E.Named or k > 1:
            out.add(node)
    return out


def _trivial(node) -> bool:
    t = type(node)
    if t in (E.Symbol, E.Const, E.Differential, E.Identity, E.Ones, E.Zero, E.SizeOf, E.Pi):
        return True
    if t is E.Transpose and type(node.args[0]) in (E.Symbol, E.Named):
        return True
    if t is E.Mul and len(node.args) == 2 and type(node.args[0]) is E.Const:
        return type(node.args[1]) in (E.Symbol,)
    return False


def module(header: str, functions: list[str], helpers: set, uses_scipy: bool) -> str:
    """The whole generated module text (runs with NumPy, and SciPy for spd symbols)."""
    lines = [header, "import warnings", "", "import numpy as np"]
    if uses_scipy:
        lines.append("from scipy.linalg import cho_factor, cho_solve")
    lines.append("")
    for name in sorted(helpers):
        lines.append(HELPERS[name].rstrip())
        lines.append("")
    names = []
    for f in functions:
        lines.append("")
        lines.append(f)
        lines.append("")
        names.append(f[4 : f.index("(")])
    # the dense Jacobian and Hessian loops call the products through this table, so that no
    # user symbol of the same name can shadow them
    lines.append("")
    lines.append("_gw_functions = {" + ", ".join(f'"{n}": {n}' for n in names) + "}")
    return "\n".join(lines).rstrip() + "\n"
