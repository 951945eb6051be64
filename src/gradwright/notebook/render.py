"""Rich displays of a derivation: the steps as math with the rule beside each, and the shape table.

Each display is a MIME bundle with a plain-text fallback, for JupyterLab, the classic notebook and
the terminal alike.
"""

from __future__ import annotations

import html

__all__ = [
    "SHOW_CHOICES",
    "derivation_bundle",
    "derivation_html",
    "derivation_latex",
    "derivation_text",
    "shape_rows",
    "shape_table_bundle",
    "dim_origins",
]

SHOW_CHOICES = ("steps", "result", "none")
_RESULT_KINDS = ("gradient", "jacobian")
_LATEX_TEXT_ESCAPES = {
    "\\": r"\textbackslash{}",
    "{": r"\{",
    "}": r"\}",
    "_": r"\_",
    "^": r"\^{}",
    "#": r"\#",
    "$": r"\$",
    "%": r"\%",
    "&": r"\&",
    "~": r"\~{}",
}


def latex_text(words: str) -> str:
    """Plain words safe inside `\\text{...}`."""
    return "".join(_LATEX_TEXT_ESCAPES.get(ch, ch) for ch in words)


RULE_WIDTH = 44  # characters per line of a rule's words before it wraps
#: the widest math line of a step in the notebook, in ems (an 1,100 px output keeps the rule
#: column beside it)
MATH_BUDGET = 38.0
#: the same for the one-piece LaTeX (`text/latex`, exported notebooks): its rule column does not
#: wrap by itself, so the math and the rules are both narrower to fit the same 1,100 px
LATEX_BUDGET = 30.0
LATEX_RULE_WIDTH = 28


def _wrap(words: str, width: int = RULE_WIDTH) -> list[str]:
    """Lines of LaTeX for a rule: words wrap between words, a formula is never split."""
    from gradwright.printing.layout import rule_lines

    return rule_lines(words, width)


def rule_latex(words: str, width: int = RULE_WIDTH) -> str:
    """A rule's plain words as small grey text, wrapped onto stacked lines when long."""
    lines = _wrap(words, width)
    body = (
        lines[0] if len(lines) == 1 else "\\begin{array}{l}" + " \\\\ ".join(lines) + "\\end{array}"
    )
    return f"\\color{{gray}}{{\\small {body}}}"


def _call(value):
    return value() if callable(value) else value


def _strip_lhs(rendered: str, lhs: str) -> str:
    """A step may render as "lhs = rhs"; keep the right-hand side for our own layout."""
    rendered = rendered.strip()
    if lhs and rendered.startswith(lhs):
        rest = rendered[len(lhs) :].lstrip()
        if rest.startswith("="):
            return rest[1:].strip()
    return rendered


def _steps(derivation, show: str):
    steps = list(derivation.steps)
    if len(steps) > 1 and steps[0].kind == "differential" and not steps[0].rule:
        steps = steps[1:]  # "d f = d(f)" says nothing yet
    if show == "result":
        results = [s for s in steps if s.kind in _RESULT_KINDS]
        # The last line per variable is the identified result.
        last: dict = {}
        for step in results:
            last[getattr(step, "var", None)] = step
        steps = list(last.values()) or steps[-1:]
    return steps


def _jacobian_note(derivation) -> str:
    target = derivation.target
    return (
        f"Kronecker form for reading only: the generated code never builds it; "
        f"jvp_{target} and vjp_{target} apply it and its transpose."
    )


def derivation_latex(derivation, show: str = "steps") -> str:
    """`$$\\begin{aligned}...$$`: one line per step, the rule in plain words at the right."""
    lines = []
    previous_kind = None
    previous_lhs = None
    for step in _steps(derivation, show):
        lhs = step.lhs_latex or ""
        first, *rest = _rhs_lines(step, lhs, LATEX_BUDGET)
        if previous_kind is not None and step.kind != previous_kind:
            lines.append(r"\\[-0.4em]")  # a little air between the differential and the result
        shown_lhs = "" if lhs == previous_lhs else lhs
        rule = f"&& {rule_latex(step.rule, LATEX_RULE_WIDTH)}" if step.rule else ""
        lines.append(f"{shown_lhs} &= {first} {rule}".rstrip())
        lines.extend(rf"&\qquad {more}" for more in rest)
        previous_kind, previous_lhs = step.kind, lhs
    if not derivation.is_scalar and show != "none":
        lines.append(f"&& {rule_latex(_jacobian_note(derivation), LATEX_RULE_WIDTH)}")
    body = " \\\\\n".join(line for line in lines if line != r"\\[-0.4em]")
    return "$$\n\\begin{aligned}\n" + body + "\n\\end{aligned}\n$$"


def _rhs_lines(step, lhs: str, budget: float = MATH_BUDGET) -> list[str]:
    """The step's right-hand side, broken at operators when wider than the output allows."""
    expr = getattr(step, "expr", None)
    if expr is not None:
        from gradwright.printing.layout import broken_lines

        return broken_lines(expr, budget)
    return [_strip_lhs(_call(step.latex), lhs)]


_CELL = "padding:1px 0.3em;vertical-align:baseline;"
_RULE_CELL = (
    "padding:1px 0 1px 1.8em;color:#666;font-size:85%;min-width:12em;max-width:22em;"
    "white-space:normal;overflow-wrap:normal;word-break:normal;text-align:left;"
)


def derivation_html(derivation, show: str = "steps") -> str:
    """The derivation as an HTML table: the left-hand side, the math (broken at operators, one
    row per line) and the rule in its own column, wrapping between words."""
    from gradwright.printing.layout import rule_html

    rows = []
    previous_lhs = None
    for step in _steps(derivation, show):
        lhs = step.lhs_latex or ""
        lines = _rhs_lines(step, lhs)
        shown = "" if lhs == previous_lhs else lhs
        rule = rule_html(step.rule) if step.rule else ""
        for i, line in enumerate(lines):
            left = f"\\(\\displaystyle {html.escape(shown)}\\)" if i == 0 and shown else ""
            math = ("= " if i == 0 else r"\qquad ") + line
            rows.append(
                f"<tr><td style='{_CELL}text-align:right;white-space:nowrap'>{left}</td>"
                f"<td class='gradwright-step-math' style='{_CELL}text-align:left;"
                f"white-space:nowrap'>\\(\\displaystyle {html.escape(math)}\\)</td>"
                f"<td class='gradwright-rule' style='{_RULE_CELL}'>{rule if i == 0 else ''}</td>"
                "</tr>"
            )
        previous_lhs = lhs
    if not derivation.is_scalar and show != "none":
        rows.append(
            f"<tr><td></td><td colspan='2' class='gradwright-rule' style='{_RULE_CELL}"
            f"padding-left:0.3em'>{html.escape(_jacobian_note(derivation))}</td></tr>"
        )
    return (
        "<div class='gradwright-derivation' style='max-width:100%'>"
        "<table style='border-collapse:collapse;margin:0.3em 0'>" + "".join(rows) + "</table></div>"
    )


def derivation_text(derivation, show: str = "steps") -> str:
    """The same layout in plain text: expression, then the rule in brackets."""
    rows = []
    previous_lhs = None
    for step in _steps(derivation, show):
        lhs = _plain_lhs(step, derivation.target)
        rhs = _strip_lhs(_call(step.text), lhs)
        shown = "" if lhs == previous_lhs else lhs
        rows.append((shown, rhs, step.rule or ""))
        previous_lhs = lhs
    width = max((len(r[0]) for r in rows), default=0)
    body = max((len(r[1]) for r in rows), default=0)
    out = []
    for lhs, rhs, rule in rows:
        line = f"{lhs:>{width}} = {rhs:<{min(body, 70)}}"
        out.append(f"{line}   [{rule}]" if rule else line.rstrip())
    if not derivation.is_scalar:
        out.append(_jacobian_note(derivation))
    return "\n".join(out)


def _plain_lhs(step, target: str) -> str:
    """The left-hand side in plain text (the terminal fallback)."""
    if step.kind == "gradient":
        return f"∂{target}/∂{step.var}"
    if step.kind == "jacobian":
        return f"∂vec({target})/∂vec({step.var})ᵀ"
    if "vec" in (step.lhs_latex or ""):
        return f"vec(d{target})"
    return f"d{target}"


def derivation_bundle(derivation, show: str = "steps") -> dict:
    """MIME bundle of the derivation: `text/latex` with a `text/plain` fallback."""
    try:
        latex = derivation_latex(derivation, show)
        text = derivation_text(derivation, show)
        page = derivation_html(derivation, show)
    except (AttributeError, TypeError):
        # A derivation without the step layout we expect still shows the core's own rendering.
        latex = derivation.latex()
        if "$" not in latex:
            latex = f"$$\n{latex}\n$$"
        text = derivation.text()
        return {"text/latex": latex, "text/plain": text}
    # JupyterLab shows the HTML table (rules wrap in their own column); other front ends the math
    return {"text/html": page, "text/latex": latex, "text/plain": text}


# --- shape table --------------------------------------------------------------------------


def _shape_text(shape) -> str:
    shape = tuple(shape)
    if not shape:
        return "()"  # as the symbols' rows above it write a scalar
    return "(" + ", ".join(str(d) for d in shape) + (",)" if len(shape) == 1 else ")")


def _size_text(shape) -> str:
    shape = tuple(shape)
    return "*".join(str(d) for d in shape) if shape else "1"


def _axis_words(ndim: int, axis: int) -> str:
    if ndim == 1:
        return "length"
    return {0: "rows", 1: "columns"}.get(axis, f"axis {axis}")


def dim_origins(derivation) -> list[tuple[str, str]]:
    """(dim, where it comes from), e.g. ("n", "rows of Z, rows and columns of S")."""
    rows = []
    for dim, places in derivation.dims.items():
        by_symbol: dict = {}
        for symbol, axis in places:
            info = derivation.symbols.get(symbol)
            ndim = len(tuple(info.shape)) if info is not None else 2
            by_symbol.setdefault(symbol, []).append(_axis_words(ndim, axis))
        words = ", ".join(f"{' and '.join(axes)} of {symbol}" for symbol, axes in by_symbol.items())
        rows.append((str(dim), words))
    return rows


def shape_rows(derivation) -> list[dict]:
    """Every symbol with its shape, structure and role, then the derivative's shape per variable."""
    rows = []
    for row in derivation.shape_table():
        structure = row.get("structure") or ""
        if isinstance(structure, (tuple, list)):
            structure = " ".join(structure)
        if "field" in row:  # "complex" is the field column's word, not a structure
            structure = " ".join(w for w in structure.split() if w != "complex")
        rows.append(
            {
                "symbol": str(row["symbol"]),
                "shape": str(row["shape"]),
                "structure": structure,
                "role": str(row["role"]),
                **({"field": str(row["field"])} if "field" in row else {}),
            }
        )
    field_of = getattr(derivation, "field", None)  # complex blocks say real or complex
    target = derivation.target
    for var in derivation.variables:
        info = derivation.symbols[var]
        if derivation.is_scalar:
            rows.append(
                {
                    "symbol": f"gradient of {target} wrt {var}",
                    "shape": _shape_text(info.shape),
                    "structure": _gradient_structure(info.structure),
                    "role": "result",
                    **({"field": field_of(var)} if field_of else {}),
                }
            )
        else:
            size_f = _size_text(derivation.target_shape)
            size_x = _size_text(info.shape)
            rows.append(
                {
                    "symbol": f"Jacobian of {target} wrt {var}",
                    "shape": f"({size_f}, {size_x})",
                    "structure": "",
                    "role": "result",
                }
            )
    return rows


def _gradient_structure(words) -> str:
    """What the gradient keeps of its variable's structure: the gradient lives in the tangent
    space (symmetric or diagonal matrices), it is not itself positive definite, positive or
    orthogonal."""
    words = set(words)
    if "diagonal" in words:
        return "diagonal"
    if words & {"symmetric", "spd"}:
        return "symmetric"
    if words & {"hermitian", "hpd"}:
        return "hermitian"
    return ""


def shape_table_bundle(derivation) -> dict:
    """MIME bundle of the shape table: `text/html` with a `text/plain` fallback."""
    rows = shape_rows(derivation)
    dims = dim_origins(derivation)
    head = ("symbol", "shape", "structure", "role")
    if rows and all("field" in r for r in rows):
        head = ("symbol", "shape", "field", "structure", "role")

    def cell(row, key):
        text = html.escape(row[key]) or "&ndash;"
        if key == "symbol" and row["role"] != "result":
            text = f"<code>{text}</code>"
        return f"<td style='text-align:left'>{text}</td>"

    cells = "".join("<tr>" + "".join(cell(r, k) for k in head) + "</tr>" for r in rows)
    dim_items = "".join(
        f"<tr><td style='text-align:left'><code>{html.escape(d)}</code></td>"
        f"<td style='text-align:left'>{html.escape(w)}</td></tr>"
        for d, w in dims
    )
    table_html = (
        "<div class='gradwright-shapes'>"
        "<table style='border-collapse:collapse;font-size:90%'>"
        "<thead><tr>"
        + "".join(f"<th style='text-align:left'>{h}</th>" for h in head)
        + f"</tr></thead><tbody>{cells}</tbody></table>"
    )
    if dims:
        table_html += (
            "<table style='border-collapse:collapse;font-size:90%;margin-top:4px'>"
            "<thead><tr><th style='text-align:left'>dim</th>"
            "<th style='text-align:left'>comes from</th></tr></thead>"
            f"<tbody>{dim_items}</tbody></table>"
        )
    table_html += "</div>"

    widths = [max(len(h), *(len(r[h]) for r in rows)) for h in head]
    lines = ["  ".join(h.ljust(w) for h, w in zip(head, widths)).rstrip()]
    lines.append("  ".join("-" * w for w in widths))
    for r in rows:
        lines.append("  ".join((r[h] or "-").ljust(w) for h, w in zip(head, widths)).rstrip())
    if dims:
        lines.append("")
        lines.append("dims: " + "; ".join(f"{d} from {w}" for d, w in dims))
    return {"text/html": table_html, "text/plain": "\n".join(lines)}
