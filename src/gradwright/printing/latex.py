"""LaTeX in the trade's notation: transpose, inverse, tr, det, Kronecker, Hadamard, vec."""

from __future__ import annotations

import re

from .. import expr as E
from ..entrywise import EXTRA_ENTRYWISE
from . import precedence as P
from .axis_printing import LatexAxisMixin
from .base import Printer, fraction_parts, join_terms, number_text, split_numerator

#: between the factors of a product, so that `days S` or `dS S` never read as one word
THIN = r"\,"

GREEK = {
    "alpha", "beta", "gamma", "delta", "epsilon", "zeta", "eta", "theta", "iota", "kappa",
    "lambda", "mu", "nu", "xi", "pi", "rho", "sigma", "tau", "upsilon", "phi", "chi", "psi",
    "omega", "Gamma", "Delta", "Theta", "Lambda", "Xi", "Pi", "Sigma", "Upsilon", "Phi", "Psi",
    "Omega",
}  # fmt: skip
_GREEK_ALIASES = {"lam": "lambda", "lmbda": "lambda", "eps": "epsilon"}

FUNC_LATEX = {
    "exp": r"\exp",
    "log": r"\log",
    "sin": r"\sin",
    "cos": r"\cos",
    "tanh": r"\tanh",
    "sigmoid": r"\sigma",
    "softplus": r"\operatorname{softplus}",
}


def symbol_latex(name: str) -> str:
    """`mu` -> \\mu, `W1` -> W_{1}, `x_hat` -> x_{\\mathrm{hat}}, `loss` -> \\mathrm{loss}."""
    m = re.fullmatch(r"([A-Za-z]+?)_?(\d+)", name)
    if m:
        return f"{symbol_latex(m.group(1))}_{{{m.group(2)}}}"
    if "_" in name:
        head, tail = name.split("_", 1)
        if head:
            inner = tail if len(tail) == 1 else rf"\mathrm{{{tail}}}"
            if tail in GREEK:
                inner = "\\" + tail
            return f"{symbol_latex(head)}_{{{inner}}}"
    base = _GREEK_ALIASES.get(name, name)
    if base in GREEK:
        return "\\" + base
    if len(name) == 1:
        return name
    return rf"\mathrm{{{name}}}"


def latex_number(text: str) -> str:
    """1.5e-7 -> 1.5 \\times 10^{-7}; plain decimals unchanged."""
    mantissa, e, exponent = text.partition("e")
    if not e:
        return text
    power = f"10^{{{int(exponent)}}}"
    return power if mantissa == "1" else rf"{mantissa} \times {power}"


def _reads_as_number(e: E.Expr) -> bool:
    """A dim's size, pi, tr(I) or sum(1): written in front of the other factors."""
    if type(e).__name__ in ("SizeOf", "Pi"):
        return True
    return type(e) in (E.Trace, E.Sum) and type(e.args[0]) in (E.Identity, E.Ones)


def differential_latex(name: str) -> str:
    """d X, with a thin space before a multi-letter name (d days, not "ddays")."""
    return r"\mathrm{d}" + (THIN if name.startswith(r"\mathrm") else "") + name


def dim_latex(d) -> str:
    return r" \cdot ".join(str(d).split("*"))


class LatexPrinter(LatexAxisMixin, Printer):
    default_settings = {
        "dim_subscripts": False,  # I_n, 1_n rather than I, 1
    }

    def too_large(self, size: int) -> str:
        return rf"\text{{(too large to show: more than {self.max_tree_size:,} parts)}}"

    def paren(self, e: E.Expr, level: int) -> str:
        text = self._print(e)
        if P.latex_precedence(e) < level:
            return rf"\left({text}\right)"
        return text

    def call(self, name: str, e: E.Expr) -> str:
        inner = self._print(e)
        if P.latex_precedence(e) >= P.ATOM and type(e) in (E.Symbol, E.Named, E.Differential):
            return rf"{name}({inner})"
        return rf"{name}\left({inner}\right)"

    # --- leaves ------------------------------------------------------------------------------

    def _print_Symbol(self, e):
        return symbol_latex(e.name)

    def _print_Named(self, e):
        return symbol_latex(e.name)

    def _print_Differential(self, e):
        return differential_latex(symbol_latex(e.symbol.name))

    def _print_D(self, e):
        inner = e.args[0]
        if type(inner) in (E.Symbol, E.Named):
            return differential_latex(self._print(inner))
        return r"\mathrm{d}\left(" + self._print(inner) + r"\right)"

    def _print_Const(self, e):
        v = e.value
        if v < 0:
            return "-" + self._print(E.Const(-v))
        parts = fraction_parts(v)
        if parts is not None:
            return rf"\frac{{{latex_number(parts[0])}}}{{{parts[1]}}}"
        return latex_number(number_text(v))

    def _print_Identity(self, e):
        return f"I_{{{dim_latex(e.args[0])}}}" if self.settings["dim_subscripts"] else "I"

    def _print_Ones(self, e):
        r, c = e.shape
        if not self.settings["dim_subscripts"]:
            if r is None and c is not None:  # a row of ones: the transpose is part of the shape
                return r"\mathbf{1}^{\top}"
            return r"\mathbf{1}" if c is None else r"\mathbf{1}\mathbf{1}^{\top}"
        dims = [dim_latex(d) for d in (r, c) if d is not None]
        text = r"\mathbf{1}_{" + r" \times ".join(dims) + "}"
        return text + r"^{\top}" if r is None and c is not None else text

    def _print_Zero(self, e):
        return r"\mathbf{0}"

    def _print_Commutation(self, e):
        return f"K_{{{dim_latex(e.args[0])},{dim_latex(e.args[1])}}}"

    # --- sums and products ---------------------------------------------------------------------

    def _print_Add(self, e):
        texts = []
        for t in e.args:
            text = self._print(t)
            texts.append(rf"\left({text}\right)" if P.latex_precedence(t) < P.ADD else text)
        return join_terms(texts)

    def _print_Mul(self, e):
        coef, num, den = split_numerator(e)
        if coef < 0:
            rest = E.mul(E.Const(-coef), *num, *(E.power(d, E.Const(-1)) for d in den))
            inner = self._print(rest)
            if P.latex_precedence(rest) <= P.ADD:
                inner = rf"\left({inner}\right)"
            return "-" + inner
        scalars_den = [d for d in den if d.is_scalar]
        arrays_den = [d for d in den if not d.is_scalar]
        scal = [f for f in num if f.is_scalar]
        arrs = [f for f in num if not f.is_scalar]
        top: list[str] = []  # scalar factors above the fraction bar
        bottom = [self.paren(d, P.PRODUCT + 1) for d in scalars_den]
        parts = fraction_parts(coef) if coef > 0 else None
        if parts is not None:  # N/2 reads as \frac{N}{2}, never 0.5 N
            if parts[0] != "1":
                top.append(latex_number(parts[0]))
            bottom.insert(0, str(parts[1]))
        elif coef != 1:
            top.append(latex_number(number_text(coef)))
        scal.sort(key=lambda f: 0 if _reads_as_number(f) else 1)  # n log det S, not log det S n
        after: list[str] = []  # \frac{n}{2} tr(...): only numbers and names over a plain divisor
        for f in scal:
            text = self.paren(f, P.PRODUCT + 1 if type(f) is not E.MatMul else P.PRODUCT)
            simple = _reads_as_number(f) or type(f) in (E.Symbol, E.Named)
            (top if simple or scalars_den else after).append(text)
        had = []
        if arrs or arrays_den:
            level = P.PRODUCT + 1 if len(arrs) + len(arrays_den) > 1 else P.PRODUCT
            had = [self.paren(f, level) for f in arrs]
            for d in arrays_den:
                had.append(self.paren(d, P.POSTFIX + 1) + r"^{\circ -1}")
        hadamard = r" \circ ".join(had)
        rest = after + ([hadamard] if hadamard else [])
        if bottom:
            frac = rf"\frac{{{THIN.join(top) or '1'}}}{{{THIN.join(bottom)}}}"
            return THIN.join([frac, *rest])
        return THIN.join(top + rest) or "1"

    def _print_MatMul(self, e):
        return THIN.join(self.paren(f, P.PRODUCT + 1) for f in e.args)

    def _print_Kron(self, e):
        return rf"{self.paren(e.args[0], P.KRON + 1)} \otimes {self.paren(e.args[1], P.KRON + 1)}"

    def _print_Solve(self, e):
        a, b = e.args
        return f"{self.paren(a, P.POSTFIX + 1)}^{{-1}}{THIN}{self.paren(b, P.PRODUCT)}"

    # --- postfix -----------------------------------------------------------------------------

    def _print_Transpose(self, e):
        a = e.args[0]
        if type(a) is E.Inverse:
            return self.paren(a.args[0], P.POSTFIX + 1) + r"^{-\top}"
        if type(a) is E.Conj:  # the conjugate transpose
            return self.paren(a.args[0], P.POSTFIX + 1) + r"^{\mathsf{H}}"
        return self.paren(a, P.POSTFIX + 1) + r"^{\top}"

    def _print_Inverse(self, e):
        return self.paren(e.args[0], P.POSTFIX + 1) + "^{-1}"

    def _print_Power(self, e):
        a, k = e.args
        if type(k) is E.Const and k.value == E.Fraction(1, 2):
            return rf"\sqrt{{{self._print(a)}}}"
        if type(k) is E.Const and k.value < 0 and a.is_scalar:
            return rf"\frac{{1}}{{{self._print(E.power(a, E.Const(-k.value)))}}}"
        base = self.paren(a, P.POSTFIX + 1)
        exp = self._print(k)
        return f"{base}^{{{exp}}}" if a.is_scalar else rf"{base}^{{\circ {exp}}}"

    def _print_MatPow(self, e):
        return f"{self.paren(e.args[0], P.POSTFIX + 1)}^{{{e.args[1]}}}"

    # --- functions -----------------------------------------------------------------------------

    def _print_Func(self, e):
        if e.name in EXTRA_ENTRYWISE:
            return self.extra_func(e)
        if e.name == "sqrt":
            return rf"\sqrt{{{self._print(e.arg)}}}"
        return self.call(FUNC_LATEX[e.name], e.arg)

    def _print_Trace(self, e):
        a = e.args[0]
        if type(a) in (E.Ones, E.Identity):  # the number of rows
            return dim_latex(a.shape[0])
        return self.call(r"\operatorname{tr}", a)

    def _print_Det(self, e):
        return self.call(r"\det", e.args[0])

    def _print_LogDet(self, e):
        a = e.args[0]
        if E.is_spd(a) or (type(a) is E.Symbol and "hpd" in a.structure):
            return self.call(r"\log\det", a)
        return r"\log\left|\det " + self.paren(a, P.ATOM) + r"\right|"

    def _print_Vec(self, e):
        return self.call(r"\operatorname{vec}", e.args[0])

    def _print_Unvec(self, e):
        return self.call(r"\operatorname{vec}^{-1}", e.args[0])

    def _print_Diag(self, e):
        return self.call(r"\operatorname{diag}", e.args[0])

    def _print_Diagm(self, e):
        return self.call(r"\operatorname{Diag}", e.args[0])

    def _print_Tril(self, e):
        return self.call(r"\operatorname{tril}", e.args[0])

    def _print_Sum(self, e):
        a = e.args[0]
        if type(a) is E.Ones:  # the number of entries
            return " ".join(dim_latex(d) for d in a.shape if d is not None)
        return self.call(r"\operatorname{sum}", a)

    def _print_Norm(self, e):
        a = e.args[0]
        sub = "_F" if E.is_matrix_shape(a.shape) else ""
        inner = self._print(a)
        if not any(tall in inner for tall in (r"\frac", r"\left", r"\sum", r"\sqrt")):
            # MathJax draws \left\lVert around a lowercase x as two tiny bars (seen in the
            # browser); at text height the fixed-size bars are the right ones anyway
            return rf"\lVert {inner} \rVert{sub}"
        return rf"\left\lVert {inner} \right\rVert{sub}"

    def _print_LogSumExp(self, e):
        return self.call(r"\operatorname{logsumexp}", e.args[0])

    def _print_Softmax(self, e):
        return self.call(r"\operatorname{softmax}", e.args[0])

    # --- complex arithmetic ----------------------------------------------------------------

    def _print_Conj(self, e):
        return rf"\overline{{{self._print(e.args[0])}}}"

    def _print_Real(self, e):
        return self.call(r"\operatorname{Re}", e.args[0])

    def _print_Imag(self, e):
        return self.call(r"\operatorname{Im}", e.args[0])

    def _print_Abs(self, e):
        return rf"\left|{self._print(e.args[0])}\right|"

    def _print_ImagUnit(self, e):
        return r"\mathrm{i}"

    def _print_SizeOf(self, e):
        return dim_latex(e.dim)

    def _print_Pi(self, e):
        return r"\pi"

    def _print_Index(self, e):
        a, rows, cols = e.args
        sels = []
        for sel in (rows, cols):
            if sel is None:
                continue
            if sel[0] == "at":
                sels.append(str(sel[1]))
                continue
            lo, hi = ("" if b is None else dim_latex(b) for b in sel[1:])
            sels.append(f"{lo}{{:}}{hi}")
        sep = r",\,"
        return rf"{self.paren(a, P.ATOM)}_{{[{sep.join(sels)}]}}"

    def _print_KronContract(self, e):
        # G_{[ij]} is the (i, j) block of G, sized like the other factor: the blocks of
        # G paired with B (left factor) or summed with the weights A_ij (right factor)
        g, other, _r, _c, side = e.args
        blocks = rf"{self.paren(g, P.POSTFIX + 1)}_{{[ij]}}"
        if side == "left":
            pairing = rf"\operatorname{{tr}}\left({blocks}^{{\top}}{THIN}"
            pairing += rf"{self.paren(other, P.PRODUCT + 1)}\right)"
            return rf"\left[{pairing}\right]_{{i,j}}"
        weight = rf"{self.paren(other, P.POSTFIX + 1)}_{{ij}}"
        return rf"\sum_{{i,j}} {weight}{THIN}{blocks}"


def latex(e: E.Expr, **settings) -> str:
    """LaTeX of an expression.

    >>> from gradwright.language import parse_block
    >>> latex(parse_block("X: (n, p)\\nW: (p, k)\\nf = X.T @ X @ W").expr)
    'X^{\\\\top} X W'
    """
    return LatexPrinter(settings).doprint(e)
