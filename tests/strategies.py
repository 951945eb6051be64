"""The one place for the suite's hypothesis strategies.

`blocks()` draws random well-shaped blocks from the grammar of the formula language: symbols
declared with random shapes over the dims n, p, k and an integer literal, random expression
trees over the operation table that are shape-correct by construction (and kept inside the
domains of log, sqrt, division, inverse and log-determinant), optional intermediate
definitions, and a scalar or an array target. `mutants()` draws near-valid mutations of such
blocks: a character deleted, a dim swapped, a name changed.
"""

from __future__ import annotations

import re
from dataclasses import dataclass, field

from hypothesis import strategies as st

__all__ = ["FUZZ_SIZES", "DrawnBlock", "blocks", "mutants"]

#: distinct sizes for the named dims and the literal, so a dim mix-up cannot hide
FUZZ_SIZES = {"n": 4, "p": 5, "k": 3}
_DIMS = ("n", "p", "k", 2)


@dataclass(frozen=True)
class DrawnBlock:
    text: str
    wrt: tuple
    target_kind: str  # "scalar", "vector", "matrix"
    mutation: str = ""  # "", "delete", "dim", "name"
    ops: tuple = field(default=(), compare=False)  # operation names used, for statistics


class _NumpyMoreOps:
    """Draws of reductions over an axis (axis=, negative axes, keepdims=), softmax and
    log_softmax over an axis, maximum/minimum and the NumPy entrywise functions."""

    ENTRYWISE_MORE = [
        "abs", "cosh", "sinh", "arctan", "expm1", "square", "erf", "log1p", "reciprocal",
        "gammaln", "maximum", "minimum",
    ]  # fmt: skip
    SCALAR_MORE = ["reduce_all", "sum_of_axis_reduce"]
    VECTOR_MORE = ["axis_reduce", "log_softmax_vec"]
    MATRIX_MORE = ["softmax_axis", "keepdims_outer"]
    REDUCERS = ["sum", "mean", "max", "min", "logsumexp", "norm"]

    def _more_func(name):
        def op(self, s, k):
            return f"{name}({self.expr(s, k)})"

        return op

    op_abs = _more_func("abs")
    op_cosh = _more_func("cosh")
    op_sinh = _more_func("sinh")
    op_arctan = _more_func("arctan")
    op_expm1 = _more_func("expm1")
    op_square = _more_func("square")
    op_erf = _more_func("erf")
    del _more_func

    def op_log1p(self, s, k):
        return f"log1p({self.positive(s, k)})"

    def op_reciprocal(self, s, k):
        return f"reciprocal({self.positive(s, k)})"

    def op_gammaln(self, s, k):
        return f"gammaln({self.positive(s, k)})"

    def _extremum(self, name, s, k):
        other = self.draw(st.sampled_from(["same", "scalar", "zero"]))
        b = {"same": lambda: self.expr(s, k), "scalar": lambda: self.expr((), k)}.get(
            other, lambda: "0"
        )()
        a = self.expr(s, k)
        return f"{name}({a}, {b})" if self.draw(st.booleans()) else f"{name}({b}, {a})"

    def op_maximum(self, s, k):
        return self._extremum("maximum", s, k)

    def op_minimum(self, s, k):
        return self._extremum("minimum", s, k)

    def _reducer(self):
        return self.draw(st.sampled_from(self.REDUCERS))

    def op_reduce_all(self, s, k):
        return f"{self._reducer()}({self.expr(self._array_shape(), k)})"

    def op_sum_of_axis_reduce(self, s, k):
        shape = (self.dim(), self.dim())
        axis = self.draw(st.sampled_from(["0", "1", "-1", "-2"]))
        return f"sum({self._reducer()}({self.expr(shape, k)}, axis={axis}))"

    def op_axis_reduce(self, s, k):
        c = self.dim()
        if self.draw(st.booleans()):
            axis = self.draw(st.sampled_from(["1", "-1"]))
            return f"{self._reducer()}({self.expr((s[0], c), k)}, axis={axis})"
        axis = self.draw(st.sampled_from(["0", "-2"]))
        return f"{self._reducer()}({self.expr((c, s[0]), k)}, axis={axis})"

    def op_log_softmax_vec(self, s, k):
        return f"log_softmax({self.expr(s, k)})"

    def op_softmax_axis(self, s, k):
        name = self.draw(st.sampled_from(["softmax", "log_softmax"]))
        axis = self.draw(st.sampled_from(["0", "1", "-1", "None"]))
        return f"{name}({self.expr(s, k)}, axis={axis})"

    def op_keepdims_outer(self, s, k):
        c = self.dim()
        if self.draw(st.booleans()):
            inner = f"{self._reducer()}({self.expr((s[0], c), k)}, axis=1, keepdims=True)"
            return f"({inner} @ ones(1, {s[1]}))"
        inner = f"{self._reducer()}({self.expr((c, s[1]), k)}, axis=0, keepdims=True)"
        return f"(ones({s[0]}, 1) @ {inner})"


class _Gen(_NumpyMoreOps):
    """Draws one block: keeps the declared symbols, the definitions and the names used."""

    def __init__(self, draw, max_depth: int, broadcast_add: bool, vector_kron: bool):
        self.draw = draw
        self.max_depth = max_depth
        self.broadcast_add = broadcast_add
        self.vector_kron = vector_kron
        self.decls: dict[str, tuple] = {}  # name -> (shape, structure)
        self.defs: list[tuple[str, str, tuple]] = []  # (name, text, shape)
        self.used: set[str] = set()
        self.ops: list[str] = []

    # --- symbols ---------------------------------------------------------------------------

    def _new_name(self, shape) -> str:
        prefix = ("c", "x", "A")[len(shape)]
        i = sum(1 for n in self.decls if n.startswith(prefix))
        return f"{prefix}{i}"

    def symbol(self, shape, structure="") -> str:
        have = [n for n, (s, w) in self.decls.items() if s == shape and w == structure]
        if have and self.draw(st.booleans()):
            name = self.draw(st.sampled_from(have))
        else:
            name = self._new_name(shape)
            self.decls[name] = (shape, structure)
        self.used.add(name)
        return name

    def dim(self):
        return self.draw(st.sampled_from(_DIMS))

    # --- expressions -----------------------------------------------------------------------

    def expr(self, shape, depth: int) -> str:
        if depth <= 0 or self.draw(st.integers(0, 3)) == 0:
            return self.leaf(shape)
        if len(shape) == 0:
            table = self.SCALAR_OPS
        elif len(shape) == 1:
            table = self.VECTOR_OPS
        else:
            table = self.MATRIX_OPS if shape[0] != shape[1] else self.SQUARE_OPS
        table = table + self.ENTRYWISE_OPS + self.ENTRYWISE_MORE
        more = (self.SCALAR_MORE, self.VECTOR_MORE, self.MATRIX_MORE)[min(len(shape), 2)]
        table = table + more
        name = self.draw(st.sampled_from(table))
        self.ops.append(name)
        return getattr(self, "op_" + name)(shape, depth - 1)

    def leaf(self, shape) -> str:
        choice = self.draw(st.integers(0, 9))
        defs = [n for n, _, s in self.defs if s == shape]
        if defs and choice >= 8:
            name = self.draw(st.sampled_from(defs))
            self.used.add(name)
            return name
        if len(shape) == 0 and choice == 7:
            return self.draw(st.sampled_from(["2", "0.5", "1.5", "3"]))
        if len(shape) == 2 and shape[0] == shape[1] and choice == 6:
            return f"eye({shape[0]})"
        if len(shape) == 2 and shape[0] == shape[1] and choice == 4:
            return self.symbol(shape, self.draw(st.sampled_from(["symmetric", "diagonal"])))
        if choice == 5 and len(shape) > 0:
            return f"ones({', '.join(str(d) for d in shape)})"
        return self.symbol(shape)

    def positive(self, shape, depth) -> str:
        """An expression that is > 0 everywhere: a positive symbol or 1 + E**2."""
        if depth <= 0 or self.draw(st.booleans()):
            return self.symbol(shape, "positive")
        return f"(1 + {self.expr(shape, depth - 1)} ** 2)"

    def regular(self, d, depth) -> str:
        """A square (d, d) matrix that is safely invertible: spd, or G G^T + I."""
        if depth <= 0 or self.draw(st.booleans()):
            return self.symbol((d, d), "spd")
        e = self.dim()
        g = self.expr((d, e), depth - 1)
        return f"({g} @ ({g}).T + eye({d}))"

    # operations producing any shape (entrywise and arithmetic)
    ENTRYWISE_OPS = [
        "add", "sub", "neg", "mul", "div", "scale", "exp", "sin", "cos", "tanh", "sigmoid",
        "softplus", "log", "sqrt", "power", "power_symbol", "div_scalar", "scalar_over",
    ]  # fmt: skip
    SCALAR_OPS = [
        "sum", "trace", "norm", "logsumexp", "inner", "bilinear", "det", "logdet", "sum_kron",
        "trace_kron", "vec_inner",
    ]  # fmt: skip
    VECTOR_OPS = ["matvec", "vecmat", "softmax", "diag", "solve_vec"]
    MATRIX_OPS = ["matmul", "transpose", "outer", "solve_mat"]
    SQUARE_OPS = MATRIX_OPS + ["diagm", "inv", "mpow"]

    def op_add(self, s, k):
        a, b = self.expr(s, k), self.expr(s, k)
        if self.broadcast_add and s and self.draw(st.integers(0, 3)) == 0:
            b = self.expr((), k)
        return f"({a} + {b})"

    def op_sub(self, s, k):
        return f"({self.expr(s, k)} - {self.expr(s, k)})"

    def op_neg(self, s, k):
        return f"(-{self.expr(s, k)})"

    def op_mul(self, s, k):
        return f"({self.expr(s, k)} * {self.expr(s, k)})"

    def op_div(self, s, k):
        return f"({self.expr(s, k)} / {self.positive(s, k)})"

    def op_scale(self, s, k):
        return f"({self.expr((), k)} * {self.expr(s, k)})"

    def op_div_scalar(self, s, k):
        return f"({self.expr(s, k)} / {self.positive((), k)})"

    def op_scalar_over(self, s, k):
        return f"(2 / {self.positive(s, k)})"

    def _func(name):
        def op(self, s, k):
            return f"{name}({self.expr(s, k)})"

        return op

    op_exp = _func("exp")
    op_sin = _func("sin")
    op_cos = _func("cos")
    op_tanh = _func("tanh")
    op_sigmoid = _func("sigmoid")
    op_softplus = _func("softplus")
    del _func

    def op_log(self, s, k):
        return f"log({self.positive(s, k)})"

    def op_sqrt(self, s, k):
        return f"sqrt({self.positive(s, k)})"

    def op_power(self, s, k):
        exponent = self.draw(st.sampled_from(["2", "3"]))
        if self.draw(st.booleans()):
            return f"({self.positive(s, k)} ** 0.5)"
        return f"({self.expr(s, k)} ** {exponent})"

    def op_power_symbol(self, s, k):
        return f"({self.positive(s, k)} ** {self.symbol(())})"

    # scalars
    def _array_shape(self):
        if self.draw(st.booleans()):
            return (self.dim(),)
        return (self.dim(), self.dim())

    def op_sum(self, s, k):
        return f"sum({self.expr(self._array_shape(), k)})"

    def op_norm(self, s, k):
        return f"norm({self.expr(self._array_shape(), k)})"

    def op_logsumexp(self, s, k):
        return f"logsumexp({self.expr(self._array_shape(), k)})"

    def op_trace(self, s, k):
        d = self.dim()
        return f"trace({self.expr((d, d), k)})"

    def op_inner(self, s, k):
        d = self.dim()
        return f"({self.expr((d,), k)} @ {self.expr((d,), k)})"

    def op_bilinear(self, s, k):
        a, b = self.dim(), self.dim()
        return f"({self.expr((a,), k)} @ {self.expr((a, b), k)} @ {self.expr((b,), k)})"

    def op_det(self, s, k):
        d = self.dim()
        return f"det({self.expr((d, d), k)})"

    def op_logdet(self, s, k):
        return f"logdet({self.regular(self.dim(), k)})"

    def op_sum_kron(self, s, k):
        # kron of two matrices or of two vectors (the language refuses the mixed case)
        if self.vector_kron and self.draw(st.booleans()):
            a, b = (self.dim(),), (self.dim(),)
        else:
            a, b = (self.dim(), self.dim()), (self.dim(), self.dim())
        return f"sum(kron({self.expr(a, k)}, {self.expr(b, k)}) ** 2)"

    def op_trace_kron(self, s, k):
        a, b = self.dim(), self.dim()
        return f"trace(kron({self.expr((a, a), k)}, {self.expr((b, b), k)}))"

    def op_vec_inner(self, s, k):
        shape = (self.dim(), self.dim())
        return f"(vec({self.expr(shape, k)}) @ vec({self.expr(shape, k)}))"

    # vectors
    def op_matvec(self, s, k):
        b = self.dim()
        return f"({self.expr((s[0], b), k)} @ {self.expr((b,), k)})"

    def op_vecmat(self, s, k):
        b = self.dim()
        return f"({self.expr((b,), k)} @ {self.expr((b, s[0]), k)})"

    def op_softmax(self, s, k):
        return f"softmax({self.expr(s, k)})"

    def op_diag(self, s, k):
        return f"diag({self.expr((s[0], s[0]), k)})"

    def op_solve_vec(self, s, k):
        return f"solve({self.regular(s[0], k)}, {self.expr(s, k)})"

    # matrices
    def op_matmul(self, s, k):
        c = self.dim()
        return f"({self.expr((s[0], c), k)} @ {self.expr((c, s[1]), k)})"

    def op_transpose(self, s, k):
        return f"({self.expr((s[1], s[0]), k)}).T"

    def op_outer(self, s, k):
        return f"outer({self.expr((s[0],), k)}, {self.expr((s[1],), k)})"

    def op_solve_mat(self, s, k):
        return f"solve({self.regular(s[0], k)}, {self.expr(s, k)})"

    def op_diagm(self, s, k):
        return f"diagm({self.expr((s[0],), k)})"

    def op_inv(self, s, k):
        return f"inv({self.regular(s[0], k)})"

    def op_mpow(self, s, k):
        return f"mpow({self.expr(s, k)}, {self.draw(st.sampled_from(['2', '3']))})"

    # --- NumPy's broadcasting, constant indexing and dims as numbers (issue 8) ----------------
    # every index below is in range for any size the fuzzer draws (all sizes are >= 2)

    def op_bias(self, s, k):
        """A matrix plus a vector along its last axis, in either order."""
        m, v = self.expr(s, k), self.expr((s[1],), k)
        return f"({m} + {v})" if self.draw(st.booleans()) else f"({v} - {m})"

    def op_column_axis(self, s, k):
        return f"({self.expr(s, k)} * {self.expr((s[0],), k)}[:, None])"

    def op_row_axis(self, s, k):
        return f"({self.expr(s, k)} / {self.positive((s[1],), k)}[None, :])"

    def op_matrix_column(self, s, k):
        j = self.draw(st.sampled_from(["0", "-1", "1"]))
        return f"{self.expr((s[0], self.dim()), k)}[:, {j}]"

    def op_matrix_row(self, s, k):
        i = self.draw(st.sampled_from(["0", "-1"]))
        return f"{self.expr((self.dim(), s[0]), k)}[{i}]"

    def op_entry(self, s, k):
        if self.draw(st.booleans()):
            return f"{self.expr((self.dim(),), k)}[{self.draw(st.sampled_from(['0', '-1']))}]"
        return f"{self.expr((self.dim(), self.dim()), k)}[1, -2]"

    def op_block(self, s, k):
        """A (2, ...) or (..., 2) block: the literal dim of the fuzzer is 2."""
        if 2 not in s:
            return self.op_scale(s, k)
        rows = self.draw(st.sampled_from(["-2:", ":2", "0:2"])) if s[0] == 2 else ":"
        if len(s) == 1:
            return f"{self.expr((self.dim(),), k)}[{rows}]"
        cols = self.draw(st.sampled_from(["-2:", ":2", "1:3"])) if s[1] == 2 else ":"
        src = (
            self.dim() if s[0] == 2 else s[0],
            self.draw(st.sampled_from(["p", "n"])) if s[1] == 2 else s[1],
        )
        return f"{self.expr(src, k)}[{rows}, {cols}]"

    def op_dim_number(self, s, k):
        named = [d for d in s if isinstance(d, str)]
        if not named:
            return self.op_scale(s, k)
        d = self.draw(st.sampled_from(named))
        return f"({d} / 2 * {self.expr(s, k)} + pi)"

    ENTRYWISE_OPS = ENTRYWISE_OPS + ["dim_number"]
    SCALAR_OPS = SCALAR_OPS + ["entry"]
    VECTOR_OPS = VECTOR_OPS + ["matrix_column", "matrix_row", "block"]
    MATRIX_OPS = MATRIX_OPS + ["bias", "column_axis", "row_axis", "block"]
    SQUARE_OPS = SQUARE_OPS + ["bias", "column_axis", "row_axis"]

    # --- the block ---------------------------------------------------------------------------

    def block(self, target_kind: str) -> DrawnBlock:
        for i in range(self.draw(st.integers(0, 2))):
            shape = self.draw(st.sampled_from([(), (self.dim(),), (self.dim(), self.dim())]))
            self.defs.append((f"R{i}", self.expr(shape, self.max_depth - 1), shape))
        shape = {"scalar": (), "vector": (self.dim(),), "matrix": (self.dim(), self.dim())}[
            target_kind
        ]
        body = self.expr(shape, self.max_depth)
        if target_kind == "scalar" and body[0].isdigit():
            body = f"{body} * {self.symbol(())}"
        # only the definitions the target reaches stay in the block
        reach = set()
        pending = [body]
        while pending:
            txt = pending.pop()
            for name, dtext, _ in self.defs:
                if name not in reach and re.search(rf"\b{name}\b", txt):
                    reach.add(name)
                    pending.append(dtext)
        used = {
            n
            for n in self.decls
            if re.search(rf"\b{n}\b", body)
            or any(re.search(rf"\b{n}\b", t) for m, t, _ in self.defs if m in reach)
        }
        if not used:  # a target made of constants only: give it a variable to depend on
            name = self.symbol(shape)
            body = f"({body} + {name})" if shape else f"({body}) * {name}"
            used = {name}
        lines = []
        for name, (s, words) in self.decls.items():
            if name not in used:
                continue
            dims = (
                "()"
                if not s
                else "(" + ", ".join(str(d) for d in s) + ("," if len(s) == 1 else "") + ")"
            )
            lines.append(f"{name}: {dims}" + (f" {words}" if words else ""))
        for name, dtext, _ in self.defs:
            if name in reach:
                lines.append(f"{name} = {dtext}")
        lines.append(f"f = {body}")
        names = sorted(used)
        n_wrt = self.draw(st.integers(1, min(2, len(names))))
        wrt = tuple(self.draw(st.permutations(names))[:n_wrt])
        return DrawnBlock("\n".join(lines), wrt, target_kind, "", tuple(self.ops))


@st.composite
def blocks(
    draw,
    max_depth: int = 3,
    array_targets: bool = True,
    broadcast_add: bool = True,
    vector_kron: bool = True,
):
    """A random well-shaped block with a scalar (or vector/matrix) target and 1-2 variables.

    `broadcast_add` draws `array + scalar` sums and `vector_kron` kron of two vectors: both
    once gave wrong numbers (tests/core/ENGINE_BUGS.md, bugs 1 and 5, fixed); switch one off
    to keep the fuzzer green while such a bug is open.
    """
    kinds = ["scalar", "scalar", "scalar", "vector", "matrix"] if array_targets else ["scalar"]
    kind = draw(st.sampled_from(kinds))
    return _Gen(draw, max_depth, broadcast_add, vector_kron).block(kind)


_NAME = re.compile(r"\b[A-Za-z_][A-Za-z0-9_]*\b")


@st.composite
def mutants(draw, max_depth: int = 2):
    """A near-valid mutation of a valid block: a character deleted, a dim swapped in a
    declaration, or one occurrence of a name changed."""
    b = draw(blocks(max_depth=max_depth))
    text = b.text
    kind = draw(st.sampled_from(["delete", "dim", "name"]))
    if kind == "delete":
        i = draw(st.integers(0, len(text) - 1))
        text = text[:i] + text[i + 1 :]
    elif kind == "dim":
        lines = text.split("\n")
        decl_idx = [i for i, line in enumerate(lines) if ":" in line and "(" in line]
        i = draw(st.sampled_from(decl_idx))
        spots = list(re.finditer(r"(?<=[(, ])(n|p|k|2)(?=[,)])", lines[i]))
        if spots:
            m = draw(st.sampled_from(spots))
            new = draw(st.sampled_from([d for d in ("n", "p", "k", "2", "3") if d != m.group()]))
            lines[i] = lines[i][: m.start()] + new + lines[i][m.end() :]
        else:  # a scalar: make it a vector
            lines[i] = lines[i].replace("()", "(n,)", 1)
        text = "\n".join(lines)
    else:
        spots = [m for m in _NAME.finditer(text)]
        m = draw(st.sampled_from(spots))
        declared = sorted({line.split(":")[0].strip() for line in text.split("\n") if ":" in line})
        new = draw(st.sampled_from(declared + [m.group() + "q", m.group().upper(), "T", "d"]))
        text = text[: m.start()] + new + text[m.end() :]
    return DrawnBlock(text, b.wrt, b.target_kind, kind, b.ops)
