"""Reading a block: declarations, definitions and the target, into expression trees.

Every problem with the input is a `FormulaError` with line, column and a caret.
"""

from __future__ import annotations

import ast
import builtins
import difflib
import importlib
import keyword
import numbers
import os as _os
import pkgutil
import re
from dataclasses import dataclass, field
from fractions import Fraction

from .. import expr as E
from ..entrywise import SPELLED_APART
from ..errors import FormulaError, NotSupportedError, ShapeError
from . import stable_forms
from .broadcast import broadcast_all, broadcast_shapes, clash_message, internal_shape, numpy_shape
from .constants import ConstantChecks
from .registry import CALLS
from .subscripts import subscript
from .syntax_errors import SyntaxErrors

STRUCTURE_WORDS = (
    "symmetric", "spd", "diagonal", "positive", "orthogonal", "square", "invertible", "lower",
    "complex", "hermitian", "hpd",
)  # fmt: skip
_SQUARE_WORDS = {
    "symmetric", "spd", "diagonal", "orthogonal", "square", "invertible", "lower", "hermitian",
    "hpd",
}  # fmt: skip
_COMPLEX_FUNCTIONS = ("conj", "real", "imag", "vdot")
#: real structure that a complex symbol cannot have (yet)
_REAL_ONLY_WORDS = ("symmetric", "spd", "diagonal", "positive", "orthogonal", "lower")

#: bounds on the work one block may ask for (documented in docs/limits.md)
LIMITS = {
    "block_characters": 200_000,
    "line_characters": 50_000,
    "nesting_depth": 120,
    "expression_nodes": 20_000,
    "lines": 2_000,
    # exact constants are rationals; 4096 bits is about 1,233 decimal digits, room for any
    # float literal (1.8e308 needs 1,024 bits) while `9**9**9` is refused before it is computed
    "constant_bits": 4_096,
    # mpow(A, k), also through nested powers: the differential has k terms
    "matrix_power": 64,
}

FUNCTIONS = {
    # name: (min args, max args)
    "trace": (1, 1), "det": (1, 1), "logdet": (1, 1), "inv": (1, 1), "solve": (2, 2),
    "kron": (2, 2), "vec": (1, 1), "diag": (1, 1), "diagm": (1, 1),
    "eye": (1, 1), "ones": (1, 2),
    "zeros": (1, 2), "outer": (2, 2), "mpow": (2, 2), "commutation": (2, 2),
    # sum, mean, max, min, norm, logsumexp, softmax, log_softmax: calls_reductions.py
    # abs: calls_complex.py (the modulus for complex arguments, the entrywise abs otherwise)
    **{f: (1, 1) for f in E.ELEMENTWISE if f not in SPELLED_APART and f != "abs"},
}  # fmt: skip

# the families of functions in `calls_*.py` modules register themselves in CALLS
for _module in sorted(m.name for m in pkgutil.iter_modules([_os.path.dirname(__file__)])):
    if _module.startswith("calls_"):
        importlib.import_module(f"{__package__}.{_module}")
for _name, _spec in CALLS.items():
    if _name in FUNCTIONS:  # pragma: no cover - a programming error caught at import
        raise AssertionError(f"function {_name} is both a core and a registered function")
    FUNCTIONS[_name] = (_spec.min_args, _spec.max_args)

# names the generated module binds at module level (its imports); a symbol of the same name
# would shadow them inside the generated functions
_GENERATED_MODULE_NAMES = {"np", "numpy", "scipy", "warnings", "cho_factor", "cho_solve"}
#: `pi` is the one named constant; `T` and `d` are ordinary names (`.T` is an attribute, and
#: `d(X)` means a differential only where differentials are asked for and no symbol is named d)
_RESERVED = set(FUNCTIONS) | {"pi"} | _GENERATED_MODULE_NAMES

# each entry is the subject of "... not part of the formula language", with its verb
_CONSTRUCT_NAMES = {
    ast.Lambda: "lambda expressions are",
    ast.ListComp: "list comprehensions are",
    ast.SetComp: "set comprehensions are",
    ast.DictComp: "dict comprehensions are",
    ast.GeneratorExp: "generator expressions are",
    ast.Compare: "comparisons (==, <, in, is, ...) are",
    ast.BoolOp: "'and' / 'or' are",
    ast.IfExp: "conditional expressions (x if c else y) are",
    ast.NamedExpr: "the walrus operator := is",
    ast.JoinedStr: "f-strings are",
    ast.FormattedValue: "f-strings are",
    ast.Tuple: "tuples are",
    ast.List: "lists are",
    ast.Dict: "dicts are",
    ast.Set: "sets are",
    ast.Starred: "starred arguments are",
    ast.Await: "'await' is",
    ast.Yield: "'yield' is",
    ast.YieldFrom: "'yield' is",
    ast.Slice: "slices are",
}

_LITERAL_NAMES = {
    str: "strings are",
    bytes: "bytes are",
    type(None): "None is",
    bool: "booleans (True, False) are",
    complex: "complex numbers are",
    type(...): "the ellipsis ... is",
}

_STATEMENT_NAMES = {
    ast.Import: "imports are",
    ast.ImportFrom: "imports are",
    ast.FunctionDef: "function definitions are",
    ast.AsyncFunctionDef: "function definitions are",
    ast.ClassDef: "class definitions are",
    ast.For: "loops are",
    ast.AsyncFor: "loops are",
    ast.While: "loops are",
    ast.If: "if statements are",
    ast.With: "with statements are",
    ast.AsyncWith: "with statements are",
    ast.Try: "try statements are",
    ast.Raise: "'raise' is",
    ast.Return: "'return' is",
    ast.Delete: "'del' is",
    ast.Global: "'global' is",
    ast.Nonlocal: "'nonlocal' is",
    ast.Pass: "'pass' is",
    ast.Break: "'break' is",
    ast.Continue: "'continue' is",
    ast.AugAssign: "augmented assignments like x += 1 are",
    ast.AnnAssign: "annotated assignments are",
    ast.Assert: "'assert' is",
}
if hasattr(ast, "TryStar"):  # Python 3.11+
    _STATEMENT_NAMES[ast.TryStar] = "try statements are"
if hasattr(ast, "Match"):  # Python 3.10+
    _STATEMENT_NAMES[ast.Match] = "match statements are"

# Python keywords that open a compound statement (Python language reference, "Compound
# statements"), plus the soft keywords `match`/`case` and the decorator sign; a line starting
# with one of them is a statement of Python, not of the formula language
_COMPOUND_OPENERS = {
    "def": "function definitions are",
    "async": "function definitions are",
    "class": "class definitions are",
    "for": "loops are",
    "while": "loops are",
    "with": "with statements are",
    "if": "if statements are",
    "elif": "if statements are",
    "else": "if statements are",
    "try": "try statements are",
    "except": "try statements are",
    "finally": "try statements are",
    "match": "match statements are",
    "case": "match statements are",
    "@": "decorators are",
}
_OPENER_RE = re.compile(r"^\s*(@|[A-Za-z]+\b)")

_BINOP_NAMES = {
    ast.FloorDiv: "//",
    ast.Mod: "%",
    ast.LShift: "<<",
    ast.RShift: ">>",
    ast.BitOr: "|",
    ast.BitXor: "^",
    ast.BitAnd: "&",
}

# a declaration `NAME: ...`; the name may be any identifier so that non-ASCII names get a
# clear refusal rather than being read as a Python annotation
_DECL_RE = re.compile(r"^\s*([^\W\d]\w*)\s*:(?!=)(.*)$", re.S)
# characters that cannot be encoded as UTF-8 text (NUL, lone surrogates)
_BAD_CHAR_RE = re.compile("[\x00\ud800-\udfff]")
_ASSIGN_RE = re.compile(r"^\s*([^\W\d]\w*)\s*=(?!=)")


def _not_in_language(subject: str) -> str:
    return f"{subject} not part of the formula language"


@dataclass
class Block:
    """A read block: declared symbols, definitions (as Named nodes) and the target."""

    text: str
    declarations: dict = field(default_factory=dict)  # name -> Symbol
    definitions: dict = field(default_factory=dict)  # name -> Named
    dims: dict = field(default_factory=dict)  # dim name -> [(symbol, axis)]
    target: str = ""
    expr: E.Expr | None = None  # the target's expression (its body)
    lines: dict = field(default_factory=dict)  # name -> line number

    @property
    def symbols(self) -> dict:
        return self.declarations


def parse_block(
    text: str,
    *,
    shapes: dict | None = None,
    allow_differentials: bool = False,
    require_target: bool = True,
) -> Block:
    """Read a block of the formula language.

    >>> b = parse_block("X: (n, p)\\nw: (p,)\\nf = sum((X @ w)**2)")
    >>> b.target, b.expr.shape == (None, None)
    ('f', True)
    """
    if not isinstance(text, str):
        raise FormulaError(f"the formula must be text, got {type(text).__name__}")
    return _Reader(text, shapes, allow_differentials).read(require_target)


def parse_shape_spec(spec) -> tuple[tuple, tuple[str, ...]]:
    """A shapes-mapping value: ("n", "p"), (3,), () or "(n, n) spd" -> (dims, structure words)."""
    if isinstance(spec, str):
        reader = _Reader("", None, False)
        dims, words = reader.declaration_spec(spec, 1, "", 0)
        return tuple(d for d in dims), tuple(words)
    if isinstance(spec, (tuple, list)):
        return tuple(spec), ()
    raise FormulaError(f"a shape must be a tuple of dims or text like '(n, k) spd', got {spec!r}")


class _Reader(SyntaxErrors, ConstantChecks):
    def __init__(self, text: str, shapes, allow_differentials: bool):
        self.text = text
        self.shapes = shapes
        self.allow_d = allow_differentials
        self.block = Block(text=text)
        self.env: dict[str, E.Expr] = {}
        self.nodes = 0
        self.source_lines: list[str] = []
        self.base = 1
        self.power_cache: dict = {}

    @property
    def has_complex_symbols(self) -> bool:
        """Complex literals like 2j are read only in blocks that declare a complex symbol."""
        return any("complex" in s.structure for s in self.block.declarations.values())

    # --- errors ------------------------------------------------------------------------------

    def fail(self, reason, lineno=None, col=0, width=1, cls=FormulaError):
        line = (
            self.source_lines[lineno - 1] if lineno and lineno <= len(self.source_lines) else None
        )
        raise cls(
            reason,
            line=lineno,
            column=col + 1 if line is not None else None,
            source_line=line,
            width=width,
        )

    def fail_node(self, reason, node, cls=FormulaError, width=None):
        lineno = self.base + node.lineno - 1
        src = self.source_lines[lineno - 1]
        col = _char_col(src, node.col_offset)
        if (
            width is None
            and getattr(node, "end_lineno", None) == node.lineno
            and node.end_col_offset is not None
        ):
            width = _char_col(src, node.end_col_offset) - col
        elif width is None:
            width = len(src) - col
        self.fail(reason, lineno, col, max(1, width), cls)

    # --- the block ---------------------------------------------------------------------------

    def read(self, require_target: bool) -> Block:
        text = self.text
        if len(text) > LIMITS["block_characters"]:
            raise FormulaError(
                f"the block is {len(text):,} characters long; the limit is "
                f"{LIMITS['block_characters']:,}"
            )
        # Python reads \r\n and a lone \r as line ends too (language reference, "Physical
        # lines"); a byte-order mark is what some editors put before the first character
        text = text.replace("\r\n", "\n").replace("\r", "\n").removeprefix("\ufeff")
        self.source_lines = text.split("\n")
        for lineno, raw in enumerate(self.source_lines, 1):
            bad = _BAD_CHAR_RE.search(raw)
            if bad:
                shown = raw[: bad.start()] + "?" + raw[bad.end() :]
                self.source_lines[lineno - 1] = shown
                what = "a NUL character" if bad.group() == "\x00" else "a lone surrogate"
                self.fail(
                    f"the block contains {what} (U+{ord(bad.group()):04X}), which is not text; "
                    "remove it",
                    lineno,
                    bad.start(),
                )
        if len(self.source_lines) > LIMITS["lines"]:
            raise FormulaError(
                f"the block has {len(self.source_lines):,} lines; the limit is {LIMITS['lines']:,}"
            )
        if self.shapes:
            self.declare_from_mapping(self.shapes)
        logical = self.logical_lines()
        last_kind = None
        for i, (lineno, code) in enumerate(logical):
            m = _DECL_RE.match(code)
            if m and "=" not in code.split(":", 1)[0]:
                self.declaration(m, lineno, code)
                last_kind = "declaration"
                continue
            last_kind = self.statement(lineno, code, is_last=i == len(logical) - 1)
        if require_target and not self.block.target:
            if not logical:
                raise FormulaError(
                    "the block is empty: declare the symbols and end with a target, "
                    "e.g.\n    X: (n, k)\n    f = trace(X.T @ X)"
                )
            raise FormulaError(
                "the block has no target: end it with a definition like `f = ...` "
                + ("(it only declares symbols)" if last_kind == "declaration" else "")
            )
        return self.block

    def logical_lines(self):
        out = []
        depth = 0
        start = None
        buf: list[str] = []
        for lineno, raw in enumerate(self.source_lines, 1):
            if len(raw) > LIMITS["line_characters"]:
                self.fail(
                    f"line is {len(raw):,} characters long; the limit is "
                    f"{LIMITS['line_characters']:,}",
                    lineno,
                    0,
                )
            code = raw.split("#", 1)[0].rstrip()
            if not code.strip() and depth == 0:
                continue
            if start is None:
                start = lineno
            buf.append(code)
            depth += code.count("(") + code.count("[") + code.count("{")
            depth -= code.count(")") + code.count("]") + code.count("}")
            if depth <= 0 and not code.endswith("\\"):  # a trailing \ continues the line
                out.append((start, "\n".join(buf)))
                start, buf, depth = None, [], 0
        if buf:
            out.append((start, "\n".join(buf)))
        return out

    # --- declarations ------------------------------------------------------------------------

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

    # --- statements --------------------------------------------------------------------------

    def statement(self, lineno, code, is_last):
        self.base = lineno
        tree = self.parse_python(code, lineno)
        if len(tree.body) == 0:
            return None
        if len(tree.body) > 1:
            self.fail_node("one statement per line, please (found a ';')", tree.body[1])
        stmt = tree.body[0]
        if isinstance(stmt, ast.Assign):
            if len(stmt.targets) != 1 or not isinstance(stmt.targets[0], ast.Name):
                self.fail_node(
                    "the left side of a definition must be one name, like R = ...",
                    stmt.targets[0] if len(stmt.targets) == 1 else stmt.targets[1],
                )
            target = stmt.targets[0]
            name = target.id
            src_col = _char_col(self.source_lines[lineno - 1], target.col_offset)
            self.check_name(name, self.base + target.lineno - 1, src_col)
            if name in self.env:
                where = self.block.lines.get(name)
                what = "defined" if name in self.block.definitions else "declared"
                self.fail_node(
                    f"{name} is already {what}"
                    + (f" on line {where}" if where else "")
                    + "; choose a new name",
                    target,
                )
            if name in self.block.dims:
                self.fail_node(f"{name} is already used as a dim name", target)
            body = self.expression(stmt.value)
            named = E.Named(name, body)
            self.env[name] = named
            self.block.definitions[name] = named
            self.block.lines[name] = lineno
            self.block.target = name
            self.block.expr = body
            return "definition"
        if isinstance(stmt, ast.Expr):
            v = stmt.value
            if (
                isinstance(v, ast.Compare)
                and isinstance(v.left, ast.Name)
                and len(v.ops) == 1
                and isinstance(v.ops[0], ast.Eq)
            ):
                self.fail_node(
                    f"a definition uses one '=': write {v.left.id} = ... "
                    "(== would compare, and comparisons are not part of the formula language)",
                    v,
                    width=len(v.left.id),
                )
            if not is_last:
                self.fail_node(
                    "a bare expression may only be the last line (the target); "
                    "give it a name, like R = ...",
                    stmt.value,
                )
            body = self.expression(stmt.value)
            name = "f"
            while name in self.env:
                name += "_"
            self.block.target = name
            self.block.expr = body
            named = E.Named(name, body)
            self.block.definitions[name] = named
            self.block.lines[name] = lineno
            return "definition"
        what = _STATEMENT_NAMES.get(type(stmt), f"{type(stmt).__name__} statements are")
        self.fail_node(_not_in_language(what), stmt, width=_first_word_width(stmt, self))

    def parse_python(self, code, lineno):
        try:
            return ast.parse(code, mode="exec")
        except SyntaxError as err:
            self.syntax_error(err, code, lineno)
        except (RecursionError, MemoryError):
            # Python builds the tree of `a + b + ...` by recursion: about 2,900 terms in one
            # chain is the most it reads at the default recursion limit (measured on 3.11)
            self.fail(
                "the formula is too long or too deeply nested for Python's reader (at most "
                "about 2,500 terms in one chain of + or *, and "
                f"{LIMITS['nesting_depth']} levels of nesting); split it into definitions",
                lineno,
                0,
                1,
            )
        except ValueError as err:  # pragma: no cover - NUL and surrogates are refused earlier
            self.fail(f"cannot read the line: {err}", lineno, 0, 1)

    # --- expressions -------------------------------------------------------------------------

    def expression(self, node):
        count = 0
        for _ in ast.walk(node):
            count += 1
            if count > LIMITS["expression_nodes"]:
                self.fail_node(
                    f"the expression has more than {LIMITS['expression_nodes']:,} parts; "
                    "split it into definitions",
                    node,
                )
        self.depth_cache: dict = {}
        try:
            return self.tr(node, 0)
        except RecursionError:
            # a safety net: the nesting limit keeps the reader well inside Python's default
            # recursion limit, but the caller's own stack (a deep notebook kernel) counts too
            pass
        self.fail_node(
            "the expression is nested too deeply to read here; split it into definitions", node
        )

    def tr(self, node, depth):
        if depth > LIMITS["nesting_depth"]:
            self.fail_node(
                f"the expression is nested more than {LIMITS['nesting_depth']} levels deep; "
                "split it into definitions",
                node,
            )
        try:
            out = self.tr_inner(node, depth + 1)
        except ShapeError as err:
            msg = str(err)
            cls = NotSupportedError if msg.startswith("not supported") else FormulaError
            self.fail_node(msg, node, cls)
        if _depth(out, self.depth_cache) > LIMITS["nesting_depth"] * 2:
            self.fail_node(
                "the definitions nest too deeply: through the names they use this expression "
                f"is more than {LIMITS['nesting_depth'] * 2} levels deep; flatten some of them",
                node,
            )
        return out

    def tr_inner(self, node, depth):
        if isinstance(node, ast.Name):
            return self.name(node)
        if isinstance(node, ast.Constant):
            v = node.value
            if (
                isinstance(v, complex)
                and v.real == 0
                and v.imag == int(v.imag)
                and self.has_complex_symbols
            ):
                from .calls_complex import imaginary_literal

                return imaginary_literal(int(v.imag))
            if isinstance(v, bool) or not isinstance(v, (int, float)):
                what = _LITERAL_NAMES.get(type(v), f"{type(v).__name__} is")
                self.fail_node(_not_in_language(what), node)
            if isinstance(v, float) and not (v == v and abs(v) != float("inf")):
                self.fail_node("the number is not finite", node)
            if isinstance(v, float):
                src = ast.get_source_segment(self.current_source(node), node) or repr(v)
                src = src.replace("_", "")
                m = re.fullmatch(r"([0-9.]*)[eE]([+-]?[0-9]+)", src)
                # the exact value of `1e-999999999` has a billion digits: bound it first
                if (
                    m
                    and (len(m.group(1)) + abs(int(m.group(2)))) * 10 // 3 > LIMITS["constant_bits"]
                ):
                    self.fail_node(
                        "the number is too large or too small to keep exactly (constants are "
                        f"limited to about {LIMITS['constant_bits'] * 3 // 10:,} digits)",
                        node,
                    )
                try:
                    out = E.Const(Fraction(src))
                except (ValueError, ZeroDivisionError):
                    out = E.Const(Fraction(v))
                self.check_constant_size(out, node)
                return out
            out = E.Const(v)
            self.check_constant_size(out, node)
            return out
        if isinstance(node, ast.UnaryOp):
            if isinstance(node.op, ast.USub):
                out = E.neg(self.tr(node.operand, depth))
                self.check_constant_size(out, node)
                return out
            if isinstance(node.op, ast.UAdd):
                return self.tr(node.operand, depth)
            what = "'not'" if isinstance(node.op, ast.Not) else "the operator ~"
            self.fail_node(f"{what} is not part of the formula language", node)
        if isinstance(node, ast.BinOp):
            return self.binop(node, depth)
        if isinstance(node, ast.Attribute):
            a = self.tr(node.value, depth)  # the leftmost problem is reported first
            if node.attr in ("real", "imag"):
                from .calls_complex import real_or_imag

                return real_or_imag(node.attr, a)
            if node.attr != "T":
                if node.attr.startswith("__"):
                    what = f"dunder attributes like .{node.attr} are"
                else:
                    what = f"attribute access .{node.attr} is"
                self.fail_attr(f"{_not_in_language(what)} (only .T, the transpose)", node)
            if a.is_scalar or E.is_vector_shape(a.shape):
                return a  # NumPy: .T of a 1-D array is the array itself
            return E.transpose(a)
        if isinstance(node, ast.Call):
            return self.call(node, depth)
        if isinstance(node, ast.Subscript):
            return subscript(self, node, depth)
        what = _CONSTRUCT_NAMES.get(type(node), f"{type(node).__name__} expressions are")
        self.fail_node(_not_in_language(what), node)

    def fail_attr(self, reason, node):
        """A caret under `.attr` of an attribute node, not under the whole `value.attr`."""
        lineno = self.base + node.end_lineno - 1 if node.end_lineno else self.base + node.lineno - 1
        src = self.source_lines[lineno - 1]
        end = _char_col(src, node.end_col_offset) if node.end_col_offset is not None else len(src)
        dot = src.rfind(".", 0, end - len(node.attr) + 1)
        start = dot if dot >= 0 else max(0, end - len(node.attr))
        self.fail(reason, lineno, start, end - start)

    def current_source(self, node):
        return "\n".join(self.source_lines[self.base - 1 :])

    def name(self, node):
        n = node.id
        if n in self.env:
            return self.env[n]
        if n in self.block.dims:
            return E.SizeOf(E.Dim.of(n))  # a dim in an expression is its size, as in NumPy
        if n == "pi":
            return E.Pi()
        if n in FUNCTIONS:
            self.fail_node(f"{n} is a function; call it, like {n}(A)", node)
        if not n.isascii():
            self.fail_node(
                f"unknown name {n!r}: names are written with ASCII letters, digits and '_'", node
            )
        if n.startswith("__"):
            self.fail_node(f"unknown name {n!r}: dunder names {_not_in_language('are')}", node)
        if hasattr(builtins, n) or n in _GENERATED_MODULE_NAMES or keyword.iskeyword(n):
            self.fail_node(
                f"unknown name {n!r}: Python's own names (builtins, modules) "
                f"{_not_in_language('are')}; only declared symbols and definitions are",
                node,
            )
        known = list(self.env)
        close = difflib.get_close_matches(n, known, n=1)
        hint = f"; did you mean {close[0]}?" if close else ""
        if not known:
            hint = "; declare it first, like `" + n + ": (n, k)`"
        elif not close:
            hint = f"; declare it, like `{n}: (n, k)`, before its first use"
        self.fail_node(f"unknown name {n!r}{hint}", node)

    def binop(self, node, depth):
        op = type(node.op)
        if op in _BINOP_NAMES:
            self.fail_node(
                f"the operator {_BINOP_NAMES[op]} is not part of the formula language", node
            )
        if op in (ast.Add, ast.Sub):
            # flatten left-deep chains without recursion: a + b - c + ...
            items = []
            cur = node
            while isinstance(cur, ast.BinOp) and isinstance(cur.op, (ast.Add, ast.Sub)):
                items.append((isinstance(cur.op, ast.Sub), cur.right))
                cur = cur.left
            terms_nodes = [(False, cur)] + list(reversed(items))
            # the terms are collected and summed once: adding one at a time re-collects the
            # growing sum at every step, quadratic in the number of terms
            terms = []
            widest = None  # the array term with the sum's shape so far (NumPy broadcasting)
            for negate, tnode in terms_nodes:
                t = self.tr(tnode, depth)
                if terms:
                    widest = self.check_add(
                        widest if widest is not None else terms[0], t, tnode, cur, negate
                    )
                elif not t.is_scalar:
                    widest = t
                terms.append(E.neg(t) if negate and terms else t)
            if len(terms) == 1:
                return terms[0]
            acc = E.add(*broadcast_all(terms))
            self.check_constant_size(acc, node)
            return acc
        a = self.tr(node.left, depth)
        b = self.tr(node.right, depth)
        if op is ast.Pow:
            self.check_constant_power(a, b, node)
        out = self.binop_checked(op, a, b, node)
        self.check_constant_size(out, node)
        return out

    def binop_checked(self, op, a, b, node):
        if op in (ast.Mult, ast.Div):
            if not (a.is_scalar or b.is_scalar) and a.shape != b.shape:
                if broadcast_shapes(numpy_shape(a.shape), numpy_shape(b.shape)) is None:
                    what = "multiply entrywise" if op is ast.Mult else "divide entrywise"
                    hint = " (use @ for the matrix product)" if op is ast.Mult else ""
                    self.fail_node(clash_message(what, a, b) + hint, node)
                a, b = broadcast_all([a, b])
            if op is ast.Mult:
                return E.mul(a, b)
            if isinstance(b, E.Const) and b.value == 0:
                self.fail_node("division by zero", node)
            return E.div(a, b)
        if op is ast.Pow:
            if not b.is_scalar:
                self.fail_node(
                    f"the exponent of ** must be a scalar, got a {E.describe(b)} "
                    "(entrywise powers only; use mpow(A, k) for a matrix power)",
                    node.right,
                )
            return E.power(a, b)
        if op is ast.MatMult:
            return self.matmul(a, b, node)
        self.fail_node("this operator is not part of the formula language", node)

    def check_add(self, a, b, node, left_node, negate):
        """The wider of a and b under NumPy's broadcasting, or a caret under b."""
        if b.is_scalar or a.shape == b.shape:
            return a
        if a.is_scalar:
            return b
        got = broadcast_shapes(numpy_shape(a.shape), numpy_shape(b.shape))
        if got is None:
            verb = "subtract" if negate else "add"
            self.fail_node(clash_message(verb, a, b), node)
        return (
            a
            if got == numpy_shape(a.shape)
            else b
            if got == numpy_shape(b.shape)
            else (E.Zero(internal_shape(got)))
        )

    def matmul(self, a, b, node):
        if a.is_scalar or b.is_scalar:
            self.fail_node(
                f"@ needs two arrays, got a {E.describe(a)} and a {E.describe(b)}; "
                "use * for a scalar multiple",
                node,
            )
        va, vb = E.is_vector_shape(a.shape), E.is_vector_shape(b.shape)
        left = E.transpose(a) if va else a
        if left.shape[1] != b.shape[0]:
            ia = left.shape[1]
            ib = b.shape[0]
            self.fail_node(
                f"cannot multiply {E.shape_text(a.shape)} @ {E.shape_text(b.shape)}: "
                f"inner dimensions {ia} and {ib} differ",
                node,
            )
        out = E.matmul(left, b)
        if va and not vb:
            out = E.transpose(out)  # NumPy gives a 1-D result; ours is a column
        return out

    def call(self, node, depth):
        if not isinstance(node.func, ast.Name):
            if isinstance(node.func, ast.Attribute):
                owner = node.func.value
                if isinstance(owner, ast.Name) and owner.id in ("np", "numpy", "scipy"):
                    self.fail_node(
                        f"write {node.func.attr}(...) without the {owner.id}. prefix: the "
                        "formula language has its own functions (trace, inv, exp, ...)",
                        node.func,
                    )
                if node.func.attr == "conj" and not node.args and not node.keywords:
                    from .calls_complex import conjugate

                    return conjugate(self.tr(owner, depth))
                self.tr(owner, depth)  # the leftmost problem is reported first
                self.fail_attr(
                    f"method calls like .{node.func.attr}(...) {_not_in_language('are')}; "
                    "write functions like trace(A)",
                    node.func,
                )
            if type(node.func) in _CONSTRUCT_NAMES:
                self.fail_node(_not_in_language(_CONSTRUCT_NAMES[type(node.func)]), node.func)
            self.fail_node("only named functions can be called, like trace(A)", node.func)
        fname = node.func.id
        if fname.startswith("__"):
            self.fail_node(
                f"unknown function {fname!r}: dunder names {_not_in_language('are')}", node.func
            )
        spec = CALLS.get(fname)
        accepted = spec.keywords if spec is not None else ()
        bad_keywords = [kw for kw in node.keywords if kw.arg not in accepted]
        if bad_keywords:
            kw = bad_keywords[0]
            if accepted:
                shown = f"{kw.arg}=" if kw.arg else "**"
                self.fail_node(
                    f"{fname} takes the keyword argument{'s' if len(accepted) > 1 else ''} "
                    f"{', '.join(a + '=' for a in accepted)} only, not {shown}",
                    kw if hasattr(kw, "lineno") else kw.value,
                )
            shown = f"{kw.arg}=" if kw.arg else "**"
            self.fail_node(
                f"keyword arguments like {shown}... {_not_in_language('are')} "
                f"({fname} takes its arguments by position)",
                kw if hasattr(kw, "lineno") else kw.value,
            )
        for a in node.args:
            if isinstance(a, ast.Starred):
                self.fail_node("starred arguments are not part of the formula language", a)
        if fname == "d" and self.allow_d and "d" not in self.env:
            if len(node.args) != 1 or not isinstance(node.args[0], ast.Name):
                self.fail_node("d(...) takes one declared symbol, like d(X)", node)
            sym = self.env.get(node.args[0].id)
            if not isinstance(sym, E.Symbol):
                self.fail_node("d(...) takes a declared symbol, like d(X)", node.args[0])
            return E.Differential(sym)
        if fname not in FUNCTIONS:
            if fname in self.env:
                self.fail_node(f"{fname} is a symbol, not a function", node.func)
            close = difflib.get_close_matches(fname, list(FUNCTIONS), n=1)
            if close and close[0] in _COMPLEX_FUNCTIONS and hasattr(builtins, fname):
                close = []  # eval is no misspelt real: Python's builtins get their own message
            hint = f"; did you mean {close[0]}?" if close else ""
            if hasattr(builtins, fname) or fname in _GENERATED_MODULE_NAMES:
                hint = (
                    f": Python's builtins {_not_in_language('are')}, only its own functions "
                    "(trace, det, inv, solve, exp, ...)"
                )
            self.fail_node(f"unknown function {fname!r}{hint}", node.func)
        lo, hi = FUNCTIONS[fname]
        n = len(node.args)
        if not lo <= n <= hi:
            want = str(lo) if lo == hi else f"{lo} or {hi}" if hi == lo + 1 else f"{lo} to {hi}"
            self.fail_node(f"{fname} takes {want} argument{'s' if hi > 1 else ''}, got {n}", node)
        if spec is not None:
            args = node.args if spec.raw else [self.tr(a, depth) for a in node.args]
            return spec.builder(self, node, args, {kw.arg: kw.value for kw in node.keywords})
        if fname in ("eye", "ones", "zeros", "commutation"):
            dims = [self.dim_arg(a) for a in node.args]
            if fname == "eye":
                return E.Identity(dims[0])
            if fname == "commutation":
                return E.Commutation(dims[0], dims[1])
            shape = (dims[0], dims[1] if len(dims) > 1 else None)
            return E.Ones(shape) if fname == "ones" else E.Zero(shape)
        if fname == "mpow":
            base = self.tr(node.args[0], depth)
            k = node.args[1]
            if (
                not (
                    isinstance(k, ast.Constant)
                    and isinstance(k.value, int)
                    and not isinstance(k.value, bool)
                )
                or k.value < 0
            ):
                self.fail_node("mpow(A, k) needs k to be a non-negative integer literal", k)
            if k.value > LIMITS["matrix_power"]:
                self.fail_node(
                    f"mpow(A, k): k larger than {LIMITS['matrix_power']} is not supported yet",
                    k,
                    NotSupportedError,
                )
            E.MatPow(base, k.value)  # shape check
            inner = _power_degree(base, self.power_cache)
            if inner * k.value > LIMITS["matrix_power"]:
                # the differential of mpow(B, k) has k terms, each holding dB: nested powers
                # multiply, and mpow(mpow(A, 64), 64) would be 4,096 terms of A-chains
                self.fail_node(
                    f"not supported yet: this is a matrix power of degree {inner * k.value:,} "
                    f"through nested mpow (at most {LIMITS['matrix_power']})",
                    node,
                    NotSupportedError,
                )
            if k.value == 0:
                return E.Identity(base.shape[0])
            if k.value == 1:
                return base
            return E.MatPow(base, k.value)
        args = [self.tr(a, depth) for a in node.args]
        a = args[0]
        if fname in E.ELEMENTWISE:
            return stable_forms.entrywise(fname, a)
        if fname == "trace":
            E.Trace(a)
            return E.trace(a)
        if fname == "det":
            return E.Det(a)
        if fname == "logdet":
            return E.LogDet(a)
        if fname == "inv":
            E.Inverse(a)
            return E.inverse(a)
        if fname == "solve":
            E.Solve(a, args[1])
            return E.solve(a, args[1])
        if fname == "kron":
            b = args[1]
            if a.is_scalar or b.is_scalar:
                self.fail_node("kron needs two arrays; use * for a scalar multiple", node)
            if E.is_vector_shape(a.shape) != E.is_vector_shape(b.shape):
                self.fail_node(
                    f"not supported yet: kron of a {E.describe(a)} and a {E.describe(b)} "
                    "(use two matrices or two vectors)",
                    node,
                    NotSupportedError,
                )
            return E.kron(a, b)
        if fname == "vec":
            if a.is_scalar:
                self.fail_node("vec needs an array, got a scalar", node)
            return E.vec(a)
        if fname == "diag":
            if E.is_vector_shape(a.shape):
                self.fail_node(
                    "diag takes a square matrix and gives its diagonal; use diagm(x) for the "
                    "diagonal matrix of a vector",
                    node,
                )
            E.Diag(a)
            return E.diag(a)
        if fname == "diagm":
            E.Diagm(a)
            return E.diagm(a)
        if fname == "outer":
            b = args[1]
            if not (E.is_vector_shape(a.shape) and E.is_vector_shape(b.shape)):
                self.fail_node(
                    f"outer needs two vectors, got a {E.describe(a)} and a {E.describe(b)}",
                    node,
                )
            return E.matmul(a, E.transpose(b))
        raise AssertionError(fname)  # pragma: no cover

    def dim_arg(self, node):
        if (
            isinstance(node, ast.Constant)
            and isinstance(node.value, int)
            and not isinstance(node.value, bool)
        ):
            if node.value <= 0:
                self.fail_node(f"dims must be positive, got {node.value}", node)
            if node.value.bit_length() > 62:
                self.fail_node("the dim is too large", node)
            return E.Dim.of(node.value)
        if isinstance(node, ast.Name):
            if node.id in self.block.dims:
                return E.Dim.of(node.id)
            if node.id in self.env:
                self.fail_node(
                    f"{node.id} is a symbol; eye/ones/zeros take dims (names used in shapes) "
                    "or integers",
                    node,
                )
            self.fail_node(f"unknown dim {node.id!r}: it is not used in any declared shape", node)
        if isinstance(node, ast.BinOp) and isinstance(node.op, ast.Mult):
            return self.dim_arg(node.left) * self.dim_arg(node.right)  # eye(n*n), ones(m*n)
        self.fail_node("a dim is a name used in a declared shape, or a positive integer", node)


def _first_word_width(stmt, reader) -> int:
    """Width of the keyword that opens a statement (`import`, `del`, ...), for the caret."""
    src = reader.source_lines[reader.base + stmt.lineno - 2]
    col = _char_col(src, stmt.col_offset)
    m = re.match(r"[A-Za-z_]\w*", src[col:])
    return len(m.group()) if m else 1


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


def _char_col(line: str, byte_offset: int) -> int:
    """ast gives UTF-8 byte offsets; carets need character columns."""
    raw = line.encode("utf-8")
    return len(raw[:byte_offset].decode("utf-8", errors="replace"))


def _dag_fold(e: E.Expr, cache: dict, combine) -> int:
    """`combine(node, child values)` over the DAG below `e`, children first, without recursion.

    The cache maps id(node) -> (node, value); holding the node keeps its id from being reused.
    """
    got = cache.get(id(e))
    if got is not None:
        return got[1]
    stack = [(e, False)]
    while stack:
        node, expanded = stack.pop()
        if id(node) in cache:
            continue
        kids = node.children
        if expanded or not kids:
            cache[id(node)] = (node, combine(node, [cache[id(c)][1] for c in kids]))
            continue
        stack.append((node, True))
        stack.extend((c, False) for c in kids if id(c) not in cache)
    return cache[id(e)][1]


def _power_degree(e: E.Expr, cache: dict) -> int:
    """The largest product of mpow exponents along a path of `e` (through definitions)."""

    def combine(node, values):
        d = max(values, default=1)
        if type(node) is E.MatPow and isinstance(node.args[1], int):
            d *= node.args[1]
        return d

    return _dag_fold(e, cache, combine)


def _depth(e: E.Expr, cache: dict) -> int:
    return _dag_fold(e, cache, lambda node, values: 1 + max(values, default=0))
