"""Python's syntax errors said in the words of the formula language: a part of the reader."""

from __future__ import annotations

import keyword
import re


class SyntaxErrors:
    """Mixed into the reader: `syntax_error` turns Python's SyntaxError into a FormulaError."""

    def syntax_error(self, err, code, lineno):
        """Python's SyntaxError, said in the words of the formula language."""
        from .parser import _ASSIGN_RE, _COMPOUND_OPENERS, _OPENER_RE, LIMITS, _not_in_language

        msg = err.msg or "invalid syntax"
        rel = (err.lineno or 1) - 1
        line = min(lineno + rel, len(self.source_lines))
        src = self.source_lines[line - 1]
        col = max(0, (err.offset or 1) - 1)
        col = min(col, max(0, len(src)))
        width = 1
        if getattr(err, "end_lineno", None) == err.lineno and err.end_offset:
            width = max(1, min(err.end_offset - 1, len(src)) - col)
        first = _OPENER_RE.match(code)
        word = first.group(1) if first else ""
        assign = _ASSIGN_RE.match(code)
        if assign and keyword.iskeyword(assign.group(1)):
            self.check_name(assign.group(1), lineno, code.index(assign.group(1)))
        if word in _COMPOUND_OPENERS:
            self.fail(
                _not_in_language(_COMPOUND_OPENERS[word]), lineno, code.index(word), len(word)
            )
        if msg.startswith("unexpected indent") or msg.startswith("unindent"):
            indent = len(src) - len(src.lstrip())
            self.fail(
                "every line of a block starts at the left margin (this one is indented)",
                line,
                0,
                max(1, indent),
            )
        if (
            "unterminated string" in msg
            or "EOL" in msg
            or "unicode error" in msg
            or "triple-quoted" in msg
        ):
            self.fail(_not_in_language("strings are"), line, col, 1)
        if msg.startswith("f-string"):
            self.fail(_not_in_language("f-strings are"), line, col, 1)
        if "integer string conversion" in msg:
            digits = re.search(r"\d{100,}", src)
            at = digits.start() if digits else col
            self.fail(
                "the number is far too long; constants are limited to about "
                f"{LIMITS['constant_bits'] * 3 // 10:,} digits",
                line,
                at,
                20,
            )
        if "too many nested parentheses" in msg:
            # CPython's tokenizer allows 200 open brackets (MAXLEVEL, from memory)
            self.fail(
                "too many nested parentheses for Python's reader; split the formula into "
                f"definitions (gradwright allows {LIMITS['nesting_depth']} levels)",
                line,
                col,
                1,
            )
        if "too complex" in msg:
            self.fail(
                "the formula is too complex for Python's reader; split it into definitions",
                line,
                col,
                1,
            )
        if code.rstrip().endswith("\\") and ("EOF" in msg or "end of file" in msg):
            self.fail(
                "the last line ends with a '\\' continuation but nothing follows",
                line,
                max(0, len(src.rstrip()) - 1),
                1,
            )
        if "'(' was never closed" in msg or "was never closed" in msg:
            self.fail(
                f"syntax error: {msg} (every opening bracket needs its closing one)",
                line,
                col,
                1,
            )
        if msg.startswith("invalid syntax. Perhaps you forgot a comma"):
            msg = "two operands in a row with no operator between them (a missing @, * or +?)"
        elif msg == "invalid syntax":
            msg = (
                "invalid syntax here (an operand or an operator is missing, or there is one "
                "too many)"
            )
        elif msg.startswith("invalid syntax. Maybe you meant '==' or ':='"):
            msg = (
                "'=' can only define a name at the start of a line (R = ...); "
                "keyword arguments and comparisons are not part of the formula language"
            )
        self.fail(f"syntax error: {msg}", line, col, width)
