"""The generated NumPy code: the expert's rewrites are there, and the code runs on its own."""

from __future__ import annotations

import subprocess
import sys

import numpy as np

from gradwright import derive

DEMAND = (
    "P: (s, w)\nU: (s, r)\nV: (w, r)\nmu: ()\nR = P - U @ V.T\n"
    "loss = sum(R**2) + mu * (sum(U**2) + sum(V**2))"
)


def _function_source(src: str, name: str) -> str:
    start = src.index(f"def {name}(")
    end = src.find("\ndef ", start + 1)
    return src[start : end if end > 0 else None]


def test_solve_and_slogdet_instead_of_inverse_and_det():
    d = derive("A: (n, n)\nB: (n, k)\nf = logdet(A) + sum(solve(A, B))", wrt="B")
    src = d.source()
    assert "np.linalg.inv" not in src and "_gw_inv(" not in _function_source(src, "value")
    assert "_gw_solve(" in src and "slogdet" in src


def test_cholesky_factor_reused_for_spd():
    d = derive("S: (n, n) spd\nZ: (m, n)\nf = 3 * logdet(S) + trace(solve(S, Z.T @ Z))", wrt="S")
    body = _function_source(d.source(), "value")
    assert body.count("_gw_cho(") == 1 and "cho_solve" in body


def test_trace_of_product_and_diagonal_products_have_no_temporaries():
    d = derive("A: (n, k)\nB: (k, n)\nx: (n,)\nf = trace(A @ B) + sum(diagm(x) @ A)", wrt="x")
    body = _function_source(d.source(), "value")
    assert 'np.einsum("ij,ji->"' in body
    assert "x[:, None] * A" in body and "np.diag(" not in body


def test_no_kronecker_product_in_derivatives():
    d = derive("A: (m, n)\nX: (n, p)\nB: (p, q)\nF = A @ X @ B", wrt="X")
    for name in ("jvp_X", "vjp_X"):
        assert "kron" not in _function_source(d.source(), name)


def test_shared_subexpressions_computed_once_between_value_and_gradient():
    d = derive(DEMAND, wrt=["U", "V"])
    body = _function_source(d.source(), "value_and_gradient")
    assert body.count("U @ V.T") == 1


def test_products_distributed_when_cheaper():
    # with r small, -2 (P - U V^T) V is cheaper as -2 (P V - U (V^T V))
    d = derive(DEMAND, wrt=["U", "V"], sizes={"s": 2000, "w": 1500, "r": 10})
    body = _function_source(d.source(), "gradient_U")
    assert "U @ (V.T @ V)" in body and "U @ V.T" not in body


def test_generated_module_runs_without_gradwright(tmp_path):
    d = derive(DEMAND, wrt=["U", "V"])
    (tmp_path / "generated.py").write_text(d.source())
    a = d.sample_inputs({"s": 4, "w": 3, "r": 2}, seed=1)
    np.savez(tmp_path / "inputs.npz", **a)
    script = (
        "import sys, numpy as np\n"
        "sys.modules['gradwright'] = None  # importing gradwright would fail\n"
        "sys.path.insert(0, '.')\n"
        "import generated\n"
        "a = dict(np.load('inputs.npz'))\n"
        "v, (gu, gv) = generated.value_and_gradient(**a)\n"
        "print(repr(float(v)))\n"
    )
    out = subprocess.run(
        [sys.executable, "-I", "-c", script], cwd=tmp_path, capture_output=True, text=True
    )
    assert out.returncode == 0, out.stderr
    assert float(out.stdout) == d.function()(**a)


def test_value_and_gradient_agree_with_separate_functions():
    d = derive(DEMAND, wrt=["U", "V"])
    a = d.sample_inputs(seed=3)
    v, (gu, gv) = d.value_and_gradient_function()(**a)
    assert v == d.function()(**a)
    np.testing.assert_allclose(gu, d.gradient_function("U")(**a), rtol=1e-12)
    np.testing.assert_allclose(gv, d.gradient_function("V")(**a), rtol=1e-12)
    gu2, gv2 = d.gradient_function()(**a)
    np.testing.assert_allclose(gv2, gv, rtol=1e-12)


def test_sums_and_traces_printed_as_dot_products_keep_their_parentheses():
    # N / sum(r**2) once printed as `N / r @ r`, which NumPy reads as (N / r) @ r
    d = derive(
        "r: (n,)\nN: ()\nx: (n,)\nf = N / sum(r**2) + N / trace(outer(x, r)) - N / sum(r * x)",
        wrt="N",
    )
    r, x = np.array([1.0, 2.0, 3.0]), np.array([0.5, -1.0, 2.0])
    want = 2.0 / 14.0 + 2.0 / (x @ r) - 2.0 / (r @ x)  # by hand
    assert abs(d.function()(r=r, x=x, N=2.0) - want) < 1e-14
