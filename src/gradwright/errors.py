"""The one root error class for everything the user wrote, and its caret rendering.

Internal code raises `ShapeError` without a location; the language layer adds the location.
"""

from __future__ import annotations

__all__ = ["FormulaError", "NotSupportedError", "ShapeError"]


class FormulaError(ValueError):
    """A problem with what the user wrote: where it is (line, column) and why it is wrong.

    >>> err = FormulaError("unknown name 'Q'", line=2, column=9, source_line="f = 2 * Q", width=1)
    >>> print(err)
    line 2: unknown name 'Q'
        f = 2 * Q
                ^
    """

    def __init__(
        self,
        reason: str,
        *,
        line: int | None = None,
        column: int | None = None,
        source_line: str | None = None,
        width: int = 1,
    ):
        self.reason = reason
        self.line = line
        self.column = column
        self.source_line = source_line
        self.width = max(1, width)
        super().__init__(self.rendered())

    def rendered(self) -> str:
        head = f"line {self.line}: {self.reason}" if self.line else self.reason
        if self.source_line is None or self.column is None:
            return head
        shown = self.source_line.rstrip("\n")
        if len(shown) > 160:  # a multi-megabyte line is quoted around the caret only
            start = max(0, self.column - 1 - 60)
            shown = ("..." if start else "") + shown[start : start + 120] + "..."
            col = self.column - start + (3 if start else 0)
        else:
            col = self.column
        width = min(self.width, max(1, len(shown) - col + 1))
        # a tab before the caret is repeated as a tab, so the caret lines up however wide the
        # terminal shows tabs
        pad = "".join("\t" if ch == "\t" else " " for ch in shown[: col - 1])
        pad += " " * max(0, col - 1 - len(shown))
        return f"{head}\n    {shown}\n    {pad}{'^' * width}"

    def __str__(self) -> str:
        return self.rendered()

    def __reduce__(self):
        return (
            _rebuild,
            (self.__class__, self.reason, self.line, self.column, self.source_line, self.width),
        )


def _rebuild(cls, reason, line, column, source_line, width):
    return cls(reason, line=line, column=column, source_line=source_line, width=width)


class NotSupportedError(FormulaError):
    """The input is well formed but gradwright cannot handle it yet; the message says what."""


class ShapeError(Exception):
    """Raised by node constructors; the language layer turns it into a located FormulaError."""


def at_the_boundary(fn):
    """Public entry points re-raise a FormulaError without the internal frames behind it, so a
    user sees the message and their own line, not gradwright's call stack."""
    import functools

    @functools.wraps(fn)
    def entry(*args, **kwargs):
        try:
            return fn(*args, **kwargs)
        except FormulaError as err:
            raise err.with_traceback(None) from None

    return frame_named(entry, fn.__name__)


def frame_named(wrapper, name: str):
    """The wrapper's frame in a traceback reads `in derive(...)`, the name the user called,
    not `at_the_boundary.<locals>.entry`."""
    code = wrapper.__code__
    try:
        wrapper.__code__ = code.replace(co_name=name, co_qualname=name)
    except TypeError:  # Python 3.10: no co_qualname
        wrapper.__code__ = code.replace(co_name=name)
    return wrapper
