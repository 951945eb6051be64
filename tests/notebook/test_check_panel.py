"""The check panel driven from Python: set widget values, press the button, read the verdict."""

from __future__ import annotations

import numpy as np
import pytest
from IPython.utils.capture import capture_output
from nbhelpers import ARM, COVARIANCE, DEMAND

from gradwright import derive
from gradwright.notebook.check_panel import CheckPanel, heatmap_figure, sweep_figure
from gradwright.notebook.fdcheck import EPS, default_step

SYMMETRIC = "A: (n, n) symmetric\nX: (n, n) symmetric\nf = trace(A @ X @ X) + sum(X**3)\n"


def _press(panel):
    with capture_output():  # without a kernel the Output's displays land here
        panel.button.click()
    return panel.last_result


@pytest.mark.parametrize(
    "block, wrt",
    [(DEMAND, ["U", "V"]), (COVARIANCE, ["S"]), (ARM, ["W1", "W2"]), (SYMMETRIC, ["X"])],
    ids=["factorization", "spd-logdet", "array-target", "symmetric"],
)
def test_button_press_passes_for_correct_derivatives(block, wrt):
    panel = CheckPanel(derive(block, wrt=wrt))
    assert "Not run yet" in panel.status.value
    result = _press(panel)
    assert result.passed, result.summary()
    assert result.max_rel_error < 1e-6
    assert "PASS" in panel.status.value and "run 1" in panel.status.value
    for check in result.checks:
        assert check.directional and check.entrywise is not None


def test_controls_change_what_is_checked():
    panel = CheckPanel(derive(DEMAND, wrt=["U", "V"]))
    panel.size_inputs["s"].value = 3
    panel.size_inputs["w"].value = 6
    panel.size_inputs["r"].value = 2
    panel.variable.value = "V"
    panel.seed.value = 9
    panel.method.value = "forward"
    assert panel.step.value == pytest.approx(default_step("forward"))
    assert panel.tolerance.value == pytest.approx(1e-4)
    result = _press(panel)
    assert result.passed, result.summary()
    assert [c.variable for c in result.checks] == ["V"]
    assert result.checks[0].shape == (6, 2)
    assert result.sizes == {"s": 3, "w": 6, "r": 2} and result.seed == 9
    assert result.method == "forward"
    first = panel.status.value
    panel.seed.value = 10
    _press(panel)
    assert panel.status.value != first and "run 2" in panel.status.value


def test_default_steps_follow_nocedal_wright():
    # Nocedal & Wright, Numerical Optimization, 2nd ed., section 8.1 (from memory).
    assert default_step("central") == pytest.approx(EPS ** (1 / 3))
    assert default_step("forward") == pytest.approx(EPS**0.5)
    panel = CheckPanel(derive(COVARIANCE, wrt="S"))
    assert panel.method.value == "central"
    assert panel.step.value == pytest.approx(EPS ** (1 / 3))


def test_complex_step_offered_only_when_supported():
    d = derive(DEMAND, wrt=["U", "V"])
    panel = CheckPanel(d)
    offered = "complex step" in panel.method.options
    assert offered == bool(d.supports_complex_step)
    if offered:
        panel.method.value = "complex step"
        result = _press(panel)
        assert result.passed, result.summary()
        assert result.max_rel_error < 1e-9


def test_wrong_gradient_fails(monkeypatch):
    d = derive(COVARIANCE, wrt="S")
    right = d.gradient_function

    def doubled(*variables):
        g = right(*variables)
        return lambda **arrays: 2.0 * g(**arrays)

    monkeypatch.setattr(d, "gradient_function", doubled)
    panel = CheckPanel(d)
    result = _press(panel)
    assert not result.passed and result.verdict == "FAIL"
    assert result.max_rel_error > 0.1
    assert "FAIL" in panel.status.value


def test_wrong_vjp_fails(monkeypatch):
    d = derive(ARM, wrt=["W1"])
    right = d.vjp_function

    def transposed_wrong(var):
        vjp = right(var)
        return lambda G, **arrays: -vjp(G, **arrays)

    monkeypatch.setattr(d, "vjp_function", transposed_wrong)
    result = _press(CheckPanel(d))
    assert not result.passed


def test_errors_stay_inside_the_panel(monkeypatch):
    d = derive(DEMAND, wrt=["U"])

    def broken(*variables):
        def g(**arrays):
            raise RuntimeError("generated code exploded")

        return g

    monkeypatch.setattr(d, "gradient_function", broken)
    panel = CheckPanel(d)
    result = _press(panel)  # must not raise
    assert result.verdict == "ERROR" and "exploded" in result.error
    assert "ERROR" in panel.status.value
    assert not panel.button.disabled
    panel.step.value = -1.0
    result = _press(panel)
    assert result.verdict == "ERROR" and "step" in result.error


def test_namespace_arrays_used_only_when_every_one_fits():
    rng = np.random.default_rng(4)
    Z = rng.normal(size=(30, 3))
    namespace = {"Z": Z, "S": np.eye(5), "days": 30.0}  # S does not fit Z's n = 3
    panel = CheckPanel(derive(COVARIANCE, wrt="S"), namespace=namespace)
    panel.use_namespace.value = True
    result = _press(panel)
    assert result.passed, result.summary()
    assert set(result.sources.values()) == {"sampled"}  # all or nothing
    assert any("S in your namespace was not used" in note for note in result.notes)
    # in words, not Python reprs: seen as "it shape (5, 5) does not fit ('n', 'n') with {...}"
    note = next(n for n in result.notes if n.startswith("S in your namespace"))
    assert note == (
        "S in your namespace was not used: it has shape (5, 5), which does not fit (n, n): "
        "n = 3 from Z."
    ), note
    namespace["days"] = "thirty"
    notes = _press(panel).notes
    assert "days in your namespace was not used: it is not a numeric array." in notes, notes
    namespace["days"] = 30.0
    assert any("no array of your namespace was used" in note for note in result.notes)
    namespace["S"] = np.cov(Z.T) + np.eye(3)  # now every array fits
    result = _press(panel)
    assert result.passed, result.summary()
    assert result.sources["Z"] == "namespace" and result.sources["S"] == "namespace"
    assert result.sizes["n"] == 3 and result.sizes["m"] == 30
    assert panel.size_inputs["n"].value == 3
    assert any(n.startswith("Taken from your namespace: Z, S, days") for n in result.notes)


def test_numbers_show_significant_digits_and_exponents():
    from gradwright.notebook.check_panel import number_text

    panel = CheckPanel(derive(COVARIANCE, wrt="S"))
    panel.method.value = "forward"
    assert panel.step.text.value == "1.49e-08"  # not 1.4901161193847656e-08, cut
    panel.method.value = "central"
    assert panel.step.text.value == number_text(default_step("central"))
    assert "e-06" in panel.step.text.value and len(panel.step.text.value) <= 8
    panel.step.text.value = "abc"
    assert "not a positive number" in panel.step.message.value
    result = _press(panel)
    assert result.verdict == "ERROR" and "step" in result.error


def test_the_verdict_line_writes_the_step_and_tolerance_as_the_boxes_do():
    # seen: the box said 6.06e-06 and the verdict "step 6.1e-06"; a tolerance typed as 2.5e-07
    # was reported as "3e-07", a number the user never wrote
    panel = CheckPanel(derive(COVARIANCE, wrt="S"))
    panel.tolerance.text.value = "2.5e-07"
    result = _press(panel)
    summary = result.summary()
    assert "tolerance 2.5e-07" in summary, summary
    assert f"step {panel.step.text.value}," in summary, summary


def test_dims_out_of_range_are_refused_visibly_not_clamped():
    panel = CheckPanel(derive(COVARIANCE, wrt="S"))
    panel.size_inputs["n"].value = 100000
    assert panel.size_inputs["n"].value == 100000  # not silently 500
    assert "n = 100000 is more than" in panel.dims_message.value
    result = _press(panel)
    assert result.verdict == "ERROR" and "n = 100000" in result.error
    # seen: "ERROR ValueError: dims: ..." above an empty table and a bare "inputs:"
    assert "ValueError" not in result.error and "ValueError" not in panel.status.value
    from gradwright.notebook.check_panel import _table_html

    assert "<table" not in _table_html(result) and "inputs:" not in _table_html(result)
    # the "along" column is words: read from the left, its header with it
    panel.size_inputs["n"].value = 3
    table = _table_html(_press(panel))
    assert "<th style='text-align:left'>along</th>" in table
    assert "<td style='text-align:left'>direction 1</td>" in table
    assert "entries one by one</td>" in table.split("<td style='text-align:left'>")[-1]
    panel.size_inputs["n"].value = 4
    assert panel.dims_message.value == ""
    assert _press(panel).passed


def test_status_keeps_the_time_with_its_unit():
    panel = CheckPanel(derive(COVARIANCE, wrt="S"))
    _press(panel)
    status = panel.status.value
    tail = status[status.index("white-space:nowrap") :]
    assert " s</span>" in tail and "run 1" in tail


def test_plots_render_to_png():
    panel = CheckPanel(derive(DEMAND, wrt=["U", "V"]))
    result = _press(panel)
    figure = sweep_figure(result)
    assert figure is not None
    heat = heatmap_figure(result.checks[0])
    assert heat is not None
    from gradwright.notebook.check_panel import _plot_png

    assert _plot_png(figure).startswith(b"\x89PNG") and _plot_png(heat).startswith(b"\x89PNG")
    steps, curves = result.checks[0].sweep
    assert "central" in curves and len(steps) == len(curves["central"])


def test_under_a_kernel_the_output_shows_table_and_plots(monkeypatch, shell):
    import gradwright.notebook.check_panel as cp

    monkeypatch.setattr(cp, "_in_kernel", lambda: True)
    panel = CheckPanel(derive(DEMAND, wrt=["U", "V"]))
    with capture_output() as cap:  # without a kernel the Output's displays land here
        panel.button.click()
    assert panel.last_result.passed
    html = [o.data["text/html"] for o in cap.outputs if "text/html" in o.data]
    assert any("relative error" in h and "<table" in h for h in html)
    widgets = [o.data for o in cap.outputs if "application/vnd.jupyter.widget-view+json" in o.data]
    assert widgets, "the plots are shown as image widgets"


def test_plot_legend_and_step_label_sit_outside_the_curves():
    panel = CheckPanel(derive(DEMAND, wrt=["U", "V"]))
    result = _press(panel)
    figure = sweep_figure(result)
    figure.canvas.draw()
    axes = figure.axes[0]
    frame = axes.get_window_extent()
    legend = axes.get_legend().get_window_extent()
    assert legend.x0 >= frame.x1  # right of the plotting area
    label = next(t for t in axes.texts if t.get_text() == "chosen step").get_window_extent()
    assert label.y0 >= frame.y1 - 1  # above the plotting area
