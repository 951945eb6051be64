"""The command line: derive a block file and print the steps, shapes, derivative and code.

python -m gradwright derive FILE --wrt U V [--show steps|result|latex|code]
"""

from __future__ import annotations

import argparse
import sys

from . import derive
from .errors import FormulaError


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
        choices=("all", "steps", "result", "latex", "code"),
        default="all",
        help="what to print: all (default), steps, result, latex (the derivation), code",
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
        out.append("  ".join(r[c].ljust(widths[c]) for c in cols))
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
        if args.show in ("all", "steps"):
            parts.append("Derivation\n" + d.text_steps())
        if args.show in ("all",):
            parts.append("Shapes\n" + _table(d.shape_table()))
        if args.show in ("all", "result"):
            parts.append("Result\n" + _result(d))
        if args.show == "latex":
            parts.append(d.latex())
        if args.show in ("all", "code"):
            parts.append(
                d.source() if args.show == "code" else "Generated NumPy code\n" + d.source()
            )
    except FormulaError as err:
        where = "" if args.file == "-" else f"{args.file}: "
        print(f"gradwright: {where}{err}", file=sys.stderr)
        return 2
    try:
        print("\n\n".join(parts))
    except BrokenPipeError:  # the reader (e.g. `head`) stopped early
        sys.stderr.close()
    return 0


def _result(d) -> str:
    from .printing import text

    lines = []
    for step in d.steps:
        if step.kind == "gradient":
            lines.append(f"d{d.target}/d{step.var} = {step.text()}")
        elif step.kind == "jacobian":
            lines.append(f"dvec({d.target})/dvec({step.var})^T = {step.text()}")
    if not d.is_scalar and not lines:
        lines.append(
            f"d{d.target} = {text(d.differential())}  (the JVP; the VJP and the dense "
            "Jacobian are generated)"
        )
    return "\n".join(lines)
