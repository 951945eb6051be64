"""Reading printed math back the way a reader does, to check that it is well-shaped.

`reading(e)` is the shape a reader gives to the LaTeX of `e`: vectors are columns unless the
printed text carries a transpose, a ones vector is a column of any length unless it is printed
`\\mathbf{1}^{\\top}`, `I` is square of any size. Every juxtaposed product is checked factor by
factor with those readings, so a transpose the printer drops makes the check fail.
"""

from __future__ import annotations

import re

from gradwright import expr as E
from gradwright.printing.base import significant_digits
from gradwright.printing.latex import LatexPrinter

ANY = "any"  # a length the reader fills in from the context (1, I)
_PRINTER = LatexPrinter()


class Misshapen(AssertionError):
    pass


def _dim(d):
    return 1 if d is None else str(d)


def _fits(a, b) -> bool:
    return a == b or ANY in (a, b)


def reading(e: E.Expr) -> tuple:
    """(rows, cols) as read from the printed LaTeX of e; raises Misshapen on a bad product."""
    t = type(e)
    printed = _PRINTER._print(e)
    if t is E.Ones:
        rows_printed = printed.endswith(r"^{\top}")
        r, c = e.shape
        if r is not None and c is not None:
            return (ANY, ANY)
        return (1, ANY) if rows_printed else (ANY, 1)
    if t in (E.Identity, E.Zero):
        return (ANY, ANY) if not e.is_scalar else (1, 1)
    if t is E.Transpose:
        r, c = reading(e.args[0])
        if not printed.endswith(r"^{\top}") and not printed.endswith(r"^{-\top}"):
            raise Misshapen(f"a transpose is not printed: {printed}")
        return (c, r)
    if t is E.Inverse:
        return reading(e.args[0])
    if t is E.MatMul:
        readings = [reading(f) for f in e.args]
        for (f1, (_, c1)), (f2, (r2, _)) in zip(
            zip(e.args, readings), zip(e.args[1:], readings[1:])
        ):
            if not _fits(c1, r2):
                raise Misshapen(
                    f"printed product {_PRINTER._print(f1)} · {_PRINTER._print(f2)}: "
                    f"{c1} columns against {r2} rows, in {printed}"
                )
        return (readings[0][0], readings[-1][1])
    if t is E.Solve:
        (_, c1), (r2, c2) = reading(e.args[0]), reading(e.args[1])
        if not _fits(c1, r2):
            raise Misshapen(f"printed solve {printed}: {c1} against {r2}")
        return (reading(e.args[0])[1], c2)
    for c in e.children:
        reading(c)
    r, c = e.shape
    return (_dim(r), _dim(c))


#: one LaTeX spelling per operation: the spellings that must never appear
FORBIDDEN_LATEX = {
    r"\odot": "the Hadamard product is \\circ everywhere",
    r"\cdot \otimes": "an undefined contraction notation",
    r"\langle": "an undefined pairing notation",
    "kron_contract": "an internal name",
}

_NUMBER = re.compile(r"(?<![A-Za-z_{])(\d+\.\d+|\d+)(?:\s*\\times\s*10\^\{(-?\d+)\})?")
_LITERAL = re.compile(r"(?<![A-Za-z_\d.])(\d+\.\d*(?:[eE][-+]?\d+)?|\d+[eE][-+]?\d+|\d+)")


def written_digits(block: str) -> int:
    """The most significant digits of any number written in the block's expressions."""
    most = 1
    for line in block.splitlines():
        line = line.split("#")[0]
        if ":" in line and "=" not in line:
            continue  # a declaration: its numbers are dims
        for m in _LITERAL.finditer(line):
            most = max(most, significant_digits(m.group(1)))
    return most


def printed_numbers(latex: str) -> list[str]:
    """Numbers in LaTeX outside subscripts (W_{1} is a name, not a number)."""
    stripped = re.sub(r"_\{[^{}]*\}", "", latex)
    stripped = re.sub(r"\^\{\\circ -?\d+\}", "", stripped)
    return [m.group(1) for m in _NUMBER.finditer(stripped)]


def check_latex_notation(latex: str, block: str, slack: int = 4) -> None:
    for spelling, why in FORBIDDEN_LATEX.items():
        if spelling in latex:
            raise Misshapen(f"{spelling!r} in the LaTeX ({why}): {latex[:300]}")
    allowed = max(slack, written_digits(block))
    for number in printed_numbers(latex):
        if significant_digits(number) > allowed:
            raise Misshapen(f"{number} has more digits than written ({allowed}): {latex[:300]}")
