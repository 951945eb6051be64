"""Layout of printed math: long expressions broken over lines at operators, and rule names
turned into words and formulas (formulas in math mode, never inside `\\text{}`).

The width of a piece of LaTeX is estimated in ems from its glyphs (common practice for a
monospace-free estimate: letters about half an em, operators with their spacing about one).
"""

from __future__ import annotations

import html
import re

from .. import expr as E
from . import precedence as P
from .base import split_numerator
from .latex import THIN, LatexPrinter

#: widths in em of the LaTeX commands that draw something; unknown commands count as one glyph
_COMMAND_WIDTH = {
    "left": 0.0, "right": 0.0, "Bigl": 0.0, "Bigr": 0.0, "displaystyle": 0.0, "mathrm": 0.0,
    "operatorname": 0.0, "mathbf": 0.0, "text": 0.0, "frac": 0.0, "quad": 1.0, "qquad": 2.0,
    ",": 0.17, ";": 0.28, "top": 0.6, "circ": 0.9, "otimes": 1.1, "cdot": 0.6, "times": 1.0,
    "sum": 1.2, "log": 1.3, "det": 1.4, "exp": 1.5, "sin": 1.3, "cos": 1.5, "tanh": 2.2,
    "sqrt": 1.0, "langle": 0.4, "rangle": 0.4, "lVert": 0.5, "rVert": 0.5, "color": 0.0,
    "small": 0.0,
}  # fmt: skip

_TOKEN = re.compile(r"\\([A-Za-z]+|.)|([A-Za-z0-9])|([+\-=<>])|([()\[\]|])|([{}^_&])|(\s)|(.)")


def latex_width(text: str) -> float:
    """A rough rendered width of LaTeX math in ems (scripts count at 70 %)."""
    width = 0.0
    depth: list[float] = [1.0]
    pending = 1.0  # the scale of the next group
    for m in _TOKEN.finditer(text):
        cmd, glyph, op, fence, struct, space, other = m.groups()
        scale = depth[-1]
        if cmd is not None:
            width += _COMMAND_WIDTH.get(cmd, 0.6) * scale
        elif glyph is not None:
            width += 0.55 * scale
        elif op is not None:
            width += (1.0 if scale == 1.0 else 0.6) * scale
        elif fence is not None:
            width += 0.4 * scale
        elif struct in ("^", "_"):
            pending = 0.7
            continue
        elif struct == "{":
            depth.append(depth[-1] * pending)
        elif struct == "}":
            if len(depth) > 1:
                depth.pop()
        elif other is not None:
            width += 0.6 * scale
        pending = 1.0
    return width


class LineBreaker:
    """Breaks an expression's LaTeX into lines no wider than `budget` ems, at top-level
    `+`/`-`, between product factors, and inside long parenthesized arguments."""

    #: past this many characters a formula is not broken (it is unreadable either way, and
    #: breaking a large shared DAG would reprint its parts many times)
    MAX_CHARACTERS = 6_000

    def __init__(self, budget: float = 40.0, printer: LatexPrinter | None = None):
        self.budget = budget
        self.printer = printer or LatexPrinter()
        self._texts: dict = {}
        self._widths: dict = {}

    def _text(self, e: E.Expr) -> str:
        hit = self._texts.get(id(e))
        if hit is None:
            hit = (e, self.printer._print(e))
            self._texts[id(e)] = hit
        return hit[1]

    def lines(self, e: E.Expr) -> list[str]:
        text = self.printer.doprint(e)
        if (
            len(text) > self.MAX_CHARACTERS  # first: measuring a huge text is itself slow
            or text.startswith(r"\text{(too large")
            or latex_width(text) <= self.budget
        ):
            return [text]
        return self._lines(e, text)

    def _fits(self, text: str) -> bool:
        width = self._widths.get(text)
        if width is None:
            width = self._widths[text] = latex_width(text)
        return width <= self.budget

    def _lines(self, e: E.Expr, text: str) -> list[str]:
        if self._fits(text):
            return [text]
        t = type(e)
        if t is E.Add:
            pieces = []
            for i, term in enumerate(e.args):
                sub = self._child(term, P.ADD)
                if i and sub[0].startswith("-"):
                    pieces.append((" - ", [sub[0][1:], *sub[1:]]))
                else:
                    pieces.append((" + " if i else "", sub))
            return self._pack(pieces)
        if t is E.MatMul:
            pieces = [
                (THIN if i else "", self._child(f, P.PRODUCT + 1)) for i, f in enumerate(e.args)
            ]
            return self._pack(pieces)
        if t is E.Mul:
            coef, num, den = split_numerator(e)
            if coef < 0 and not den:
                rest = E.mul(E.Const(-coef), *num)
                sub = self._child(rest, P.ADD + 1)
                return ["-" + sub[0], *sub[1:]]
            if (den or coef.denominator != 1) and num:
                # c/n times a long product: the fraction in front, the product broken after
                # it (breaking inside \frac{...}{n} would leave its braces open on each line)
                scale = E.mul(E.Const(coef), *(E.power(d, E.Const(-1)) for d in den))
                rest = E.mul(*num)
                return self._pack(
                    [("", [self.printer.doprint(scale)]), (THIN, self._child(rest, P.PRODUCT + 1))]
                )
            arrays = [f for f in num if not f.is_scalar]
            if not den and coef == 1 and len(arrays) > 1:
                scal = [f for f in num if f.is_scalar]
                pieces = [
                    (THIN if i else "", self._child(f, P.PRODUCT + 1)) for i, f in enumerate(scal)
                ]
                for i, f in enumerate(arrays):
                    sep = r" \circ " if i else (THIN if scal else "")
                    pieces.append((sep, self._child(f, P.PRODUCT + 1)))
                return self._pack(pieces)
        return self._around_child(e, text)

    def _narrow(self, by: float, c: E.Expr, text: str) -> list[str]:
        """c's lines with room left for what goes around them on the same line."""
        saved = self.budget
        self.budget = max(8.0, saved - by)
        try:
            return self._lines(c, text)
        finally:
            self.budget = saved

    def _child(self, c: E.Expr, level: int) -> list[str]:
        text = self._text(c)
        if P.latex_precedence(c) < level:
            if self._fits(text):
                return [rf"\left({text}\right)"]
            inner = self._narrow(2.5, c, text)  # \Bigl( ... \Bigr) and an operator before it
            return (
                [r"\Bigl(" + inner[0], *inner[1:-1], inner[-1] + r"\Bigr)"]
                if len(inner) > 1
                else [r"\Bigl(" + inner[0] + r"\Bigr)"]
            )
        return self._narrow(1.5, c, text)  # an operator may start the line

    def _around_child(self, e: E.Expr, text: str) -> list[str]:
        """`head\\left(child\\right)tail` with the child broken inside big parentheses."""
        best = None
        for c in e.children:
            inner = self._text(c)
            wrapped = rf"\left({inner}\right)"
            if text.count(wrapped) == 1 and (best is None or len(inner) > len(best[1])):
                best = (c, inner, wrapped)
        if best is None:
            return self._around_plain_child(e, text)
        c, inner, wrapped = best
        head, _, tail = text.partition(wrapped)
        if not _balanced(head):  # inside a \frac{...}: a line must close what it opens
            return [text]
        sub = self._narrow(latex_width(head) + latex_width(tail) + 1.5, c, inner)
        if len(sub) == 1:
            return [text]
        return [head + r"\Bigl(" + sub[0], *sub[1:-1], sub[-1] + r"\Bigr)" + tail]

    def _around_plain_child(self, e: E.Expr, text: str) -> list[str]:
        """`head child tail` where the child prints its own parentheses (`\\frac{1}{2}\\,
        \\operatorname{tr}(...)`): the child is broken where it can be, the rest kept around it."""
        best = None
        for c in e.children:
            inner = self._text(c)
            if text.count(inner) == 1 and not self._fits(inner):
                if best is None or len(inner) > len(best[1]):
                    best = (c, inner)
        if best is None:
            return [text]
        c, inner = best
        head, _, tail = text.partition(inner)
        if not _balanced(head):
            return [text]
        sub = self._narrow(latex_width(head) + latex_width(tail), c, inner)
        if len(sub) == 1:
            return [text]
        return [head + sub[0], *sub[1:-1], sub[-1] + tail]

    def _pack(self, pieces: list[tuple[str, list[str]]]) -> list[str]:
        out: list[str] = []
        current = ""
        for sep, sub in pieces:
            first = sub[0]
            candidate = current + sep + first
            if current and not self._fits(candidate):
                out.append(current)
                candidate = sep.strip() + " " + first if sep.strip() else first
            if len(sub) == 1:
                current = candidate
                continue
            out.append(candidate)
            out.extend(sub[1:-1])
            current = sub[-1]
        if current:
            out.append(current)
        return out


def _balanced(latex: str) -> bool:
    """Every `{` closed (escaped braces aside): a line of a broken formula stands alone."""
    depth = 0
    for m in re.finditer(r"\\[{}]|[{}]", latex):
        if m.group() == "{":
            depth += 1
        elif m.group() == "}":
            depth -= 1
    return depth == 0


def broken_lines(e: E.Expr, budget: float = 40.0) -> list[str]:
    """The LaTeX of e as lines of at most about `budget` ems.

    >>> from gradwright.language import parse_block
    >>> len(broken_lines(parse_block("x: (n,)\\nf = sum(x) + sum(x**2)").expr))
    1
    """
    return LineBreaker(budget).lines(e)


# --- rule names ------------------------------------------------------------------------------

_FUNCTION_NAMES = ("tr", "vec", "det", "logdet", "diag", "diagm", "sum", "kron", "exp", "log")
_FORMULA_SUBS = (
    (re.compile(r"\b(" + "|".join(_FUNCTION_NAMES) + r")\("), r"\\operatorname{\1}("),
    (re.compile(r"\bd([A-Za-z])\b"), r"\\mathrm{d}\1"),
    (re.compile("ᵀ"), r"^{\\top}"),
    (re.compile("⁻¹"), r"^{-1}"),
    (re.compile("⊗"), r"\\otimes "),
    (re.compile("[∘⊙]"), r"\\circ "),
    (re.compile(r"\s*=\s*"), " = "),
    # juxtaposed factors keep a thin space: A dX B, not "AdXB"
    (re.compile(r"(?<=[A-Za-z0-9)}])\s+(?=[A-Za-z(\\])(?!\\otimes|\\circ)"), r"\\,"),
)


def _is_formula(piece: str) -> bool:
    return "=" in piece or bool(re.search(r"[ᵀ⊗∘⊙⁻]|\w\(", piece))


def rule_segments(words: str) -> list[tuple[str, str]]:
    """A rule's name as ("text", words) and ("math", LaTeX) pieces, in order.

    >>> rule_segments("cyclic: tr(A B) = tr(B A)")
    [('text', 'cyclic: '), ('math', '\\\\operatorname{tr}(A B) = \\\\operatorname{tr}(B A)')]
    """
    out: list[tuple[str, str]] = []
    for n, part in enumerate(words.split("; ")):
        if n:
            out.append(("text", "; "))
        head, colon, rest = part.partition(": ")
        if not colon:
            out.append(("text", part))
            continue
        out.append(("text", head + ": "))
        for i, item in enumerate(rest.split(", ")):
            if i:
                out.append(("text", ", "))
            if _is_formula(item):
                math = item
                for pattern, repl in _FORMULA_SUBS:
                    math = pattern.sub(repl, math)
                out.append(("math", math))
            else:
                out.append(("text", item))
    merged: list[tuple[str, str]] = []
    for kind, value in out:
        if merged and merged[-1][0] == kind == "text":
            merged[-1] = ("text", merged[-1][1] + value)
        else:
            merged.append((kind, value))
    return merged


_TEXT_ESCAPES = {
    "\\": r"\textbackslash{}", "{": r"\{", "}": r"\}", "_": r"\_", "^": r"\^{}", "#": r"\#",
    "$": r"\$", "%": r"\%", "&": r"\&", "~": r"\~{}",
    "ᵀ": "T", "⊗": "x", "∘": "o", "⊙": "o", "⁻": "-", "¹": "1", "∂": "d",
}  # fmt: skip


def text_escape(words: str) -> str:
    """Words safe inside `\\text{}` for both TeX and MathJax (no math, no Unicode symbols)."""
    return "".join(_TEXT_ESCAPES.get(ch, ch) for ch in words)


def rule_math(words: str) -> str:
    """The rule as LaTeX for use in math mode: words in `\\text{}`, formulas as math."""
    parts = []
    for kind, value in rule_segments(words):
        if kind == "text":
            parts.append(rf"\text{{{text_escape(value)}}}")
        else:
            parts.append(value)
    return " ".join(parts)


#: an equation inside a rule's words ("0 at x = 0"): it wraps as one word
_WORDS_EQUATION = re.compile(r"(?<=\S) = (?=\S)")
_WORD_HYPHEN = re.compile(r"(?<=[A-Za-z])-(?=[A-Za-z])")


def rule_lines(words: str, width: int = 44) -> list[str]:
    r"""A rule as lines of LaTeX for math mode, about `width` characters each: words wrap
    between words ("x = 0" counts as one), a formula is never split.

    >>> rule_lines("sum rule; product rule", 12)
    ['\\text{sum rule;}', '\\text{product rule}']
    """
    units: list[tuple[str, str, int]] = []  # (LaTeX, kind, visible length)
    for kind, value in rule_segments(words):
        if kind == "math":
            units.append((value, "math", len(value) // 2))
            continue
        for word in re.findall(r"\S+(?: = \S+)*\s*", value):  # "x = 0" is one word
            units.append((word, "text", len(word)))
    lines: list[list[tuple[str, str]]] = [[]]
    used = 0
    for latex, kind, size in units:
        if used + size > width and lines[-1]:
            lines.append([])
            used = 0
        lines[-1].append((latex, kind))
        used += size
    out = []
    for line in lines:
        parts, words_run = [], ""
        for latex, kind in line:
            if kind == "text":
                words_run += latex
                continue
            if words_run:
                parts.append(f"\\text{{{text_escape(words_run)}}}")
                words_run = ""
            parts.append(latex)
        if words_run.strip():
            parts.append(f"\\text{{{text_escape(words_run.rstrip())}}}")
        out.append(" ".join(parts))
    return [line for line in out if line]


def rule_stack(words: str, width: int = 26) -> str:
    """The rule for a column beside the math: its lines stacked in an array when it wraps
    (a paper page has no room for a rule written on one line)."""
    lines = rule_lines(words, width)
    if len(lines) == 1:
        return lines[0]
    return "\\begin{array}{l}" + " \\\\ ".join(lines) + "\\end{array}"


def rule_html(words: str) -> str:
    """The rule as HTML: escaped words, formulas as inline math `\\( ... \\)`."""
    parts = []
    for kind, value in rule_segments(words):
        if kind == "text":
            value = _WORDS_EQUATION.sub("\u00a0=\u00a0", value)
            # a hyphenated word ("left-hand") wraps as one word: a non-breaking hyphen
            parts.append(html.escape(_WORD_HYPHEN.sub("\u2011", value)))
        else:
            parts.append(rf"<span class='gradwright-rule-math'>\({html.escape(value)}\)</span>")
    return "".join(parts)
