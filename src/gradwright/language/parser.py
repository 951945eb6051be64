"""Reading a block: declarations, definitions and the target, into expression trees.

Every problem with the input is a `FormulaError` with line, column and a caret.
"""

from __future__ import annotations

import ast
import builtins
import difflib
import keyword
import re
from dataclasses import dataclass, field
from fractions import Fraction

from .. import expr as E
from ..errors import FormulaError, NotSupportedError, ShapeError

STRUCTURE_WORDS = ("symmetric", "spd", "diagonal", "positive", "orthogonal", "square", "invertible")
_SQUARE_WORDS = {"symmetric", "spd", "diagonal", "orthogonal", "square", "invertible"}

#: bounds on the work one block may ask for (documented in the README)
LIMITS = {
    "block_characters": 200_000,
    "line_characters": 50_000,
    "nesting_depth": 120,
    "expression_nodes": 20_000,
    "lines": 2_000,
}

FUNCTIONS = {
    # name: (min args, max args)
    "trace": (1, 1), "det": (1, 1), "logdet": (1, 1), "inv": (1, 1), "solve": (2, 2),
    "kron": (2, 2), "vec": (1, 1), "diag": (1, 1), "diagm": (1, 1), "sum": (1, 1),
    "norm": (1, 1), "logsumexp": (1, 1), "softmax": (1, 1), "eye": (1, 1), "ones": (1, 2),
    "zeros": (1, 2), "outer": (2, 2), "mpow": (2, 2), "commutation": (2, 2),
    **{f: (1, 1) for f in E.ELEMENTWISE},
}  # fmt: skip

_RESERVED = set(FUNCTIONS) | {"T", "np", "numpy", "scipy", "d"}

_CONSTRUCT_NAMES = {
    ast.Subscript: "subscripts like A[0]",
    ast.Lambda: "lambda expressions",
    ast.ListComp: "list comprehensions",
    ast.SetComp: "set comprehensions",
    ast.DictComp: "dict comprehensions",
    ast.GeneratorExp: "generator expressions",
    ast.Compare: "comparisons",
    ast.BoolOp: "'and' / 'or'",
    ast.IfExp: "conditional expressions (x if c else y)",
    ast.NamedExpr: "the walrus operator :=",
    ast.JoinedStr: "f-strings",
    ast.Tuple: "tuples",
    ast.List: "lists",
    ast.Dict: "dicts",
    ast.Set: "sets",
    ast.Starred: "starred arguments",
    ast.Await: "await",
    ast.Yield: "yield",
    ast.YieldFrom: "yield",
    ast.Slice: "slices",
}

_STATEMENT_NAMES = {
    ast.Import: "imports",
    ast.ImportFrom: "imports",
    ast.FunctionDef: "function definitions",
    ast.AsyncFunctionDef: "function definitions",
    ast.ClassDef: "class definitions",
    ast.For: "loops",
    ast.AsyncFor: "loops",
    ast.While: "loops",
    ast.If: "if statements",
    ast.With: "with statements",
    ast.AsyncWith: "with statements",
    ast.Try: "try statements",
    ast.Raise: "raise",
    ast.Return: "return",
    ast.Delete: "del",
    ast.Global: "global",
    ast.Nonlocal: "nonlocal",
    ast.Pass: "pass",
    ast.Break: "break",
    ast.Continue: "continue",
    ast.AugAssign: "augmented assignments like x += 1",
    ast.AnnAssign: "annotated assignments",
    ast.Assert: "assert",
}

_BINOP_NAMES = {
    ast.FloorDiv: "//",
    ast.Mod: "%",
    ast.LShift: "<<",
    ast.RShift: ">>",
    ast.BitOr: "|",
    ast.BitXor: "^",
    ast.BitAnd: "&",
}

_DECL_RE = re.compile(r"^\s*([A-Za-z_][A-Za-z0-9_]*)\s*:(?!=)(.*)$", re.S)


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


class _Reader:
    def __init__(self, text: str, shapes, allow_differentials: bool):
        self.text = text
        self.shapes = shapes
        self.allow_d = allow_differentials
        self.block = Block(text=text)
        self.env: dict[str, E.Expr] = {}
        self.nodes = 0

    # --- errors ------------------------------------------------------------------------------

    def fail(self, reason, lineno=None, col=0, width=1, cls=FormulaError):
        line = self.source_lines[lineno - 1] if lineno and lineno <= len(self.source_lines) else None
        raise cls(
            reason,
            line=lineno,
            column=col + 1 if line is not None else None,
            source_line=line,
            width=width,
        )

    def fail_node(self, reason, node, cls=FormulaError):
        lineno = self.base + node.lineno - 1
        src = self.source_lines[lineno - 1]
        col = _char_col(src, node.col_offset)
        if getattr(node, "end_lineno", None) == node.lineno and node.end_col_offset is not None:
            width = _char_col(src, node.end_col_offset) - col
        else:
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
        if "\x00" in text:
            raise FormulaError("the block contains a NUL character")
        self.source_lines = text.split("\n")
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
            if depth <= 0:
                out.append((start, "\n".join(buf)))
                start, buf, depth = None, [], 0
        if buf:
            out.append((start, "\n".join(buf)))
        return out

    # --- declarations ------------------------------------------------------------------------

    def check_name(self, name, lineno, col, what="symbol"):
        width = len(name)
        if name.startswith("_"):
            self.fail(f"names may not start with '_' ({name!r})", lineno, col, width)
        if keyword.iskeyword(name):
            self.fail(f"{name!r} is a Python keyword and cannot name a {what}", lineno, col, width)
        if name in _RESERVED and (what == "symbol" or name in FUNCTIONS):
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

    def shape_tuple(self, shape_text, lineno, col):
        try:
            node = ast.parse(shape_text, mode="eval").body
        except SyntaxError:
            self.fail(
                f"cannot read the shape {shape_text!r}: write dims as names or positive integers, "
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
                dims.append(item.id)
            elif (
                isinstance(item, ast.Constant)
                and isinstance(item.value, int)
                and not isinstance(item.value, bool)
            ):
                if item.value <= 0:
                    self.fail(f"dims must be positive, got {item.value}", lineno, c, 1)
                dims.append(item.value)
            elif isinstance(item, ast.BinOp) and isinstance(item.op, ast.Mult):
                dims.append(self.product_dim(item, lineno, c, shape_text))
            elif isinstance(item, ast.UnaryOp) and isinstance(item.op, ast.USub):
                self.fail("dims must be positive", lineno, c, 2)
            else:
                self.fail(
                    "a dim is a name like n or a positive integer like 3", lineno, c, 1
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
                self.fail("a product dim multiplies names and positive integers, like m*p",
                          lineno, col, 1)
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
                for d in dims:
                    if isinstance(d, bool) or not isinstance(d, (int, str)):
                        raise FormulaError(f"a dim is a name or a positive integer, got {d!r}")
                    if isinstance(d, int) and d <= 0:
                        raise FormulaError(f"dims must be positive, got {d}")
                    if isinstance(d, str) and not d.isidentifier():
                        raise FormulaError(f"{d!r} is not a valid dim name")
                if len(dims) > 2:
                    raise NotSupportedError(
                        f"not supported yet: arrays with {len(dims)} axes"
                    )
                if name in self.env:
                    raise FormulaError(f"{name} is declared twice")
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
                    f"{name} is already {what}" + (f" on line {where}" if where else "")
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
        what = _STATEMENT_NAMES.get(type(stmt), type(stmt).__name__)
        self.fail_node(f"{what} are not part of the formula language", stmt)

    def parse_python(self, code, lineno):
        try:
            return ast.parse(code, mode="exec")
        except SyntaxError as err:
            msg = err.msg or "invalid syntax"
            rel = (err.lineno or 1) - 1
            line = lineno + rel
            src = self.source_lines[line - 1] if line <= len(self.source_lines) else ""
            col = max(0, (err.offset or 1) - 1)
            col = min(col, max(0, len(src)))
            if "unterminated string" in msg or "EOL" in msg:
                msg = "strings are not part of the formula language"
            self.fail(f"syntax error: {msg}", line, col, 1)
        except (RecursionError, MemoryError):
            self.fail(
                "the formula is nested too deeply or is too long to read (limits: "
                f"{LIMITS['nesting_depth']} levels of nesting, {LIMITS['expression_nodes']:,} "
                "parts); split it into definitions",
                lineno,
                0,
                1,
            )
        except ValueError as err:  # e.g. source code cannot contain null bytes
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
        return self.tr(node, 0)

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
                "the definitions nest too deeply (through the names they use); "
                "flatten some of them",
                node,
            )
        return out

    def tr_inner(self, node, depth):
        if isinstance(node, ast.Name):
            return self.name(node)
        if isinstance(node, ast.Constant):
            v = node.value
            if isinstance(v, bool) or not isinstance(v, (int, float)):
                what = {str: "strings", bytes: "bytes", type(None): "None", bool: "booleans",
                        complex: "complex numbers", type(...): "..."}.get(type(v), repr(v))  # fmt: skip
                self.fail_node(f"{what} are not part of the formula language", node)
            if isinstance(v, float) and not (v == v and abs(v) != float("inf")):
                self.fail_node("the number is not finite", node)
            if isinstance(v, float):
                src = ast.get_source_segment(self.current_source(node), node) or repr(v)
                try:
                    return E.Const(Fraction(src.replace("_", "")))
                except (ValueError, ZeroDivisionError):
                    return E.Const(Fraction(v))
            return E.Const(v)
        if isinstance(node, ast.UnaryOp):
            if isinstance(node.op, ast.USub):
                return E.neg(self.tr(node.operand, depth))
            if isinstance(node.op, ast.UAdd):
                return self.tr(node.operand, depth)
            what = "'not'" if isinstance(node.op, ast.Not) else "the operator ~"
            self.fail_node(f"{what} is not part of the formula language", node)
        if isinstance(node, ast.BinOp):
            return self.binop(node, depth)
        if isinstance(node, ast.Attribute):
            if node.attr != "T":
                self.fail_node(
                    f"attribute access .{node.attr} is not part of the formula language "
                    "(only .T, the transpose)",
                    node,
                )
            a = self.tr(node.value, depth)
            if a.is_scalar or E.is_vector_shape(a.shape):
                return a  # NumPy: .T of a 1-D array is the array itself
            return E.transpose(a)
        if isinstance(node, ast.Call):
            return self.call(node, depth)
        what = _CONSTRUCT_NAMES.get(type(node), type(node).__name__)
        self.fail_node(f"{what} are not part of the formula language", node)

    def current_source(self, node):
        return "\n".join(self.source_lines[self.base - 1 :])

    def name(self, node):
        n = node.id
        if n in self.env:
            return self.env[n]
        if n in self.block.dims:
            self.fail_node(
                f"{n} is a dim, not a symbol; use it inside eye({n}), ones({n}) or zeros({n})",
                node,
            )
        if n in FUNCTIONS:
            self.fail_node(f"{n} is a function; call it, like {n}(A)", node)
        if n.startswith("__"):
            self.fail_node(f"unknown name {n!r}: dunder names are not part of the language", node)
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
            acc = None
            acc_node = cur
            for negate, tnode in terms_nodes:
                t = self.tr(tnode, depth)
                if acc is None:
                    acc = t
                    continue
                self.check_add(acc, t, tnode, acc_node, negate)
                acc = E.add(acc, E.neg(t) if negate else t)
            return acc
        a = self.tr(node.left, depth)
        b = self.tr(node.right, depth)
        if op is ast.Mult:
            if not (a.is_scalar or b.is_scalar) and a.shape != b.shape:
                self.fail_node(
                    f"cannot multiply entrywise a {E.describe(a)} and a {E.describe(b)}: "
                    "* needs equal shapes or a scalar (use @ for the matrix product)",
                    node,
                )
            return E.mul(a, b)
        if op is ast.Div:
            if not (a.is_scalar or b.is_scalar) and a.shape != b.shape:
                self.fail_node(
                    f"cannot divide entrywise a {E.describe(a)} by a {E.describe(b)}: "
                    "/ needs equal shapes or a scalar",
                    node,
                )
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
        if a.is_scalar or b.is_scalar or a.shape == b.shape:
            return
        verb = "subtract" if negate else "add"
        self.fail_node(
            f"cannot {verb} a {E.describe(b)} {'from' if negate else 'and'} a "
            f"{E.describe(a)}: shapes differ (only a scalar is added to every entry)",
            node,
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
                self.fail_node(
                    "method calls are not part of the formula language; write functions "
                    "like trace(A)",
                    node.func,
                )
            self.fail_node("only named functions can be called, like trace(A)", node.func)
        fname = node.func.id
        if node.keywords:
            kw = node.keywords[0]
            self.fail_node(
                f"keyword arguments are not part of the formula language ({fname} takes "
                "its arguments by position)",
                kw.value if kw.arg is None else kw.value,
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
            hint = f"; did you mean {close[0]}?" if close else ""
            self.fail_node(f"unknown function {fname!r}{hint}", node.func)
        lo, hi = FUNCTIONS[fname]
        n = len(node.args)
        if not lo <= n <= hi:
            want = str(lo) if lo == hi else f"{lo} or {hi}"
            self.fail_node(
                f"{fname} takes {want} argument{'s' if hi > 1 else ''}, got {n}", node
            )
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
            if not (
                isinstance(k, ast.Constant) and isinstance(k.value, int) and not isinstance(k.value, bool)
            ) or k.value < 0:
                self.fail_node("mpow(A, k) needs k to be a non-negative integer literal", k)
            if k.value > 64:
                self.fail_node("mpow(A, k): k larger than 64 is not supported yet", k, NotSupportedError)
            E.MatPow(base, k.value)  # shape check
            if k.value == 0:
                return E.Identity(base.shape[0])
            if k.value == 1:
                return base
            return E.MatPow(base, k.value)
        args = [self.tr(a, depth) for a in node.args]
        a = args[0]
        if fname in E.ELEMENTWISE:
            return E.Func(fname, a)
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
        if fname == "sum":
            return E.summation(a)
        if fname == "norm":
            if a.is_scalar:
                self.fail_node("norm needs an array, got a scalar", node)
            return E.Norm(a)
        if fname == "logsumexp":
            if a.is_scalar:
                return a
            return E.LogSumExp(a)
        if fname == "softmax":
            return E.Softmax(a)
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
        if isinstance(node, ast.Constant) and isinstance(node.value, int) and not isinstance(
            node.value, bool
        ):
            if node.value <= 0:
                self.fail_node("dims must be positive", node)
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
        self.fail_node("a dim is a name used in a declared shape, or a positive integer", node)


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


def _depth(e: E.Expr, cache: dict) -> int:
    got = cache.get(id(e))
    if got is not None:
        return got[1]
    kids = e.children
    d = 1 + max((_depth(c, cache) for c in kids), default=0) if kids else 1
    cache[id(e)] = (e, d)
    return d
