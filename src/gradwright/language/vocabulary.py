"""The words of the formula language: structure words, bounds, the function table and the
names of the Python constructs it refuses; shared by the parts of the reader."""

from __future__ import annotations

import ast
import importlib
import os as _os
import pkgutil
import re

from .. import expr as E
from ..entrywise import SPELLED_APART
from .registry import CALLS

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
