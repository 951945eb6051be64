"""Formula-language text of an expression (NumPy syntax): `parse(text(e)) == e`."""

from __future__ import annotations

from .. import expr as E
from ..entrywise import EXTRA_ENTRYWISE
from . import precedence as P
from .axis_printing import TextAxisMixin
from .base import (
    Printer,
    chain_segments,
    fraction_parts,
    join_terms,
    number_text,
    segment_shape,
    split_numerator,
)


class TextPrinter(TextAxisMixin, Printer):
    """Prints in the formula language; subclasses change the function spellings."""

    default_settings: dict = {}
    names = {
        "trace": "trace", "det": "det", "logdet": "logdet", "inv": "inv", "solve": "solve",
        "kron": "kron", "vec": "vec", "diag": "diag", "diagm": "diagm", "sum": "sum",
        "norm": "norm", "logsumexp": "logsumexp", "softmax": "softmax", "outer": "outer",
        "eye": "eye", "ones": "ones", "zeros": "zeros", "mpow": "mpow",
        "commutation": "commutation",
    }  # fmt: skip

    def paren(self, e: E.Expr, level: int) -> str:
        text = self._print(e)
        return f"({text})" if P.text_precedence(e) < level else text

    def fn(self, name: str, *args: str) -> str:
        return f"{self.names[name]}({', '.join(args)})"

    def _print_Symbol(self, e):
        return e.name

    def _print_Named(self, e):
        return e.name

    def _print_Differential(self, e):
        return f"d({e.symbol.name})"

    def _print_D(self, e):
        return f"d({self._print(e.args[0])})"

    def _print_Const(self, e):
        v = e.value
        if v < 0:
            return "-" + self._print_Const(E.Const(-v))
        parts = fraction_parts(v)
        if parts is not None:
            return f"{parts[0]}/{parts[1]}"
        return number_text(v)

    def dims(self, shape) -> list[str]:
        return [self.dim(d) for d in shape if d is not None]

    def dim(self, d) -> str:
        return str(d)

    def _print_Identity(self, e):
        return self.fn("eye", self.dim(e.args[0]))

    def _print_Ones(self, e):
        return self.fn("ones", *self.dims(e.shape))

    def _print_Zero(self, e):
        return self.fn("zeros", *self.dims(e.shape))

    def _print_Commutation(self, e):
        return self.fn("commutation", self.dim(e.args[0]), self.dim(e.args[1]))

    def _print_Add(self, e):
        return join_terms(self.paren(t, P.ADD) for t in e.args)

    def _print_Mul(self, e):
        coef, num, den = split_numerator(e)
        if coef < 0:
            rest = E.mul(E.Const(-coef), *num, *(E.power(d, E.Const(-1)) for d in den))
            return "-" + self.paren(rest, P.PRODUCT)
        parts = []
        over = None  # N / 2 as written, never 0.5 * N
        split = fraction_parts(coef)
        if split is not None and num:
            if split[0] != "1":
                parts.append(split[0])
            over = str(split[1])
        elif coef != 1 or not num:
            if split is not None:
                parts.append(f"({split[0]}/{split[1]})")
            else:
                parts.append(self._print(E.Const(coef)))
        for f in num:
            parts.append(self.paren(f, P.PRODUCT + 1 if type(f) is not E.Power else P.PRODUCT))
        text = " * ".join(parts)
        if over is not None:
            text += " / " + over
        for d in den:
            text += " / " + self.paren(d, P.PRODUCT + 1)
        return text

    def _print_MatMul(self, e):
        segments = chain_segments(e.args)
        scalars, vectors = [], []
        for seg in segments:
            s = self.segment(seg)
            if E.is_scalar_shape(segment_shape(seg)):
                scalars.append(s if len(seg) == 1 or len(segments) == 1 else f"({s})")
            else:
                vectors.append((s, seg))
        if len(vectors) == 2:
            core = self.fn("outer", vectors[0][0], vectors[1][0])
        elif len(vectors) == 1:
            core = vectors[0][0]
            if scalars and len(vectors[0][1]) > 1:
                core = f"({core})"
        else:
            core = ""
        parts = scalars + ([core] if core else [])
        return " * ".join(parts)

    def segment(self, seg) -> str:
        texts = []
        for f in seg:
            if type(f) is E.Transpose and E.is_vector_shape(f.shape):
                f = f.args[0]
            texts.append(self.paren(f, P.PRODUCT + 1))
        return " @ ".join(texts)

    def _print_Transpose(self, e):
        a = e.args[0]
        if not E.is_matrix_shape(a.shape):
            return self._print(a)
        return self.paren(a, P.ATOM) + ".T"

    def _print_Power(self, e):
        a, k = e.args
        return f"{self.paren(a, P.ATOM)}**{self.paren(k, P.ATOM)}"

    def _print_Func(self, e):
        if e.name in EXTRA_ENTRYWISE:
            return self.extra_func(e)
        return f"{e.name}({self._print(e.arg)})"

    def _print_Trace(self, e):
        a = e.args[0]
        if type(a) in (E.Identity, E.Ones):  # tr(I_n) is n, as the LaTeX shows it
            return self.size_product(a.shape[:1])
        return self.fn("trace", self._print(a))

    def size_product(self, dims) -> str:
        """Dims used as a number: `n`, or `(m * n)` when it is a product (kept one factor)."""
        parts = [self.dim(d) for d in dims if d is not None]
        joined = " * ".join(parts)
        return f"({joined})" if len(parts) > 1 or "*" in joined else joined

    def _print_Det(self, e):
        return self.fn("det", self._print(e.args[0]))

    def _print_LogDet(self, e):
        return self.fn("logdet", self._print(e.args[0]))

    def _print_Inverse(self, e):
        return self.fn("inv", self._print(e.args[0]))

    def _print_Solve(self, e):
        return self.fn("solve", self._print(e.args[0]), self._print(e.args[1]))

    def _print_Kron(self, e):
        a, b = e.args
        if E.is_vector_shape(a.shape) and E.is_vector_shape(b.shape):
            if (a.shape[1] is None) == (b.shape[1] is None):
                # two columns, or two rows (xᵀ ⊗ yᵀ = (x ⊗ y)ᵀ): NumPy's kron of 1-D arrays
                return self.fn("kron", self._print(a), self._print(b))
        # a row beside a matrix (xᵀ ⊗ I) or a column beside one (I ⊗ x) is spelled as the 2-D
        # array it is, so that the text keeps the transpose the LaTeX shows
        return self.fn("kron", self.kron_operand(a), self.kron_operand(b))

    def kron_operand(self, f: E.Expr) -> str:
        if not E.is_vector_shape(f.shape):
            return self._print(f)
        axis = "[:, None]" if f.shape[1] is None else "[None, :]"
        return self.paren(f, P.ATOM) + axis

    def _print_Vec(self, e):
        return self.fn("vec", self._print(e.args[0]))

    def _print_Unvec(self, e):
        g, r, c = e.args
        return f"unvec({self._print(g)}, {r}, {c})"

    def _print_Diag(self, e):
        return self.fn("diag", self._print(e.args[0]))

    def _print_Diagm(self, e):
        return self.fn("diagm", self._print(e.args[0]))

    def _print_Tril(self, e):
        return f"{self.names.get('tril', 'tril')}({self._print(e.args[0])})"

    def _print_Sum(self, e):
        a = e.args[0]
        if type(a) is E.Ones:  # the number of entries, as the LaTeX shows it
            return self.size_product(a.shape)
        return self.fn("sum", self._print(a))

    def _print_Norm(self, e):
        return self.fn("norm", self._print(e.args[0]))

    def _print_LogSumExp(self, e):
        return self.fn("logsumexp", self._print(e.args[0]))

    def _print_Softmax(self, e):
        return self.fn("softmax", self._print(e.args[0]))

    def _print_MatPow(self, e):
        return self.fn("mpow", self._print(e.args[0]), str(e.args[1]))

    # --- complex arithmetic ----------------------------------------------------------------

    def _print_Conj(self, e):
        return f"conj({self._print(e.args[0])})"

    def _print_Real(self, e):
        return f"real({self._print(e.args[0])})"

    def _print_Imag(self, e):
        return f"imag({self._print(e.args[0])})"

    def _print_Abs(self, e):
        return f"abs({self._print(e.args[0])})"

    def _print_ImagUnit(self, e):
        return "1j"

    def _print_KronContract(self, e):
        g, other, r, c, side = e.args
        return f"kron_contract_{side}({self._print(g)}, {self._print(other)})"

    def _print_SizeOf(self, e):
        return self.dim(e.dim)

    def _print_Pi(self, e):
        return "pi"

    def _print_Index(self, e):
        a, rows, cols = e.args
        sels = [self.selector(s) for s in (rows, cols) if s is not None]
        if E.is_matrix_shape(a.shape) and sels[-1] == ":":
            sels.pop()  # X[i] is X[i, :]
        return f"{self.paren(a, P.ATOM)}[{', '.join(sels)}]"

    def selector(self, sel) -> str:
        if sel[0] == "at":
            return str(sel[1])
        start, stop = (
            "" if b is None else self.dim(b) if isinstance(b, E.Dim) else str(b) for b in sel[1:]
        )
        return f"{start}:{stop}"


def text(e: E.Expr) -> str:
    """Formula-language text of an expression.

    >>> from gradwright.language import parse_block
    >>> text(parse_block("x: (n,)\\nA: (n, n)\\nf = x @ A @ x").expr)
    'x @ A @ x'
    """
    return TextPrinter().doprint(e)
