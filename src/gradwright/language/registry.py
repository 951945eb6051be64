"""The table of callable functions beyond the core ones in `parser.py`, one module per family.

A family module (`calls_*.py` beside this file) registers each function with its arity, the
keyword arguments it accepts and a builder; the reader calls the builder with the translated
arguments.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass


@dataclass(frozen=True)
class CallSpec:
    """One function of the language.

    builder(reader, node, args, keywords) -> Expr, where `args` are the translated positional
    arguments (expression trees; the raw `ast` nodes when `raw` is set) and `keywords` maps each
    keyword given to its raw `ast` node (the builder reads and checks literal values itself,
    failing with `reader.fail_node(message, node)` so the caret lands under the offending part).
    """

    name: str
    min_args: int
    max_args: int
    builder: Callable
    keywords: tuple[str, ...] = ()
    raw: bool = False


CALLS: dict[str, CallSpec] = {}


def register(name: str, min_args: int, max_args: int, keywords=(), raw: bool = False):
    """Decorator: register `builder` as the function `name` of the formula language."""

    def wrap(builder):
        if name in CALLS:  # pragma: no cover - a programming error caught at import
            raise AssertionError(f"function {name} registered twice")
        CALLS[name] = CallSpec(name, min_args, max_args, builder, tuple(keywords), raw)
        return builder

    return wrap
