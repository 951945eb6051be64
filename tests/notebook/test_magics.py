"""%%derive and %identities in an in-process IPython shell, loaded for real with %load_ext."""

from __future__ import annotations

import inspect

import nbformat
import numpy as np
import pytest
from IPython.core.error import UsageError
from IPython.utils.capture import capture_output
from nbhelpers import ARM, COVARIANCE, DEMAND, run_derive
from scipy import optimize

WIDGET = "application/vnd.jupyter.widget-view+json"


def _bundles(cap):
    return [o.data for o in cap.outputs]


def _demand_inputs(seed=3):
    rng = np.random.default_rng(seed)
    return dict(
        P=rng.normal(size=(5, 4)), U=rng.normal(size=(5, 2)), V=rng.normal(size=(4, 2)), mu=0.3
    )


def test_derive_shows_math_shape_table_names_and_panel(shell):
    cap = run_derive(shell, "U V", DEMAND)
    bundles = _bundles(cap)
    math = [b for b in bundles if "text/latex" in b]
    tables = [b for b in bundles if "gradwright-shapes" in b.get("text/html", "")]
    panels = [b for b in bundles if WIDGET in b]
    assert len(math) == 1 and len(tables) == 1 and len(panels) == 1
    latex = math[0]["text/latex"]
    assert latex.startswith("$$") and "\\begin{aligned}" in latex and "\\text{" in latex
    assert math[0]["text/plain"].strip()  # the terminal fallback
    html = tables[0]["text/html"]
    for symbol in ("P", "U", "V", "mu", "R", "loss"):
        assert f"<code>{symbol}</code>" in html
    assert "comes from" in html and "rows of P" in html
    plain = tables[0]["text/plain"]
    assert "variable" in plain and "constant" in plain and "dims:" in plain
    # Printed list of injected names with their signatures.
    assert "grad_loss(*, P, U, V, mu)" in cap.stdout
    assert "loss_objective(flat, *, P, mu)" in cap.stdout
    for name in (
        "loss",
        "grad_loss",
        "loss_pack",
        "loss_unpack",
        "loss_objective",
        "loss_derivation",
        "loss_check",
    ):
        assert name in shell.user_ns
    assert shell.user_ns["loss_derivation"].variables == ("U", "V")


def test_injected_gradient_agrees_with_scipy_finite_differences(shell):
    run_derive(shell, "U V", DEMAND)
    loss, grad_loss = shell.user_ns["loss"], shell.user_ns["grad_loss"]
    a = _demand_inputs()
    gU, gV = grad_loss(**a)
    # Outside reference: scipy.optimize.approx_fprime (forward differences, SciPy's own code).
    fU = optimize.approx_fprime(a["U"].ravel(), lambda u: loss(**{**a, "U": u.reshape(5, 2)}), 1e-7)
    fV = optimize.approx_fprime(a["V"].ravel(), lambda v: loss(**{**a, "V": v.reshape(4, 2)}), 1e-7)
    np.testing.assert_allclose(gU.ravel(), fU, rtol=1e-5, atol=1e-5)
    np.testing.assert_allclose(gV.ravel(), fV, rtol=1e-5, atol=1e-5)
    # The value function is the formula as NumPy reads it.
    R = a["P"] - a["U"] @ a["V"].T
    expected = np.sum(R**2) + a["mu"] * (np.sum(a["U"] ** 2) + np.sum(a["V"] ** 2))
    assert loss(**a) == pytest.approx(expected, rel=1e-12)
    assert list(inspect.signature(loss).parameters) == ["P", "U", "V", "mu"]


def test_objective_pack_unpack_drive_scipy_minimize(shell):
    run_derive(shell, "U V --name demand", DEMAND)
    ns = shell.user_ns
    a = _demand_inputs(5)
    flat = ns["demand_pack"](U=a["U"], V=a["V"])
    assert flat.shape == (5 * 2 + 4 * 2,)
    U, V = ns["demand_unpack"](flat)
    np.testing.assert_array_equal(U, a["U"])
    np.testing.assert_array_equal(V, a["V"])
    value, grad = ns["demand_objective"](flat, P=a["P"], mu=a["mu"])
    assert value == pytest.approx(ns["demand"](**a))
    # SciPy's finite differences of the packed objective (outside reference).
    fd = optimize.approx_fprime(
        flat, lambda x: ns["demand_objective"](x, P=a["P"], mu=a["mu"])[0], 1e-7
    )
    np.testing.assert_allclose(grad, fd, rtol=1e-5, atol=1e-5)
    fit = optimize.minimize(
        lambda x: ns["demand_objective"](x, P=a["P"], mu=a["mu"]), flat, jac=True, method="L-BFGS-B"
    )
    assert fit.success and fit.fun < value
    # unpack also takes the constants that carry the dims.
    U2, V2 = ns["demand_unpack"](fit.x, P=a["P"])
    assert U2.shape == (5, 2) and V2.shape == (4, 2)


def test_array_target_jvp_vjp_and_dense_jacobian(shell):
    cap = run_derive(shell, "W1 W2", ARM)
    ns = shell.user_ns
    assert "jvp_grip(dW1, dW2, *, x, W1, W2)" in cap.stdout
    assert "vjp_grip(G, *, x, W1, W2)" in cap.stdout
    assert "grad_grip" not in ns and "grip_objective" not in ns
    rng = np.random.default_rng(11)
    a = dict(x=rng.normal(size=3), W1=rng.normal(size=(4, 3)), W2=rng.normal(size=(2, 4)))
    J1, J2 = ns["jacobian_grip"](**a)
    # SciPy's approx_fprime of a vector function is its Jacobian (outside reference); our vec is
    # column-major, so the flat variable is raveled in Fortran order.
    fd1 = optimize.approx_fprime(
        a["W1"].ravel(order="F"),
        lambda w: ns["grip"](**{**a, "W1": w.reshape(4, 3, order="F")}),
        1e-7,
    )
    np.testing.assert_allclose(J1, fd1, rtol=1e-5, atol=1e-6)
    dW1, dW2 = rng.normal(size=(4, 3)), rng.normal(size=(2, 4))
    jvp = ns["jvp_grip"](dW1, dW2, **a)
    np.testing.assert_allclose(
        jvp, J1 @ dW1.ravel(order="F") + J2 @ dW2.ravel(order="F"), rtol=1e-10, atol=1e-12
    )
    G = rng.normal(size=2)
    v1, v2 = ns["vjp_grip"](G, **a)
    np.testing.assert_allclose(v1, (J1.T @ G).reshape(4, 3, order="F"), rtol=1e-10, atol=1e-12)
    np.testing.assert_allclose(v2, (J2.T @ G).reshape(2, 4, order="F"), rtol=1e-10, atol=1e-12)
    latex = next(b["text/latex"] for b in _bundles(cap) if "text/latex" in b)
    assert "jvp" in latex and "vjp" in latex  # the note on the product functions


def test_user_names_are_not_overwritten_without_force(shell):
    shell.user_ns["nll"] = 42.0
    with pytest.raises(UsageError) as err:
        run_derive(shell, "S", COVARIANCE)
    message = str(err.value)
    assert "nll" in message and "--force" in message and "--name" in message
    assert shell.user_ns["nll"] == 42.0 and "grad_nll" not in shell.user_ns
    run_derive(shell, "S --force", COVARIANCE)
    assert callable(shell.user_ns["nll"]) and "grad_nll" in shell.user_ns
    # Names injected by an earlier %%derive may be replaced without --force.
    first = shell.user_ns["grad_nll"]
    run_derive(shell, "S", COVARIANCE)
    assert shell.user_ns["grad_nll"] is not first
    # ...but not once the user has rebound one of them.
    shell.user_ns["grad_nll"] = "mine"
    with pytest.raises(UsageError, match="grad_nll"):
        run_derive(shell, "S", COVARIANCE)


def test_formula_error_is_one_usage_error_with_caret(shell):
    bad = "U: (s, r)\nV: (s, r)\nloss = sum((U @ V)**2)\n"
    with pytest.raises(UsageError) as err:
        shell.run_cell_magic("derive", "U", bad)
    text = str(err.value)
    assert text.startswith("line 4:") and "^" in text  # the cell's line 4: %%derive is line 1
    assert "Traceback" not in text
    # Through the cell path a user sees the one message, no traceback.
    with capture_output() as cap:
        shell.run_cell("%%derive U\n" + bad)
    shown = cap.stdout + cap.stderr
    assert "UsageError" in shown and "^" in shown and "Traceback" not in shown


def test_bad_options_and_empty_cell_are_usage_errors(shell):
    with pytest.raises(UsageError):
        shell.run_cell_magic("derive", "S --show everything", COVARIANCE)
    with pytest.raises(UsageError, match="empty"):
        shell.run_cell_magic("derive", "S", "   \n")
    with pytest.raises(UsageError, match="not a Python name"):
        shell.run_cell_magic("derive", "S --name 2x", COVARIANCE)


def test_show_choices(shell):
    full = run_derive(shell, "S --name full", COVARIANCE)
    result = run_derive(shell, "S --name res --show result", COVARIANCE)
    quiet = run_derive(shell, "S --name quiet --show none --no-check", COVARIANCE)
    full_latex = next(b["text/latex"] for b in _bundles(full) if "text/latex" in b)
    result_latex = next(b["text/latex"] for b in _bundles(result) if "text/latex" in b)
    assert result_latex.count("\\\\") < full_latex.count("\\\\")
    assert not quiet.outputs  # no math, no table, no panel
    assert "grad_quiet" in quiet.stdout and "quiet_check" not in shell.user_ns


def test_generated_help_lists_options(shell):
    doc = shell.find_cell_magic("derive").__doc__
    for option in ("--name", "--show", "--no-check", "--force", "--export"):
        assert option in doc


def test_export_option_writes_a_notebook(shell, tmp_path):
    path = tmp_path / "nll.ipynb"
    cap = run_derive(shell, f"S --no-check --export {path}", COVARIANCE)
    assert str(path) in cap.stdout
    nb = nbformat.read(path, as_version=4)
    nbformat.validate(nb)
    assert any(c.cell_type == "code" for c in nb.cells)


def test_identities_magic_opens_the_panel(shell):
    run_derive(shell, "S --name cov --no-check", COVARIANCE)
    with capture_output() as cap:
        shell.run_line_magic("identities", "logdet")
    assert any(WIDGET in o.data for o in cap.outputs)


def test_variables_may_be_separated_by_commas(shell):
    run_derive(shell, "U, V --name commas --no-check", DEMAND)
    assert shell.user_ns["commas_derivation"].variables == ("U", "V")


def test_unknown_variable_is_a_usage_error(shell):
    with pytest.raises(UsageError, match="Q"):
        shell.run_cell_magic("derive", "Q", COVARIANCE)
