"""Error carets: a FormulaError pointing at the line and columns of an ast node; a part of the
reader."""

from __future__ import annotations

from ..errors import FormulaError


class Carets:
    """Mixed into the reader: `fail`, `fail_node` and `fail_attr` raise with a caret."""

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

    def fail_attr(self, reason, node):
        """A caret under `.attr` of an attribute node, not under the whole `value.attr`."""
        lineno = self.base + node.end_lineno - 1 if node.end_lineno else self.base + node.lineno - 1
        src = self.source_lines[lineno - 1]
        end = _char_col(src, node.end_col_offset) if node.end_col_offset is not None else len(src)
        dot = src.rfind(".", 0, end - len(node.attr) + 1)
        start = dot if dot >= 0 else max(0, end - len(node.attr))
        self.fail(reason, lineno, start, end - start)


def _char_col(line: str, byte_offset: int) -> int:
    """ast gives UTF-8 byte offsets; carets need character columns."""
    raw = line.encode("utf-8")
    return len(raw[:byte_offset].decode("utf-8", errors="replace"))
