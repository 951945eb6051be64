"""Messages of the Python API: generated functions with source and clear positional-call
errors, and errors without gradwright's internal frames."""

from __future__ import annotations

import inspect
import traceback

import numpy as np
import pytest

from gradwright import FormulaError, derive

BLOCK = "X: (n, p)\ny: (n,)\nw: (p,)\nf = sum((X @ w - y)**2)"


def test_positional_call_names_the_function_and_the_fix():
    g = derive(BLOCK, wrt="w").gradient_function("w")
    with pytest.raises(TypeError) as err:
        g(np.ones((3, 2)), np.ones(3), np.ones(2))
    assert str(err.value) == (
        "gradient_w() got 3 positional arguments: pass arrays by keyword: "
        "gradient_w(X=..., y=..., w=...)"
    )


def test_generated_functions_have_source_for_tracebacks():
    d = derive(BLOCK, wrt="w")
    g = d.gradient_function("w")
    assert "def gradient_w(" in inspect.getsource(g)
    with pytest.raises(ValueError) as err:
        g(X=np.ones((3, 2)), y=np.ones(4), w=np.ones(2))
    shown = "".join(traceback.format_exception(err.value))
    assert 'File "<gradwright f' in shown
    # the generated lines themselves, not "no source"
    generated = [
        f for f in traceback.extract_tb(err.value.__traceback__) if "<gradwright" in f.filename
    ]
    assert generated and all(f.line for f in generated), generated


def test_api_errors_carry_no_internal_frames():
    with pytest.raises(FormulaError) as err:
        derive(BLOCK.replace("sum(", "sum(Q + "), wrt="w")
    frames = traceback.extract_tb(err.value.__traceback__)
    inside = [f.filename for f in frames if "gradwright" in f.filename]
    assert len(inside) <= 1, inside  # at most the public entry point itself
    assert err.value.__suppress_context__ and err.value.__cause__ is None
    d = derive(BLOCK, wrt="w")
    with pytest.raises(FormulaError) as err:
        d.gradient("q")
    frames = traceback.extract_tb(err.value.__traceback__)
    assert len([f for f in frames if "gradwright" in f.filename]) <= 1


def test_the_one_frame_left_is_named_as_the_user_called_it():
    # in a notebook the entry frame read "at_the_boundary.<locals>.entry" and
    # "_api_boundary.<locals>.wrapper"; it names what the user called
    with pytest.raises(FormulaError) as err:
        derive(BLOCK.replace("sum(", "sum(Q + "), wrt="w")
    names = [f.name for f in traceback.extract_tb(err.value.__traceback__)]
    assert names[-1] == "derive", names
    with pytest.raises(FormulaError) as err:
        derive(BLOCK, wrt="w").gradient("q")
    names = [f.name for f in traceback.extract_tb(err.value.__traceback__)]
    assert names[-1] == "Derivation.gradient", names
    assert "<locals>" not in "".join(traceback.format_exception(err.value))
