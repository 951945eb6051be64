"""Declarations `X: (n, k) spd` and the shapes mapping: names, shapes, dims and structure
words; a part of the reader."""

from __future__ import annotations

import ast
import builtins
import difflib
import keyword
import numbers
import re

from .. import expr as E
from ..errors import FormulaError, NotSupportedError
from .carets import _char_col
from .vocabulary import (
    _COMPOUND_OPENERS,
    _DECL_RE,
    _REAL_ONLY_WORDS,
    _RESERVED,
    _SQUARE_WORDS,
    FUNCTIONS,
    STRUCTURE_WORDS,
    _not_in_language,
)


class Declarations:
    """Mixed into the reader: the declaration lines and the shapes mapping."""

    def check_name(self, name, lineno, col, what="symbol"):
        width = len(name)
        if not name.isascii():
            self.fail(
                f"{what} names are written with ASCII letters, digits and '_' ({name!r} is "
                "not); spell it out, like alpha or mu",
                lineno,
                col,
                width,
            )
        if name.startswith("_"):
            self.fail(f"names may not start with '_' ({name!r})", lineno, col, width)
        if keyword.iskeyword(name):
            self.fail(f"{name!r} is a Python keyword and cannot name a {what}", lineno, col, width)
        if name in _RESERVED and (what == "symbol" or name in FUNCTIONS or name == "pi"):
            self.fail(
                f"{name!r} is a function or reserved word of the formula language; "
                f"choose another name for the {what}",
                lineno,
                col,
                width,
            )
        if what == "symbol" and hasattr(builtins, name):
            self.fail(
                f"{name!r} is a Python builtin; choose another name for the symbol",
                lineno,
                col,
                width,
            )

    def declaration(self, m, lineno, code):
        name = m.group(1)
        col = code.index(name)
        if name in _COMPOUND_OPENERS and keyword.iskeyword(name):  # `try:`, `else:`
            self.fail(_not_in_language(_COMPOUND_OPENERS[name]), lineno, col, len(name))
        self.check_name(name, lineno, col)
        if name in self.env:
            where = self.block.lines.get(name)
            what = "defined" if name in self.block.definitions else "declared"
            self.fail(
                f"{name} is {what} twice" + (f" (first on line {where})" if where else ""),
                lineno,
                col,
                len(name),
            )
        if name in self.block.dims:
            self.fail(f"{name} is already used as a dim name", lineno, col, len(name))
        spec_start = m.start(2)
        dims, words = self.declaration_spec(m.group(2), lineno, code, spec_start)
        self.add_symbol(name, dims, words, lineno, col)

    def declaration_spec(self, spec: str, lineno, code, offset):
        stripped = spec.strip()
        lead = offset + (len(spec) - len(spec.lstrip()))
        if stripped.startswith("("):
            close = _matching_paren(stripped)
            if close < 0:
                self.fail("unclosed '(' in the shape", lineno, lead, 1)
            shape_text, rest = stripped[: close + 1], stripped[close + 1 :]
            dims = self.shape_tuple(shape_text, lineno, lead)
            rest_offset = lead + close + 1
        elif stripped.split(None, 1)[:1] == ["scalar"]:
            dims, rest = (), stripped[len("scalar") :]
            rest_offset = lead + len("scalar")
        else:
            self.fail(
                "expected a shape after the colon, like (n, k), (n,), () or `scalar`",
                lineno,
                lead,
                max(1, len(stripped.split(None, 1)[0]) if stripped else 1),
            )
        words = []
        pos = rest_offset
        for word in re.split(r"([\s,]+)", rest):
            if not word or re.fullmatch(r"[\s,]+", word):
                pos += len(word)
                continue
            if word.startswith("=") or word.startswith(":"):
                self.fail(
                    f"a declaration gives a shape only; define a value on a line of its own, "
                    f"like {self.block_decl_hint(code)} = ...",
                    lineno,
                    pos,
                    1,
                )
            if word not in STRUCTURE_WORDS:
                close = difflib.get_close_matches(word, STRUCTURE_WORDS, n=1)
                hint = f" (did you mean {close[0]!r}?)" if close else ""
                self.fail(
                    f"unknown structure word {word!r}{hint}; known: {', '.join(STRUCTURE_WORDS)}",
                    lineno,
                    pos,
                    len(word),
                )
            if word in words:
                self.fail(f"structure word {word!r} given twice", lineno, pos, len(word))
            words.append(word)
            pos += len(word)
        return dims, words

    def block_decl_hint(self, code):
        m = _DECL_RE.match(code) if code else None
        return m.group(1) if m else "R"

    def shape_tuple(self, shape_text, lineno, col):
        try:
            node = ast.parse(shape_text, mode="eval").body
        except (SyntaxError, RecursionError, MemoryError):
            shown = shape_text if len(shape_text) <= 40 else shape_text[:37] + "..."
            self.fail(
                f"cannot read the shape {shown!r}: write dims as names or positive integers, "
                "like (n, k)",
                lineno,
                col,
                len(shape_text),
            )
        items = node.elts if isinstance(node, ast.Tuple) else [node]
        dims = []
        for item in items:
            c = col + _char_col(shape_text, item.col_offset)
            if isinstance(item, ast.Name):
                self.check_name(item.id, lineno, c, what="dim")
                if item.id in self.env:
                    self.fail(
                        f"{item.id} is a symbol and cannot also be a dim", lineno, c, len(item.id)
                    )
                dims.append(item.id)
            elif (
                isinstance(item, ast.Constant)
                and isinstance(item.value, int)
                and not isinstance(item.value, bool)
            ):
                if item.value <= 0:
                    self.fail(f"dims must be positive, got {item.value}", lineno, c, 1)
                if item.value.bit_length() > 62:
                    self.fail("the dim is too large", lineno, c, len(str(item.value)))
                dims.append(item.value)
            elif isinstance(item, ast.BinOp) and isinstance(item.op, ast.Mult):
                dims.append(self.product_dim(item, lineno, c, shape_text))
            elif isinstance(item, ast.UnaryOp) and isinstance(item.op, ast.USub):
                got = ast.get_source_segment(shape_text, item) or "a negative number"
                self.fail(f"dims must be positive, got {got}", lineno, c, len(got))
            else:
                got = ast.get_source_segment(shape_text, item) or ""
                shown = got if len(got) <= 30 else got[:27] + "..."
                self.fail(
                    f"a dim is a name like n or a positive integer like 3, got {shown}",
                    lineno,
                    c,
                    max(1, len(got)) if "\n" not in got else 1,
                )
        if len(dims) > 2:
            self.fail(
                f"not supported yet: arrays with {len(dims)} axes (scalars, vectors and "
                "matrices only)",
                lineno,
                col,
                len(shape_text),
                cls=NotSupportedError,
            )
        return dims

    def product_dim(self, item, lineno, col, shape_text):
        """`m*p` in a shape: a product of dim names and positive integers."""
        factors = []
        stack = [item]
        while stack:
            x = stack.pop()
            if isinstance(x, ast.BinOp) and isinstance(x.op, ast.Mult):
                stack += [x.right, x.left]
            elif isinstance(x, ast.Name):
                self.check_name(x.id, lineno, col, what="dim")
                factors.append(x.id)
            elif isinstance(x, ast.Constant) and type(x.value) is int and x.value > 0:
                factors.append(x.value)
            else:
                self.fail(
                    "a product dim multiplies names and positive integers, like m*p", lineno, col, 1
                )
        d = E.Dim()
        for f in factors:
            d = d * E.Dim.of(f)
        return d

    def add_symbol(self, name, dims, words, lineno, col):
        words = set(words)
        if words & _SQUARE_WORDS and (len(dims) != 2 or dims[0] != dims[1]):
            bad = sorted(words & _SQUARE_WORDS)[0]
            shown = "(" + ", ".join(map(str, dims)) + ("," if len(dims) == 1 else "") + ")"
            self.fail(
                f"{bad} needs a square matrix, but {name} is declared {shown}",
                lineno,
                col,
                len(name),
            )
        if "spd" in words:
            words |= {"symmetric", "invertible", "square"}
        if words & {"complex", "hermitian", "hpd"}:
            clash = [w for w in _REAL_ONLY_WORDS if w in words]
            if clash:
                self.fail(
                    f"not supported yet: a complex symbol that is also {clash[0]} (declare "
                    f"{name} complex, hermitian or hpd alone)",
                    lineno,
                    col,
                    len(name),
                    NotSupportedError,
                )
            words |= {"complex"}
        if "hpd" in words:
            words |= {"hermitian", "invertible", "square"}
        if "orthogonal" in words:
            words |= {"invertible", "square"}
        for d in dims:
            if isinstance(d, str) and d in self.env:
                self.fail(f"{d} is a symbol and cannot also be a dim", lineno, col, len(name))
        ds = [E.Dim.of(d) for d in dims]
        if len(ds) == 0:
            shape = E.SCALAR
        elif len(ds) == 1:
            shape = (ds[0], None)
        else:
            shape = (ds[0], ds[1])
        sym = E.Symbol(name, shape, frozenset(words))
        self.env[name] = sym
        self.block.declarations[name] = sym
        self.block.lines[name] = lineno
        for axis, d in enumerate(dims):
            if isinstance(d, str):
                self.block.dims.setdefault(d, []).append((name, axis))
            elif isinstance(d, E.Dim):
                for part in d.names:
                    self.block.dims.setdefault(part, []).append((name, axis))

    def declare_from_mapping(self, shapes):
        from .parser import parse_shape_spec  # the reader is built there

        if not isinstance(shapes, dict):
            raise FormulaError("shapes must be a mapping from symbol names to shapes")
        for name, spec in shapes.items():
            if not isinstance(name, str) or not name.isidentifier():
                raise FormulaError(f"shapes: {name!r} is not a valid symbol name")
            try:
                self.source_lines = [f"{name}: {spec}"]
                self.check_name(name, None, 0)
                dims, words = parse_shape_spec(spec)
                read = []
                for d in dims:
                    if isinstance(d, numbers.Integral) and not isinstance(d, bool):
                        d = int(d)  # NumPy integers (a.shape[0]) are integers too
                    if isinstance(d, bool) or not isinstance(d, (int, str, E.Dim)):
                        raise FormulaError(f"a dim is a name or a positive integer, got {d!r}")
                    if isinstance(d, int) and d <= 0:
                        raise FormulaError(f"dims must be positive, got {d}")
                    if isinstance(d, int) and d.bit_length() > 62:
                        raise FormulaError("the dim is too large")
                    if isinstance(d, str) and not d.isidentifier():
                        raise FormulaError(f"{d!r} is not a valid dim name")
                    if isinstance(d, str):
                        self.check_name(d, None, 0, what="dim")
                        if d in self.env:
                            raise FormulaError(f"{d} is a symbol and cannot also be a dim")
                    read.append(d)
                dims = tuple(read)
                if len(dims) > 2:
                    raise NotSupportedError(f"not supported yet: arrays with {len(dims)} axes")
                if name in self.env:
                    raise FormulaError(f"{name} is declared twice")
                if name in self.block.dims:
                    raise FormulaError(f"{name} is already used as a dim name")
                self.add_symbol(name, list(dims), words, None, 0)
            except FormulaError as err:
                raise type(err)(f"in shapes[{name!r}]: {err.reason}") from None
        self.source_lines = self.text.split("\n")


def _matching_paren(s: str) -> int:
    depth = 0
    for i, ch in enumerate(s):
        if ch == "(":
            depth += 1
        elif ch == ")":
            depth -= 1
            if depth == 0:
                return i
    return -1
