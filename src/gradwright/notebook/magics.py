"""IPython magics of gradwright: `%%derive` shows a block's derivation, injects its NumPy functions
and attaches a check panel; `%identities` opens the identity catalogue.

Load with ``%load_ext gradwright``.
"""

from __future__ import annotations

import keyword
import re
import textwrap

from IPython.core.error import UsageError
from IPython.core.magic import Magics, cell_magic, line_magic, magics_class
from IPython.core.magic_arguments import argument, magic_arguments, parse_argstring

from ..language.help import language_help
from .render import SHOW_CHOICES, derivation_bundle, shape_table_bundle

__all__ = ["GradwrightMagics", "load_ipython_extension"]


def _publish(bundle: dict) -> None:
    from IPython.display import publish_display_data

    publish_display_data(bundle)


def _kind_of(value) -> str:
    kind = type(value).__name__
    if callable(value):
        return "a function"
    return f"{'an' if kind[:1].lower() in 'aeiou' else 'a'} {kind}"


def _in_cell(err):
    """The error with its line counted from the cell: the %%derive line is the cell's line 1."""
    if not err.line:
        return err
    return type(err)(
        err.reason,
        line=err.line + 1,
        column=err.column,
        source_line=err.source_line,
        width=err.width,
    )


def _jacobian_note(derivation, name: str) -> str:
    shape = ", ".join(str(d) for d in derivation.target_shape)
    kind = "a vector" if len(derivation.target_shape) == 1 else "a matrix"
    return (
        f"Note: the target {derivation.target} is {kind} of shape ({shape}"
        f"{',' if len(derivation.target_shape) == 1 else ''}), not a scalar, so its derivative is "
        f"a Jacobian: jvp_{name}, vjp_{name} and jacobian_{name} are injected instead of a "
        "gradient."
    )


def _check_name(name: str) -> None:
    if not name.isidentifier() or keyword.iskeyword(name):
        raise UsageError(f"--name {name!r} is not a Python name")


@magics_class
class GradwrightMagics(Magics):
    """The magics; `last_derivation` is the most recent `%%derive` (for `%identities`)."""

    def __init__(self, shell=None):
        super().__init__(shell)
        self._injected: dict = {}  # name -> the object we put there
        self.last_derivation = None

    # -- %%derive -------------------------------------------------------------------------
    @magic_arguments("%derive")  # shown as %%derive in the generated help
    @argument(
        "variables",
        nargs="+",
        metavar="VAR",
        help="the variables to differentiate with respect to; every other declared symbol "
        "is a constant",
    )
    @argument(
        "--name",
        "-n",
        metavar="NAME",
        help="base name of the injected functions (default: the target's name)",
    )
    @argument(
        "--show",
        choices=SHOW_CHOICES,
        default="steps",
        help="what to display: every step with its rule (default), the result only, or nothing "
        "but the list of injected names",
    )
    @argument("--no-check", action="store_true", help="do not attach the check panel")
    @argument(
        "--force",
        action="store_true",
        help="overwrite names that already hold something you made",
    )
    @argument(
        "--export",
        metavar="PATH",
        help="also write a standalone notebook (.ipynb) of this derivation to PATH",
    )
    @cell_magic
    def derive(self, line, cell):
        """Derive the target of a formula block (the cell body) with respect to VAR ...

        The functions are injected as NAME (value), grad_NAME (gradient, a tuple for several
        variables), NAME_pack / NAME_unpack / NAME_objective (for scipy.optimize), NAME_check
        (the check panel) and NAME_derivation; array targets get jvp_NAME, vjp_NAME and
        jacobian_NAME instead of grad_NAME and NAME_objective. Every function takes the arrays
        as keyword arguments named as in the block.
        """
        args = parse_argstring(self.derive, line)
        if not cell.strip():
            raise UsageError(
                "the cell is empty: write declarations like `X: (n, n)` and a last line "
                "`f = ...` below %%derive"
            )
        variables = [v for token in args.variables for v in token.split(",") if v]
        derivation = self._derive(cell, variables)
        name = args.name or derivation.target
        _check_name(name)

        from gradwright import FormulaError

        from .functions import Injected, injections

        try:
            plan = injections(derivation, name)
        except FormulaError as err:  # e.g. a product the code generator does not support yet
            raise UsageError(str(_in_cell(err))) from None
        panel = None
        if not args.no_check:
            from .check_panel import CheckPanel

            panel = CheckPanel(derivation, namespace=self.shell.user_ns)
            plan.insert(
                len(plan) - 1,
                Injected(
                    f"{name}_check", panel, f"{name}_check  the check panel (.run(), .last_result)"
                ),
            )
        self._refuse_clobbering([item.name for item in plan], args.force)

        if args.export:
            self._export(derivation, args.export)

        if args.show != "none":
            _publish(derivation_bundle(derivation, args.show))
            _publish(shape_table_bundle(derivation))

        for item in plan:
            self.shell.user_ns[item.name] = item.value
            self._injected[item.name] = item.value
        self.last_derivation = derivation

        if not derivation.is_scalar:
            print(textwrap.fill(_jacobian_note(derivation, name), width=88))
        print("Injected:")
        for item in plan:
            print(f"  {item.describes}")
        if args.export:
            print(f"Exported a standalone notebook to {args.export}")
        if panel is not None:
            from IPython.display import display

            display(panel)

    def _derive(self, cell: str, variables: list):
        from gradwright import FormulaError, derive

        try:
            return derive(cell, wrt=variables)
        except FormulaError as err:
            raise UsageError(str(_in_cell(err))) from None

    def _refuse_clobbering(self, names, force: bool) -> None:
        user_ns = self.shell.user_ns
        taken = [n for n in names if n in user_ns and user_ns[n] is not self._injected.get(n)]
        if taken and not force:
            which = ", ".join(f"{n} ({_kind_of(user_ns[n])})" for n in taken)
            verb = "holds" if len(taken) == 1 else "hold"
            raise UsageError(
                f"{which} already {verb} something you made, so nothing was injected. "
                "Add --force to overwrite, or choose other names with --name NAME."
            )

    def _export(self, derivation, path: str) -> None:
        from .export import write_notebook

        try:
            write_notebook(derivation, path)
        except OSError as err:
            raise UsageError(f"cannot write {path}: {err.strerror or err}") from None

    # -- %identities ----------------------------------------------------------------------
    @magic_arguments()
    @argument("words", nargs="*", help="search words, e.g. trace inverse")
    @argument("--family", "-f", metavar="FAMILY", help="show only this family (a tag)")
    @line_magic
    def identities(self, line):
        """Open the identity catalogue: every identity when no WORDS are given, else those
        matching WORDS; the identities that apply to the last %%derive's target are a toggle
        away."""
        args = parse_argstring(self.identities, line)
        from .identity_panel import IdentityPanel

        panel = IdentityPanel(
            query=" ".join(args.words), family=args.family, derivation=self.last_derivation
        )
        from IPython.display import display

        display(panel)


_LANGUAGE_SUMMARY = """
The formula language (the cell body; NumPy syntax, read but never executed):

  X: (n, p)              declaration: a name, its shape in dims; () or `scalar` is a scalar
  S: (p, p) spd          structure words: {structures}
  R = X @ B - Y          a definition, usable below; the last definition is the target
  f = trace(R.T @ solve(S, R)) + lam * sum(B**2)

  @ matrix product, .T transpose, + - and * / ** entrywise (NumPy broadcasting);
{functions}
  Lines count from the cell: the %%derive line is line 1. `# ...` starts a comment.
"""


def _help(doc: str, summary: str = "") -> str:
    """The generated help without the reST `::` marker, the usage lines flush left."""
    head, sep, rest = doc.partition("::\n\n")
    if sep and not head.strip():
        usage, _, body = rest.partition("\n\n")
        doc = "Usage:\n" + usage + "\n\n" + body
    return doc.rstrip() + "\n" + summary


#: the width of `%%derive?` (a pager or an output area wraps longer lines inside words)
HELP_WIDTH = 92
#: functions that printed derivatives use and that parse back, but that nobody writes first
_PRINTED_FORMS = re.compile(r"_(jvp|vjp|frechet\d*|half|weights)$|^kron_contract_|^unvec$")


def _function_names() -> str:
    from gradwright.language import parser
    from gradwright.language.registry import CALLS

    names = sorted(n for n in set(parser.FUNCTIONS) | set(CALLS) if not n.startswith("_"))
    written = [n for n in names if not _PRINTED_FORMS.search(n)]
    printed = [n for n in names if _PRINTED_FORMS.search(n)]
    text = textwrap.fill(
        "functions: " + ", ".join(written) + ".",
        width=HELP_WIDTH,
        initial_indent="  ",
        subsequent_indent="    ",
    )
    if printed:
        text += "\n" + textwrap.fill(
            "in printed derivatives (they parse back): " + ", ".join(printed) + ".",
            width=HELP_WIDTH,
            initial_indent="  ",
            subsequent_indent="    ",
        )
    return text


def _numpy_constructs() -> str:
    """The NumPy constructs of the formula language, one entry each, laid out as the
    language's other constructs are (written, then what NumPy computes and what is derived)."""
    from gradwright.language.help_numpy import NUMPY_CONSTRUCTS

    lines = ["NumPy's reductions and entrywise functions:"]
    for written, numpy_does, derives in NUMPY_CONSTRUCTS:
        lines.append(f"  {written}")
        lines.append(f"      NumPy: {numpy_does}")
        lines.append(f"      derived: {derives}")
    return "\n".join(lines)


def _fit(text: str, width: int = HELP_WIDTH) -> str:
    """Long lines wrapped between words, continuations indented under their line."""
    out = []
    for line in text.splitlines():
        if len(line) <= width:
            out.append(line)
            continue
        indent = line[: len(line) - len(line.lstrip())]
        out.append(
            textwrap.fill(
                line.strip(),
                width=width,
                initial_indent=indent,
                subsequent_indent=indent + "    ",
                break_long_words=False,
                break_on_hyphens=False,
            )
        )
    return "\n".join(out)


def _structure_words() -> str:
    from gradwright.language.parser import STRUCTURE_WORDS

    column = len("  S: (p, p) spd          structure words: ")  # continuations align here
    lines = textwrap.wrap(" ".join(STRUCTURE_WORDS), width=HELP_WIDTH - column)
    return ("\n" + " " * column).join(lines)


GradwrightMagics.derive.__doc__ = _help(
    GradwrightMagics.derive.__doc__ or "",
    _LANGUAGE_SUMMARY.format(functions=_function_names(), structures=_structure_words())
    + "\n"
    + _numpy_constructs()
    + "\n",
)
GradwrightMagics.identities.__doc__ = _help(GradwrightMagics.identities.__doc__ or "")


def load_ipython_extension(ipython) -> None:
    """Register gradwright's magics (`%load_ext gradwright`)."""
    ipython.register_magics(GradwrightMagics)


# the formula language's constructs in `%%derive?` (after the help generated from the options)
GradwrightMagics.derive.__doc__ = _fit((GradwrightMagics.derive.__doc__ or "") + language_help())
