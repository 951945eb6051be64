"""Reading a block: declarations, definitions and the target, into expression trees.

Every problem with the input is a `FormulaError` with line, column and a caret.
"""

from __future__ import annotations

import ast
import re
from dataclasses import dataclass, field

from .. import expr as E
from ..errors import FormulaError
from .call_dispatch import Calls
from .carets import Carets, _char_col
from .constants import ConstantChecks
from .declarations import Declarations
from .expressions import Expressions
from .syntax_errors import SyntaxErrors

# the reader is split by construct; the words, bounds and tables live in vocabulary.py and
# are re-exported here for `from gradwright.language.parser import LIMITS` and the like
from .vocabulary import (  # noqa: F401
    _ASSIGN_RE,
    _BAD_CHAR_RE,
    _BINOP_NAMES,
    _COMPLEX_FUNCTIONS,
    _COMPOUND_OPENERS,
    _CONSTRUCT_NAMES,
    _DECL_RE,
    _GENERATED_MODULE_NAMES,
    _LITERAL_NAMES,
    _OPENER_RE,
    _REAL_ONLY_WORDS,
    _RESERVED,
    _SQUARE_WORDS,
    _STATEMENT_NAMES,
    FUNCTIONS,
    LIMITS,
    STRUCTURE_WORDS,
    _not_in_language,
)


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


class _Reader(Carets, Declarations, Expressions, Calls, SyntaxErrors, ConstantChecks):
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


def _first_word_width(stmt, reader) -> int:
    """Width of the keyword that opens a statement (`import`, `del`, ...), for the caret."""
    src = reader.source_lines[reader.base + stmt.lineno - 2]
    col = _char_col(src, stmt.col_offset)
    m = re.match(r"[A-Za-z_]\w*", src[col:])
    return len(m.group()) if m else 1
