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


def test_derive_prints_steps_shapes_result_and_code():
    out = run("derive", str(BLOCKS / "store_demand.gw"), "--wrt", "U", "V")
    assert out.returncode == 0, out.stderr
    text = out.stdout
    for part in ("Derivation", "Shapes", "Result", "def value_and_gradient("):
        assert part in text
    assert "∂loss/∂U = -2 * (R @ V) + 2 * mu * U" in text


def test_latex_and_code_only():
    out = run("derive", str(BLOCKS / "soil_covariance.gw"), "--wrt", "S", "--show", "latex")
    assert out.stdout.startswith("\\begin{aligned}")
    out = run("derive", str(BLOCKS / "robot_arm.gw"), "--wrt", "W1", "W2", "--show", "code")
    assert "def vjp_W1(" in out.stdout and "Derivation" not in out.stdout


def test_bad_input_is_one_clear_message():
    out = run("derive", "-", "--wrt", "A", stdin="A: (n, k)\nf = trace(A)\n")
    assert out.returncode == 2
    assert "Traceback" not in out.stderr
    assert "line 2: trace needs a square matrix, got a (n, k) matrix" in out.stderr
    assert "^^^^^^^^" in out.stderr
