"""NumPy code from expression trees, written the way an expert writes it by hand.

solve instead of inv, slogdet, a Cholesky factor reused for spd symbols, trace and sum of
products without temporaries, diagonal products by broadcasting, no Kronecker product formed
for derivatives, shared subexpressions computed once, chains ordered by a cost model.
"""

from __future__ import annotations

from .. import expr as E
from ..entrywise import EXTRA_ENTRYWISE
from . import precedence as P
from .axis_printing import AXIS_HELPERS, NumpyAxisMixin
from .base import split_numerator
from .calltime import (
    chain_candidates,
    chain_dims,
    choice_text,
    poly_text,
    tree_cost,
)
from .costmodel import (  # noqa: F401 - public names kept importable from here
    MAX_DP_CHAIN,
    CostModel,
    guess_sizes,
    lower,
)
from .inplace import INPLACE_HELPERS
from .runtime import FUNC_CODE, HELPERS  # noqa: F401
from .shared_eigh import HELPERS as SHARED_EIGH_HELPERS
from .structure import cholesky_ok
from .text import TextPrinter

HELPERS.update(AXIS_HELPERS)
HELPERS.update(INPLACE_HELPERS)
HELPERS.update(SHARED_EIGH_HELPERS)
HELPERS.update(spec.helper for spec in EXTRA_ENTRYWISE.values() if spec.helper is not None)

# ---------------------------------------------------------------------------------------------
# printing with temporaries
# ---------------------------------------------------------------------------------------------


class NumpyPrinter(NumpyAxisMixin, TextPrinter):
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

    def _print_LeastSquares(self, e):
        a, b = e.args
        self.use("_gw_lstsq")
        weighted = type(a).__name__ in ("Whiten", "Colour")  # (the design as the user wrote it)
        label = self.label(a.args[1] if weighted else a)
        return f"_gw_lstsq({self._print(a)}, {self._print(b)}, {label})"

    def _print_Whiten(self, e):
        cho = self._spd_factor(e.args[0])
        self.use("_gw_cho_whiten")
        return f"_gw_cho_whiten({cho}, {self._print(e.args[1])})"

    def _print_Colour(self, e):
        cho = self._spd_factor(e.args[0])
        self.use("_gw_cho_colour")
        return f"_gw_cho_colour({cho}, {self._print(e.args[1])})"

    def _print_InverseTrace(self, e):
        cho = self._spd_factor(e.args[0])
        self.use("_gw_cho_inv_trace")
        return f"_gw_cho_inv_trace({cho})"

    def _print_CallTimeChoice(self, e):
        own, dist, own_cost, dist_cost = e.args
        return f"({self._print(dist)} if {dist_cost} < 0.8 * ({own_cost}) else {self._print(own)})"

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
        return f"np.eye({self.dim(e.args[0])}, dtype=_dims.dtype)"

    def _print_Ones(self, e):
        return f"np.ones({self.shape_tuple(e.shape)}, dtype=_dims.dtype)"

    def _print_Zero(self, e):
        return f"np.zeros({self.shape_tuple(e.shape)}, dtype=_dims.dtype)"

    def _print_Commutation(self, e):
        self.use("_gw_commutation")
        return f"_gw_commutation({self.dim(e.args[0])}, {self.dim(e.args[1])}, _dims.dtype)"

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

    def _print_MatMul(self, e):
        # 1 bᵀ and b 1ᵀ (NumPy broadcasting written out): a read-only view, no array formed
        if len(e.args) == 2 and E.is_matrix_shape(e.shape):
            left, right = (_ones_side(f) for f in e.args)
            if left == "col" and right is None:
                return f"np.broadcast_to({self._print(e.args[1])}, {self.shape_tuple(e.shape)})"
            if right == "row" and left is None:
                col = f"{self.wrap(self._print(e.args[0]))}[:, None]"
                return f"np.broadcast_to({col}, {self.shape_tuple(e.shape)})"
        # X @ ones((c, k)) repeats the row sums of X k times (a softmax backward has it): a sum
        # and a read-only broadcast view, never the ones matrix nor its product
        if len(e.args) >= 2 and E.is_matrix_shape(e.shape):
            for end, axis in ((-1, 1), (0, 0)):
                f = e.args[end]
                if type(f) is E.Ones and E.is_matrix_shape(f.shape):
                    rest = E.matmul(*(e.args[:-1] if end == -1 else e.args[1:]))
                    if E.is_matrix_shape(rest.shape):
                        summed = self._sum_kept(rest, axis)
                        return f"np.broadcast_to({summed}, {self.shape_tuple(e.shape)})"
        return super()._print_MatMul(e)

    def _sum_kept(self, x: E.Expr, axis: int) -> str:
        """np.sum(x, axis, keepdims=True); of a product X * Y by einsum, without forming it."""
        if type(x) is E.Mul and len(x.args) == 2 and self.gen.temps.get(x) is None:
            a, b = x.args
            if E.is_matrix_shape(a.shape) and E.is_matrix_shape(b.shape):
                out, index = ("i", "[:, None]") if axis == 1 else ("j", "[None, :]")
                return f'np.einsum("ij,ij->{out}", {self._print(a)}, {self._print(b)}){index}'
        return f"np.sum({self._print(x)}, axis={axis}, keepdims=True)"

    def _print_Add(self, e):
        factored = _factor_common(e)
        if factored is not None:  # A*X - A*Y as A*(X - Y): one product fewer
            return self._print(factored)
        return super()._print_Add(e)

    def _reuse_products(self, seg: list) -> list:
        """A run of factors whose product is already a temporary is read from it."""
        temps = self.gen.temps
        n = len(seg)
        if n < 3 or n > 12 or not temps:
            return seg
        for length in range(n - 1, 1, -1):
            for i in range(n - length + 1):
                node = E.matmul(*seg[i : i + length])
                if node in temps:
                    return self._reuse_products([*seg[:i], node, *seg[i + length :]])
        return seg

    def segment(self, seg) -> str:
        """One product without unit inner axes: diagonal factors folded in, cost-ordered."""
        seg = self._reuse_products(list(seg))
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
                    text, shape = items.pop()[:2]
                    items.append((f"{self.wrap(text)} * {self.wrap(v)}", shape, False, None))
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
            items.append((text, f.shape, True, _ones_side(f)))
        if pending_diag is not None:  # the chain was only diagonal factors
            return f"np.diag({pending_diag})"
        # products with a vector of ones are sums: no ones array, no matrix-vector product
        if len(items) == 2 and items[0][3] == "row" and items[1][3] == "col":
            return self.dim(items[1][1][0])
        while len(items) >= 2 and items[-1][3] == "col" and E.is_matrix_shape(items[-2][1]):
            text, shape = items[-2][:2]
            items[-2:] = [(f"np.sum({text}, axis=1)", (shape[0], None), False, None)]
        while len(items) >= 2 and items[0][3] == "row" and E.is_matrix_shape(items[1][1]):
            text, shape = items[1][:2]
            items[:2] = [(f"np.sum({text}, axis=0)", (None, shape[1]), False, None)]
        if len(items) == 1:
            return items[0][0]
        if len(items) == 2:
            return f"{self.wrap(items[0][0])} @ {self.wrap(items[1][0])}"
        shapes = [item[1] for item in items]
        trees = chain_candidates(shapes, self.gen.cost)

        def emit(t):
            if isinstance(t, int):
                return self.wrap(items[t][0])
            return f"({emit(t[0])} @ {emit(t[1])})"

        if len(trees) > 1:  # the order depends on the sizes: chosen at call time
            texts = [emit(t)[1:-1] for t in trees]
            costs = [poly_text(tree_cost(chain_dims(shapes), t)) for t in trees]
            return f"({choice_text(texts, costs)})"
        out = emit(trees[0])
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
        if e.name in EXTRA_ENTRYWISE:
            return self.extra_func(e)
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
                # parenthesized: the parent sees a trace (an atom), not a product
                return f"({self.wrap(lt)} @ {self.wrap(rt)})"
            return f'np.einsum("ij,ji->", {lt}, {rt})'
        thin = self._trace_of_solve(a)
        if thin is not None:
            return thin
        return f"np.trace({self._print(a)})"

    def _trace_of_solve(self, a: E.Expr) -> str | None:
        """tr(solve(A, L R)) = Σ solve(A, L) ∘ Rᵀ: a solve with the fewest right-hand sides
        instead of one with n of them (n³ work for a trace)."""
        if type(a) is not E.Solve or self.gen.temps.get(a) is not None:
            return None
        m, b = a.args
        fs = b.args if type(b) is E.MatMul else ()
        if len(fs) < 2:
            return None
        cost = self.gen.cost
        k = min(range(1, len(fs)), key=lambda k: (cost.dim(fs[k - 1].shape[1]), k))
        inner, n = fs[k - 1].shape[1], m.shape[0]
        if inner == n:
            return None
        left = E.Solve(m, E.matmul(*fs[:k]))
        right = E.transpose(E.matmul(*fs[k:]))
        thin = f'np.einsum("ij,ij->", {self._print(left)}, {self._print(right)})'
        if inner is None:
            return thin
        # the sizes decide (n solves against `inner` of them): chosen at call time
        return f"({thin} if {self.dim(inner)} < {self.dim(n)} else np.trace({self._print(a)}))"

    def _print_Sum(self, e):
        a = e.args[0]
        if _is_square(a) and self.gen.temps.get(a) is None and not E.is_scalar_shape(a.shape):
            x = self._print(a.args[0])
            if not E.is_matrix_shape(a.shape):
                # one BLAS dot, no temporary; parenthesized, as the parent sees a sum (an atom)
                return f"({self.wrap(x)} @ {self.wrap(x)})"
            return f'np.einsum("ij,ij->", {x}, {x})'  # no temporary for the squares
        if (
            type(a) is E.Mul
            and len(a.array_factors) == 2
            and not a.scalar_factors
            and not E.is_scalar_shape(a.shape)
        ):
            x, y = a.args
            if not any(type(f) is E.Power and type(f.args[1]) is E.Const and f.args[1].value < 0
                       for f in (x, y)):  # fmt: skip
                if not E.is_matrix_shape(a.shape):
                    return f"({self.wrap(self._print(x))} @ {self.wrap(self._print(y))})"
                return f'np.einsum("ij,ij->", {self._print(x)}, {self._print(y)})'
        return f"np.sum({self._print(a)})"

    def _spd_factor(self, a: E.Expr) -> str | None:
        if self.gen.use_cholesky and cholesky_ok(a):
            self.use("_gw_cho")
            self.use("_gw_cho_solve")
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
            self.use("_gw_cho_inv")
            return f"_gw_cho_inv({cho})"
        self.use("_gw_inv")
        return f"_gw_inv({self._print(a)}, {self.label(a)})"

    def _print_Solve(self, e):
        a, b = e.args
        cho = self._spd_factor(a)
        if cho is not None:
            return f"_gw_cho_solve({cho}, {self._print(b)})"
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

    def _print_Tril(self, e):
        return f"np.tril({self._print(e.args[0])})"

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

    def _print_Conj(self, e):
        return f"np.conj({self._print(e.args[0])})"

    def _print_Real(self, e):
        return f"np.real({self._print(e.args[0])})"

    def _print_Imag(self, e):
        return f"np.imag({self._print(e.args[0])})"

    def _print_Abs(self, e):
        return f"np.abs({self._print(e.args[0])})"

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


def _factor_common(e: E.Add) -> E.Expr | None:
    """c A X - c A Y as c A (X - Y): the factors (and the size of the coefficient) every term
    of a sum shares, taken out; None when the terms share none."""
    split = [E.split_coef(t) for t in e.args]
    if any(rest is None for _c, rest in split):
        return None
    factors = [list(rest.args) if type(rest) is E.Mul else [rest] for _c, rest in split]
    # mul() merges repeated factors into powers, so the factors of a term are distinct
    common = [f for f in factors[0] if all(f in other for other in factors[1:])]
    if not common or any(E.is_matrix_shape(f.shape) and f.shape != e.shape for f in common):
        return None
    size = abs(split[0][0])
    k = size if all(abs(c) == size for c, _r in split) else 1
    rests = []
    for (c, _r), fs in zip(split, factors):
        left = list(fs)
        for f in common:
            left.remove(f)
        rests.append(E.mul(E.Const(c / k), *left))
    return E.mul(E.Const(k), *common, E.add(*rests))


def _ones_side(f: E.Expr) -> str | None:
    """'col' for a column of ones, 'row' for a row of ones, else None."""
    if type(f) is E.Ones and E.is_col(f.shape):
        return "col"
    if type(f) is E.Transpose and type(f.args[0]) is E.Ones and E.is_col(f.args[0].shape):
        return "row"
    if type(f) is E.Ones and E.is_row(f.shape):
        return "row"
    return None


def _is_square(e: E.Expr) -> bool:
    return type(e) is E.Power and e.args[1] == E.Const(2)


# the code generator (functions, their checks and the module) lives in codegen.py; its names
# stay importable from here
from .codegen import (  # noqa: E402, F401
    MAX_FLIP_CHECKS,
    CodeGen,
    FunctionSpec,
    Output,
    module,
)
