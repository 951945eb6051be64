"""The command line on the demo blocks."""

from __future__ import annotations

import pathlib
import subprocess
import sys

BLOCKS = pathlib.Path(__file__).parents[1] / "notebooks_demo" / "blocks"


def run(*args, stdin=None):
    return subprocess.run(
        [sys.executable, "-m", "gradwright", *args], capture_output=True, text=True, input=stdin
    )


def test_derive_prints_the_derivation_and_the_result_code_on_request():
    out = run("derive", str(BLOCKS / "store_demand.gw"), "--wrt", "U", "V")
    assert out.returncode == 0, out.stderr
    text = out.stdout
    for part in ("Derivation", "Shapes", "Result"):
        assert part in text
    assert "def value_and_gradient(" not in text  # code only on request
    assert len(text.splitlines()) < 60
    assert "∂loss/∂U = -2 * (R @ V) + 2 * mu * U" in text  # one notation: ∂, as in the notebook
    out = run("derive", str(BLOCKS / "store_demand.gw"), "--wrt", "U", "V", "--code")
    assert "Result" in out.stdout and "def value_and_gradient(" in out.stdout


def test_show_takes_the_values_of_the_magic():
    from gradwright.notebook.render import SHOW_CHOICES

    for value in SHOW_CHOICES:
        out = run("derive", str(BLOCKS / "store_demand.gw"), "--wrt", "U", "--show", value)
        assert out.returncode == 0, out.stderr
    assert (
        run("derive", str(BLOCKS / "store_demand.gw"), "--wrt", "U", "--show", "none").stdout == ""
    )
    result = run("derive", str(BLOCKS / "store_demand.gw"), "--wrt", "U", "--show", "result")
    assert result.stdout.startswith("Result\n∂loss/∂U = ")
    out = run("derive", str(BLOCKS / "store_demand.gw"), "--wrt", "U", "--show", "all")
    assert out.returncode == 2 and "invalid choice" in out.stderr


def test_latex_and_code_only():
    out = run(
        "derive", str(BLOCKS / "soil_covariance.gw"), "--wrt", "S", "--show", "none", "--latex"
    )
    assert out.stdout.startswith("\\begin{tabular}") and "\\begin{aligned}" in out.stdout
    out = run(
        "derive", str(BLOCKS / "robot_arm.gw"), "--wrt", "W1", "W2", "--show", "none", "--code"
    )
    assert "def vjp_W1(" in out.stdout and "Derivation" not in out.stdout


def test_bad_input_is_one_clear_message():
    out = run("derive", "-", "--wrt", "A", stdin="A: (n, k)\nf = trace(A)\n")
    assert out.returncode == 2
    assert "Traceback" not in out.stderr
    assert "line 2: trace needs a square matrix, got a (n, k) matrix" in out.stderr
    assert "^^^^^^^^" in out.stderr


def test_an_array_target_says_its_derivative_is_a_jacobian():
    # the magic says so; the command line printed the Kronecker form without a word
    for show in ("steps", "result"):
        out = run("derive", str(BLOCKS / "robot_arm.gw"), "--wrt", "W1", "--show", show)
        assert out.returncode == 0, out.stderr
        assert "the target grip is a vector of shape (o,), not a scalar" in out.stdout
        assert "Jacobian" in out.stdout and "never builds it" in out.stdout
    out = run("derive", str(BLOCKS / "store_demand.gw"), "--wrt", "U")
    assert "Jacobian" not in out.stdout


def test_the_derivation_writes_each_left_hand_side_once():
    out = run("derive", str(BLOCKS / "store_demand.gw"), "--wrt", "U", "V")
    lines = out.stdout.split("\n\n")[0].splitlines()[1:]
    assert lines[0].startswith("dloss = d(")
    assert all(line.startswith("      = ") for line in lines[1:6]), lines
    assert lines[6].startswith("∂loss/∂U = ") and lines[7].startswith("∂loss/∂V = ")


def test_the_shape_table_marks_an_empty_structure():
    out = run("derive", str(BLOCKS / "store_demand.gw"), "--wrt", "U")
    table = out.stdout.split("Shapes\n", 1)[1].split("\n\n", 1)[0].splitlines()
    row = next(line for line in table if line.startswith("U "))
    assert row.split() == ["U", "(s,", "r)", "-", "variable"], row
