"""The check panel: compares a derivation's generated derivative with finite differences.

Controls, a run button, a status line and one `Output`; the numbers come from `fdcheck`.
"""

from __future__ import annotations

import html
import io
import math

import numpy as np

from .fdcheck import (
    COMPLEX_STEP_UNAVAILABLE,
    METHODS,
    CheckResult,
    default_step,
    default_tolerance,
    fit_namespace,
    run_check,
)

__all__ = ["CheckPanel", "DEFAULT_SIZES"]

# Distinct small sizes per dim, so that a transposed product cannot pass by accident.
DEFAULT_SIZES = (4, 3, 5, 2, 6, 7)
ALL = "all variables"
STATUS_CLASS = "gradwright-check-status"
#: the largest dim size the check draws random arrays for (a dense Jacobian check is O(size²))
MAX_DIM = 500
LABEL_WIDTH = "72px"  # one width for every control's description, so that they line up


def number_text(value: float) -> str:
    """A number with three significant digits and its exponent: 6.06e-06, 0.0001, 1.49e-08."""
    if not math.isfinite(value):
        return str(value)
    return f"{value:.3g}"


class NumberBox:
    """A text box holding a float shown with significant digits (a FloatText shows every digit
    and hides the exponent); `.value` reads and writes the float, NaN when the text is not a
    number, and an invalid entry is named in `message`."""

    def __init__(self, w, value: float, description: str, width: str, tooltip: str = ""):
        self.text = w.Text(
            value=number_text(value),
            description=description,
            layout=w.Layout(width=width),
            style={"description_width": LABEL_WIDTH},
            tooltip=tooltip,
            continuous_update=False,
        )
        self.description = description
        self._exact = float(value)  # the value set from code, kept beyond the digits shown
        self.message = w.HTML()
        self.text.observe(self._validate, names="value")

    @property
    def value(self) -> float:
        if self.text.value == number_text(self._exact):
            return self._exact
        try:
            return float(self.text.value.strip())
        except ValueError:
            return float("nan")

    @value.setter
    def value(self, number: float) -> None:
        self._exact = float(number)
        self.text.value = number_text(self._exact)

    def _validate(self, _change=None) -> None:
        v = self.value
        ok = math.isfinite(v) and v > 0
        self.message.value = (
            ""
            if ok
            else f"<span style='color:#b42318'>{html.escape(self.description)}: "
            f"{html.escape(self.text.value)!s} is not a positive number</span>"
        )


def _plot_png(figure) -> bytes:
    buffer = io.BytesIO()
    figure.savefig(buffer, format="png", dpi=96, bbox_inches="tight")
    return buffer.getvalue()


def sweep_figure(result: CheckResult):
    """Log-log plot of error against step size, the chosen step marked; None without data."""
    from matplotlib.figure import Figure

    checks = [c for c in result.checks if c.sweep is not None]
    if not checks:
        return None
    figure = Figure(figsize=(4.0, 2.9))
    axes = figure.subplots()
    styles = {"central": "-", "forward": "--", "complex step": ":"}
    colors = ["tab:blue", "tab:orange", "tab:green", "tab:purple", "tab:brown", "tab:olive"]
    for k, check in enumerate(checks):
        steps, curves = check.sweep
        for method, errors in curves.items():
            shown = np.where(np.isfinite(errors), np.maximum(errors, 1e-17), np.nan)
            label = method if len(checks) == 1 else f"{check.variable}, {method}"
            width = 2.0 if method == result.method else 1.0
            color = colors[k % len(colors)] if len(checks) > 1 else None
            axes.loglog(steps, shown, styles.get(method, "-"), lw=width, label=label, color=color)
        axes.axvline(check.step, color="0.35", lw=0.8)
    axes.axhline(result.tolerance, color="tab:red", lw=0.8, ls=":", label="tolerance")
    # labels outside the plotting area, so that no text sits on a curve
    axes.annotate(
        "chosen step",
        (checks[0].step, 1.0),
        xycoords=("data", "axes fraction"),
        xytext=(0, 3),
        textcoords="offset points",
        fontsize=7,
        ha="center",
        va="bottom",
        color="0.3",
    )
    axes.set_xlabel("step h")
    axes.set_ylabel("relative error")
    axes.set_title("error against step size", fontsize=10, pad=14)
    axes.legend(fontsize=7, frameon=False, loc="upper left", bbox_to_anchor=(1.02, 1.0))
    axes.grid(True, which="major", alpha=0.3)
    return figure


def heatmap_figure(check):
    """Heat map of log10 entrywise relative error for a matrix variable; None otherwise."""
    from matplotlib.figure import Figure

    errors = check.entrywise
    if errors is None or errors.ndim != 2:
        return None
    figure = Figure(figsize=(3.1, 2.7))
    axes = figure.subplots()
    with np.errstate(divide="ignore", invalid="ignore"):
        logs = np.log10(np.maximum(errors, 1e-17))
    image = axes.imshow(
        logs, cmap="viridis", vmin=-17, vmax=0, aspect="auto", interpolation="nearest"
    )
    figure.colorbar(image, ax=axes, label="log10 relative error")
    axes.set_title(f"entrywise error, {check.variable}", fontsize=10)
    axes.set_xlabel("column")
    axes.set_ylabel("row")
    rows, cols = errors.shape
    axes.set_xticks(range(cols) if cols <= 12 else [0, cols - 1])
    axes.set_yticks(range(rows) if rows <= 12 else [0, rows - 1])
    return figure


def _status_html(result: CheckResult | None, run: int) -> str:
    if result is None:
        return (
            "<span style='color:#555'>Not run yet: press <b>Run check</b> to compare the "
            "generated derivative with finite differences.</span>"
        )
    color = {"PASS": "#1a7f37", "FAIL": "#b42318", "ERROR": "#b42318"}[result.verdict]
    # the run number and time stay together on one line: no lone "s" after a wrap
    tail = f" &middot; run {run} &middot; {result.elapsed:.2f} s"
    return (
        f"<span style='color:{color};font-weight:600'>{html.escape(result.verdict)}</span> "
        f"<span>{html.escape(result.summary().split(': ', 1)[1])}</span>"
        f"<span style='color:#777;white-space:nowrap'>{tail}</span>"
    )


#: a column of words (variable, along) reads from the left (JupyterLab right-aligns table
#: cells, as for numbers)
_WORDS = "style='text-align:left'"


def _table_html(result: CheckResult) -> str:
    rows = []
    for check in result.checks:
        for label, analytic, numeric, rel in check.directional:
            ok = rel <= result.tolerance
            mark = "&#10003;" if ok else "&#10007;"
            rows.append(
                f"<tr><td {_WORDS}>{html.escape(check.variable)}</td>"
                f"<td {_WORDS}>{html.escape(label)}</td>"
                f"<td>{analytic: .6e}</td><td>{numeric: .6e}</td><td>{rel:.1e} {mark}</td></tr>"
            )
        if check.entrywise is not None:
            worst = float(np.nanmax(check.entrywise)) if np.isfinite(check.entrywise).any() else 0
            count = int(np.isfinite(check.entrywise).sum())
            mark = "&#10003;" if worst <= result.tolerance else "&#10007;"
            rows.append(
                f"<tr><td {_WORDS}>{html.escape(check.variable)}</td>"
                f"<td {_WORDS}>{count} entries one by one</td>"
                f"<td></td><td></td><td>{worst:.1e} {mark}</td></tr>"
            )
    sources = ", ".join(
        f"{html.escape(k)} from {'your namespace' if v == 'namespace' else 'random draw'}"
        for k, v in result.sources.items()
    )
    notes = "".join(f"<p style='color:#8a6d00'>{html.escape(n)}</p>" for n in result.notes)
    if not rows and result.error is not None:  # nothing was compared: no empty table
        return notes
    return (
        f"<table style='font-size:90%'><thead><tr><th {_WORDS}>variable</th>"
        f"<th {_WORDS}>along</th>"
        "<th>generated</th><th>finite difference</th><th>relative error</th></tr></thead>"
        f"<tbody>{''.join(rows)}</tbody></table>"
        f"<p style='color:#555;font-size:85%'>inputs: {sources}</p>{notes}"
    )


def _in_kernel() -> bool:
    """True under a Jupyter kernel, where widgets render; False in a terminal shell."""
    from IPython import get_ipython

    shell = get_ipython()
    return shell is not None and getattr(shell, "kernel", None) is not None


class CheckPanel:
    """Finite-difference check of a derivation, as ipywidgets.

    Set the widgets' values and call `run()` (or press the button); the outcome is kept in
    `last_result` (`.passed`, `.max_rel_error`, `.summary()`), and `status.value` shows it.

    >>> from gradwright import derive                                 # doctest: +SKIP
    >>> panel = CheckPanel(derive("X: (n, n)\\nf = trace(X @ X)", wrt="X"))  # doctest: +SKIP
    >>> panel.run().passed                                            # doctest: +SKIP
    True
    """

    def __init__(
        self,
        derivation,
        namespace: dict | None = None,
        *,
        sizes: dict | None = None,
        seed: int = 0,
        method: str = "central",
        use_namespace: bool = False,
    ):
        import ipywidgets as w

        self.derivation = derivation
        self.namespace = namespace
        self.last_result: CheckResult | None = None
        self.runs = 0
        self.complex_ok = bool(getattr(derivation, "supports_complex_step", False))

        dims = [d for d in derivation.dims if not str(d).isdigit()]
        sizes = dict(sizes or {})
        narrow = w.Layout(width="150px")
        # IntText, not a bounded box: a bounded box silently turns 100000 into its maximum
        self.size_inputs = {
            dim: w.IntText(
                value=int(sizes.get(dim, DEFAULT_SIZES[i % len(DEFAULT_SIZES)])),
                description=str(dim),
                layout=narrow,
                style={"description_width": "40px"},
            )
            for i, dim in enumerate(dims)
        }
        self.dims_message = w.HTML()
        for box in self.size_inputs.values():
            box.observe(self._sizes_changed, names="value")
        variables = list(derivation.variables)
        options = variables + ([ALL] if len(variables) > 1 else [])
        self.variable = w.Dropdown(
            options=options,
            value=ALL if len(variables) > 1 else variables[0],
            description="check",
            layout=w.Layout(width="260px"),
            style={"description_width": LABEL_WIDTH},
        )
        methods = [m for m in METHODS if m != "complex step" or self.complex_ok]
        if method not in methods:
            raise ValueError(f"method {method!r} is not available here; choose from {methods}")
        self.method = w.ToggleButtons(options=methods, value=method)
        self.method.style.button_width = "110px"
        self.step = NumberBox(
            w,
            default_step(method),
            "step",
            "200px",
            tooltip="relative step; h = step * max(1, rms of the variable)",
        )
        self.tolerance = NumberBox(w, default_tolerance(method), "tolerance", "200px")
        self.seed = w.IntText(
            value=int(seed),
            description="seed",
            layout=w.Layout(width="180px"),
            style={"description_width": "40px"},
        )
        self.use_namespace = w.Checkbox(
            value=bool(use_namespace and namespace is not None),
            description="use arrays from my namespace (only when every one fits)",
            disabled=namespace is None,
            indent=False,
            layout=w.Layout(width="auto"),
        )
        self.button = w.Button(
            description="Run check",
            button_style="primary",
            icon="check",
            tooltip="compare with finite differences",
        )
        self.button.add_class("gradwright-check-run")
        self.status = w.HTML(_status_html(None, 0))
        self.status.add_class(STATUS_CLASS)
        self.output = w.Output()

        self.method.observe(self._method_changed, names="value")
        self.button.on_click(lambda _button: self.run())
        self.widget = self._layout(w)

    # -- layout -------------------------------------------------------------------------
    def _layout(self, w):
        title = w.HTML(
            f"<b>Finite-difference check</b> of the derivative of "
            f"<code>{html.escape(self.derivation.target)}</code>"
        )
        sizes = list(self.size_inputs.values())
        rows = [title]
        if sizes:
            rows.append(
                w.HBox(
                    [w.Label("dims", layout=w.Layout(width=LABEL_WIDTH)), *sizes],
                    layout=w.Layout(flex_flow="row wrap"),
                )
            )
            rows.append(self.dims_message)
        if getattr(self.derivation, "is_complex", False):
            rows.append(w.HTML(f"<small>{html.escape(COMPLEX_STEP_UNAVAILABLE)}.</small>"))
        rows += [
            w.HBox([self.variable, self.seed]),
            w.HBox(
                [w.Label("method", layout=w.Layout(width=LABEL_WIDTH)), self.method],
                layout=w.Layout(align_items="center"),
            ),
            w.HBox(
                [self.step.text, self.tolerance.text, self.step.message, self.tolerance.message],
                layout=w.Layout(flex_flow="row wrap", align_items="center"),
            ),
            self.use_namespace,
            w.HBox(
                [self.button, self.status],
                layout=w.Layout(align_items="center", flex_flow="row wrap"),
            ),
            self.output,
        ]
        box = w.VBox(
            rows, layout=w.Layout(border="1px solid #d0d7de", padding="6px 10px", margin="6px 0")
        )
        box.add_class("gradwright-check-panel")
        return box

    def _repr_mimebundle_(self, **kwargs):
        bundle = dict(self.widget._repr_mimebundle_(**kwargs) or {})
        # A terminal shows this line instead of the widget's repr.
        bundle["text/plain"] = (
            f"[finite-difference check of {self.derivation.target}: "
            "widgets show in Jupyter; call .run() here]"
        )
        return bundle

    # -- wiring -------------------------------------------------------------------------
    def _size_problems(self) -> list[str]:
        problems = []
        for dim, box in self.size_inputs.items():
            size = int(box.value)
            if size < 1:
                problems.append(f"{dim} = {size} is not a size: dims are at least 1")
            elif size > MAX_DIM:
                problems.append(
                    f"{dim} = {size} is more than the check draws ({MAX_DIM}); it was not "
                    "changed, choose a smaller size"
                )
        return problems

    def _sizes_changed(self, _change=None) -> None:
        problems = self._size_problems()
        self.dims_message.value = (
            "<span style='color:#b42318'>" + html.escape("; ".join(problems)) + "</span>"
            if problems
            else ""
        )

    def _method_changed(self, change):
        self.step.value = default_step(change["new"])
        self.tolerance.value = default_tolerance(change["new"])

    def _inputs(self):
        d = self.derivation
        names = list(d.arguments())
        problems = self._size_problems()
        if problems:
            raise ValueError("dims: " + "; ".join(problems))
        sizes = {dim: int(box.value) for dim, box in self.size_inputs.items()}
        taken, sources, refused = {}, {}, {}
        if self.use_namespace.value and self.namespace is not None:
            taken, bound, refused = fit_namespace(d, self.namespace, names)
            if refused:  # all or nothing: a mix of your arrays and unrelated sizes misleads
                taken = {}
            else:
                sizes.update(bound)
                for dim, size in bound.items():
                    if dim in self.size_inputs:
                        self.size_inputs[dim].value = size
        drawn = d.sample_inputs(sizes=sizes, seed=int(self.seed.value))
        arrays = {}
        for name in names:
            if name in taken:
                arrays[name] = taken[name]
                sources[name] = "namespace"
            else:
                arrays[name] = drawn[name]
                sources[name] = "sampled"
        return arrays, sizes, sources, refused

    def run(self) -> CheckResult:
        """Draw the inputs, compare, show the outcome; never raises."""
        from IPython.display import HTML, display

        self.runs += 1
        self.status.value = "<span style='color:#555'>running&hellip;</span>"
        self.button.disabled = True
        if not _in_kernel():
            # A terminal has no widget to show the table and plots in: keep the result only.
            try:
                result = self._run_inside()
            finally:
                self.button.disabled = False
            self.last_result = result
            self.status.value = _status_html(result, self.runs)
            return result
        try:
            with self.output:
                self.output.clear_output(wait=True)
                result = self._run_inside()
                display(HTML(_table_html(result)))
                if result.error is None:
                    self._show_plots(result)
        finally:
            self.button.disabled = False
        self.last_result = result
        self.status.value = _status_html(result, self.runs)
        return result

    def _run_inside(self) -> CheckResult:
        method = self.method.value
        try:
            arrays, sizes, sources, refused = self._inputs()
            chosen = self.variable.value
            variables = list(self.derivation.variables) if chosen == ALL else [chosen]
            step = float(self.step.value)
            tolerance = float(self.tolerance.value)
            if not (step > 0 and math.isfinite(step)):
                raise ValueError(f"the step must be a positive number, not {step}")
            if not (tolerance > 0 and math.isfinite(tolerance)):
                raise ValueError(f"the tolerance must be a positive number, not {tolerance}")
        except Exception as err:
            return CheckResult(
                method=method,
                step=float("nan"),
                tolerance=float("nan"),
                seed=int(self.seed.value),
                sizes={},
                sources={},
                # our own refusals of what was typed read as sentences; anything else keeps
                # its exception name, which is what a bug report needs
                error=str(err) if isinstance(err, ValueError) else f"{type(err).__name__}: {err}",
            )
        result = run_check(
            self.derivation,
            variables,
            arrays,
            method=method,
            step=step,
            tolerance=tolerance,
            seed=int(self.seed.value),
            sizes=sizes,
            sources=sources,
        )
        for name, reason in refused.items():
            result.notes.append(f"{name} in your namespace was not used: it {reason}.")
        if refused:
            result.notes.append(
                "So no array of your namespace was used: every input was drawn at random "
                "(the namespace is used only when every array found there fits)."
            )
        elif self.use_namespace.value and self.namespace is not None:
            mine = [n for n, where in sources.items() if where == "namespace"]
            result.notes.append(
                "Taken from your namespace: "
                + (", ".join(mine) if mine else "nothing")
                + "; drawn at random: "
                + (
                    ", ".join(n for n, where in sources.items() if where != "namespace")
                    or "nothing"
                )
                + "."
            )
        return result

    def _show_plots(self, result: CheckResult) -> None:
        import ipywidgets as w
        from IPython.display import display

        try:
            images = []
            figure = sweep_figure(result)
            if figure is not None:
                images.append(w.Image(value=_plot_png(figure), format="png"))
            for check in result.checks:
                figure = heatmap_figure(check)
                if figure is not None:
                    images.append(w.Image(value=_plot_png(figure), format="png"))
            if images:
                display(w.HBox(images, layout=w.Layout(flex_flow="row wrap")))
        except Exception as err:  # a plot failure must not hide the verdict
            print(f"(plots unavailable: {type(err).__name__}: {err})")
