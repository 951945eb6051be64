"""The command line: derive a block file and print the derivation and its result; the
generated code and the LaTeX on request.

python -m gradwright derive FILE --wrt U V [--show steps|result|none] [--code] [--latex]
"""

from __future__ import annotations

import argparse
import sys

from . import derive
from .errors import FormulaError
from .notebook.render import SHOW_CHOICES  # the same values as %%derive --show


def _parser() -> argparse.ArgumentParser:
    p = argparse.ArgumentParser(
        prog="gradwright", description="Matrix differential calculus from the command line."
    )
    sub = p.add_subparsers(dest="command", required=True)
    d = sub.add_parser("derive", help="derive a block file with respect to its variables")
    d.add_argument("file", help="a block of the formula language ('-' reads standard input)")
    d.add_argument("--wrt", nargs="+", required=True, metavar="VAR", help="the variables")
    d.add_argument(
        "--show",
        choices=SHOW_CHOICES,
        default="steps",
        help="what to print, as in %%%%derive: every step with its rule, the shapes and the "
        "result (steps, the default), the result only, or none",
    )
    d.add_argument("--code", action="store_true", help="also print the generated NumPy code")
    d.add_argument(
        "--latex", action="store_true", help="also print the derivation as LaTeX (to_latex)"
    )
    d.add_argument(
        "--size",
        action="append",
        default=[],
        metavar="DIM=N",
        help="a typical dim size for the generated code's cost model (repeatable)",
    )
    return p


def _table(rows: list[dict]) -> str:
    cols = ("symbol", "shape", "structure", "role")
    widths = {c: max(len(c), *(len(r[c]) for r in rows)) for c in cols}
    line = "  ".join(c.ljust(widths[c]) for c in cols)
    out = [line, "  ".join("-" * widths[c] for c in cols)]
    for r in rows:
        out.append("  ".join((r[c] or "-").ljust(widths[c]) for c in cols))  # as the notebook
    return "\n".join(s.rstrip() for s in out)


def main(argv: list[str] | None = None) -> int:
    args = _parser().parse_args(argv)
    try:
        text = sys.stdin.read() if args.file == "-" else open(args.file, encoding="utf-8").read()
    except OSError as err:
        print(f"gradwright: cannot read {args.file}: {err.strerror}", file=sys.stderr)
        return 2
    sizes = {}
    for item in args.size:
        name, _, value = item.partition("=")
        if not value.isdigit():
            print(f"gradwright: --size wants DIM=N, got {item!r}", file=sys.stderr)
            return 2
        sizes[name] = int(value)
    try:
        d = derive(text, wrt=args.wrt, sizes=sizes or None)
        parts = []
        if args.show == "steps":
            parts.append("Derivation\n" + _aligned(d.text_steps()))
            parts.append("Shapes\n" + _table(d.shape_table()))
        if args.show in ("steps", "result"):
            parts.append("Result\n" + _result(d) + _jacobian_note(d))
        if args.latex:
            parts.append(d.to_latex() if parts else d.to_latex().rstrip("\n"))
        if args.code:
            parts.append("Generated NumPy code\n" + d.source() if parts else d.source())
    except FormulaError as err:
        where = "" if args.file == "-" else f"{args.file}: "
        print(f"gradwright: {where}{err}", file=sys.stderr)
        return 2
    try:
        if parts:
            print("\n\n".join(parts))
    except BrokenPipeError:  # the reader (e.g. `head`) stopped early
        sys.stderr.close()
    return 0


def _aligned(steps: str) -> str:
    """The left-hand side written once, the following lines starting under its `=`, as on
    paper (and in the notebook): `dloss = ...` then `      = ...`."""
    out, previous = [], None
    for line in steps.splitlines():
        lhs, sep, rhs = line.partition(" = ")
        if sep and lhs == previous:
            line = " " * len(lhs) + " = " + rhs
        previous = lhs if sep else None
        out.append(line)
    return "\n".join(out)


def _jacobian_note(d) -> str:
    """An array target's derivative is a Jacobian, not a gradient: said, as the magic says it."""
    if d.is_scalar:
        return ""
    shape = tuple(d.target_shape)
    kind = "a vector" if len(shape) == 1 else "a matrix"
    written = "(" + ", ".join(str(n) for n in shape) + ("," if len(shape) == 1 else "") + ")"
    return (
        f"\n\nNote: the target {d.target} is {kind} of shape {written}, not a scalar, so its "
        "derivative is a Jacobian, shown in Kronecker form for reading only; the generated code "
        "(--code) never builds it: its jvp and vjp functions apply it and its transpose."
    )


def _result(d) -> str:
    from .printing import text

    lines = []
    for step in d.steps:
        if step.kind == "gradient":
            lines.append(f"∂{d.target}/∂{step.var} = {step.text()}")
        elif step.kind == "jacobian":
            lines.append(f"∂vec({d.target})/∂vec({step.var})ᵀ = {step.text()}")
    if not d.is_scalar and not lines:
        lines.append(
            f"d{d.target} = {text(d.differential())}  (the JVP; the VJP and the dense "
            "Jacobian are generated)"
        )
    return "\n".join(lines)
