"""Messages of the notebook face: line numbers from the cell, a Jacobian target said in words,
the help of %%derive, positional calls of injected functions."""

from __future__ import annotations

import numpy as np
import pytest
from IPython.core.error import UsageError
from nbhelpers import ARM, COVARIANCE, run_derive


def test_line_numbers_count_from_the_cell(shell):
    cell = "Z: (m, n)\nS: (n, n) spd\n\nnll = logdet(S) + trace(Q)\n"
    with pytest.raises(UsageError) as err:
        shell.run_cell_magic("derive", "S", cell)
    # the cell is "%%derive S" then the four lines above: the unknown Q is on the cell's line 5
    assert str(err.value).startswith("line 5: unknown name 'Q'")


def test_a_vector_target_says_it_becomes_a_jacobian(shell):
    cap = run_derive(shell, "W1 W2 --no-check", ARM)
    assert "grip is a vector of shape (o,), not a scalar" in cap.stdout
    assert "Jacobian" in cap.stdout and "jvp_grip" in cap.stdout


def test_a_scalar_target_has_no_such_note(shell):
    cap = run_derive(shell, "S --no-check", COVARIANCE)
    assert "not a scalar" not in cap.stdout


def test_derive_help_has_no_stray_marker_and_summarizes_the_language(shell):
    doc = shell.find_cell_magic("derive").__doc__
    assert not doc.lstrip().startswith("::") and "\n::" not in doc
    assert doc.startswith("Usage:\n  %%derive")
    for words in ("formula language", "X: (n, p)", "spd", "@ matrix product", "logdet", "line 1"):
        assert words in doc, words


def test_injected_functions_called_positionally_say_what_to_do(shell):
    run_derive(shell, "S --no-check", COVARIANCE)
    grad = shell.user_ns["grad_nll"]
    Z, S = np.ones((3, 2)), np.eye(2)
    with pytest.raises(TypeError) as err:
        grad(Z, S, 3.0)
    text = str(err.value)
    assert text.startswith("grad_nll() got 3 positional arguments")
    assert "pass arrays by keyword: grad_nll(Z=..., S=..., days=...)" in text
    assert "gradient_S" not in text
    assert grad(Z=Z, S=S, days=3.0).shape == (2, 2)


def test_the_gradient_of_an_spd_variable_is_labelled_symmetric():
    from gradwright import derive
    from gradwright.notebook.render import shape_rows

    rows = shape_rows(derive(COVARIANCE, wrt="S"))
    result = next(r for r in rows if r["role"] == "result")
    assert result["structure"] == "symmetric"  # the gradient is not positive definite
    assert next(r for r in rows if r["symbol"] == "S")["structure"] == "spd"


def test_the_shape_table_writes_a_scalar_one_way_and_the_field_once():
    # seen in the browser: b "()" but "gradient of loss wrt b" "scalar"; a complex vector with
    # "complex" both as its field and as its structure
    from gradwright import derive
    from gradwright.notebook.render import shape_rows

    rows = shape_rows(
        derive("X: (n, p)\ny: (n,)\nw: (p,)\nb: ()\nf = sum((X @ w + b - y)**2)", wrt=["w", "b"])
    )
    shapes = {r["symbol"]: r["shape"] for r in rows}
    assert shapes["b"] == shapes["gradient of f wrt b"] == "()"
    rows = shape_rows(derive("R: (m, m) hpd\nw: (m,) complex\nf = real(w.conj() @ R @ w)", wrt="w"))
    by = {r["symbol"]: r for r in rows}
    assert by["w"]["field"] == "complex" and by["w"]["structure"] == ""
    assert by["R"]["structure"] == "hpd"


def test_a_wrong_shape_in_an_injected_function_is_one_short_traceback(shell):
    # seen in JupyterLab: five frames through functions.py, backends.py and the generated
    # module, and a chained "LookupError ... During handling of the above exception"
    import traceback

    run_derive(shell, "S --no-check", COVARIANCE)
    grad = shell.user_ns["grad_nll"]
    with pytest.raises(ValueError) as err:
        grad(Z=np.ones((3, 2)), S=np.eye(3), days=3.0)
    assert "S" in str(err.value) and "3" in str(err.value)
    assert err.value.__suppress_context__ and err.value.__cause__ is None
    frames = traceback.extract_tb(err.value.__traceback__)
    inside = [f for f in frames if "gradwright" in f.filename]
    assert len(inside) == 1 and inside[0].name == "grad_nll", inside
    shown = "".join(traceback.format_exception(err.value))
    assert "During handling" not in shown and "<locals>" not in shown
    with pytest.raises(TypeError) as err:  # a wrong type likewise
        grad(Z=np.ones((3, 2)), S=np.eye(2), days="three")
    assert len([f for f in traceback.extract_tb(err.value.__traceback__)]) == 2


def test_derive_help_fits_its_width_and_separates_printed_forms(shell):
    # seen in JupyterLab: one-line entries of 200 characters wrapped inside words
    # ("entrie / s attaining"), internal forms such as eigvalsh_vjp_jvp listed among the
    # functions a user writes, ⊙ where every derivation writes ∘, structure words missing
    from gradwright.notebook.magics import HELP_WIDTH

    doc = shell.find_cell_magic("derive").__doc__
    assert max(len(line) for line in doc.splitlines()) <= HELP_WIDTH
    written, _, printed = doc.partition("in printed derivatives")
    functions = written[written.index("functions: ") :]
    assert "eigvalsh_vjp" not in functions and "kron_contract_left" not in functions
    assert "eigvalsh_vjp" in printed.split("\n\n")[0]
    assert "⊙" not in doc and "∘" in doc
    for word in ("lower", "hermitian", "hpd", "invertible"):
        assert word in doc.split("structure words:")[1].split("R = X")[0], word
