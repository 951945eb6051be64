"""The Cholesky helpers of generated modules: LAPACK from NumPy's own OpenBLAS through ctypes,
SciPy where that library is not found; both give SciPy's results to rounding.

Reference: SciPy (scipy.linalg.cho_factor, cho_solve and LAPACK pocon) and NumPy's LU inverse.
"""

from __future__ import annotations

import subprocess
import sys

import numpy as np
import pytest
import scipy.linalg
from scipy.linalg.lapack import get_lapack_funcs

from gradwright.printing.runtime import HELPERS

NAMES = ("_gw_lapack", "_gw_cho_solve", "_gw_cho_inv", "_gw_cho_inv_trace")


def _helpers(force_scipy: bool) -> dict:
    ns: dict = {"np": np}
    exec("".join(HELPERS[n] for n in NAMES), ns)  # noqa: S102 (our own helper texts)
    if force_scipy:
        ns["_GW_LAPACK"][:] = [None]  # as where NumPy is built on another BLAS
    return ns


def test_lapack_found_in_numpys_own_openblas():
    blas = str(np.show_config(mode="dicts").get("Build Dependencies", {}).get("blas"))
    if "scipy-openblas" not in blas:
        pytest.skip("NumPy is not built on scipy-openblas here: the SciPy route is the one used")
    assert _helpers(False)["_gw_lapack"]() is not None


def _spd(n, dtype, rng):
    g = rng.standard_normal((n, n))
    if np.dtype(dtype).kind == "c":
        g = g + 1j * rng.standard_normal((n, n))
    return (g @ g.conj().T + n * np.eye(n)).astype(dtype)


def _variants(a):
    """C order, F order, and a non-contiguous view of the same matrix."""
    n = a.shape[0]
    big = np.zeros((2 * n, 2 * n), dtype=a.dtype)
    big[::2, ::2] = a
    return {"C": np.ascontiguousarray(a), "F": np.asfortranarray(a), "strided": big[::2, ::2]}


TOL = {np.float32: 2e-4, np.float64: 1e-11, np.complex64: 2e-4, np.complex128: 1e-11}


@pytest.mark.parametrize("force_scipy", [False, True], ids=["lapack", "scipy"])
@pytest.mark.parametrize("dtype", list(TOL), ids=lambda t: np.dtype(t).name)
def test_factor_solve_inverse_trace_match_scipy(dtype, force_scipy):
    ns = _helpers(force_scipy)
    rng = np.random.default_rng(1)
    n, tol = 6, TOL[dtype]
    a = _spd(n, dtype, rng)
    want_factor = scipy.linalg.cho_factor(a)
    inv = np.linalg.inv(a.astype(np.complex128 if a.dtype.kind == "c" else np.float64))
    for label, m in _variants(a).items():
        c, lower = ns["_gw_cho_factor"](m)
        assert c.dtype == a.dtype, label
        u = np.tril(c) if lower else np.triu(c)
        np.testing.assert_allclose(u.conj().T @ u if not lower else u @ u.conj().T, a, rtol=tol,
                                   atol=tol * n, err_msg=label)  # fmt: skip
        np.testing.assert_allclose(np.triu(c), np.triu(want_factor[0]), rtol=tol, atol=tol)
        for rhs_label, b in {
            "vector": rng.standard_normal(n).astype(dtype),
            "matrix": rng.standard_normal((n, 3)).astype(dtype),
            "F matrix": np.asfortranarray(rng.standard_normal((n, 3)).astype(dtype)),
            "strided": rng.standard_normal((n, 6)).astype(dtype)[:, ::2],
            "no columns": np.zeros((n, 0), dtype=dtype),
        }.items():
            got = ns["_gw_cho_solve"]((c, lower), b)
            want = scipy.linalg.cho_solve(want_factor, b)
            assert got.shape == b.shape and got.dtype == want.dtype, (label, rhs_label)
            np.testing.assert_allclose(got, want, rtol=tol, atol=tol, err_msg=rhs_label)
        np.testing.assert_allclose(ns["_gw_cho_inv"]((c, lower)), inv, rtol=tol, atol=tol)
        np.testing.assert_allclose(
            ns["_gw_cho_inv_trace"]((c, lower)), np.trace(inv).real, rtol=tol
        )
        (pocon,) = get_lapack_funcs(("pocon",), (want_factor[0],))
        anorm = float(np.max(np.sum(np.abs(a), axis=0)))
        want_rcond = pocon(want_factor[0], anorm, uplo="U")[0]
        np.testing.assert_allclose(ns["_gw_cho_rcond"]((c, lower), a), want_rcond, rtol=1e-3)


def test_a_scipy_factor_is_accepted_and_mixed_dtypes_promote():
    ns = _helpers(False)
    rng = np.random.default_rng(2)
    a = _spd(5, np.float64, rng)
    b = rng.standard_normal((5, 2))
    for factor in (scipy.linalg.cho_factor(a), scipy.linalg.cho_factor(a, lower=True)):
        np.testing.assert_allclose(ns["_gw_cho_solve"](factor, b), np.linalg.solve(a, b))
    f32 = ns["_gw_cho_factor"](a.astype(np.float32))
    got = ns["_gw_cho_solve"](f32, b)  # float32 factor, float64 right-hand side
    assert got.dtype == np.float64
    np.testing.assert_allclose(got, np.linalg.solve(a, b), rtol=1e-4)


@pytest.mark.parametrize("force_scipy", [False, True], ids=["lapack", "scipy"])
def test_bad_input_is_an_exception_not_a_crash(force_scipy):
    ns = _helpers(force_scipy)
    with pytest.raises(np.linalg.LinAlgError):
        ns["_gw_cho_factor"](-np.eye(3))
    with pytest.raises(ValueError):
        ns["_gw_cho_factor"](np.ones((3, 4)))
    factor = ns["_gw_cho_factor"](np.eye(3))
    with pytest.raises(ValueError):
        ns["_gw_cho_solve"](factor, np.ones(4))  # rows do not match: refused before any C call
    with pytest.raises(ValueError):
        ns["_gw_cho_solve"](factor, np.ones((3, 2, 2)))


KALMAN = (
    "H: (m, n)\\nP: (n, n) spd\\nR: (m, m) spd\\nv: (m,)\\nS = H @ P @ H.T + R\\n"
    "nll = logdet(S) + v @ solve(S, v)"
)
FRESH = f"""
import sys
import numpy as np
import gradwright
d = gradwright.derive("{KALMAN}", wrt=["P", "R"])
value, grads = d.value_and_gradient_function()(H=np.ones((3, 2)), P=np.eye(2), R=np.eye(3), v=np.ones(3))
print(np.isfinite(value), "scipy" in sys.modules)
"""


def test_fresh_process_with_an_spd_block_does_not_import_scipy():
    blas = str(np.show_config(mode="dicts").get("Build Dependencies", {}).get("blas"))
    if "scipy-openblas" not in blas:
        pytest.skip("NumPy is not built on scipy-openblas here: SciPy is imported instead")
    out = subprocess.run([sys.executable, "-c", FRESH], capture_output=True, text=True, check=True)
    assert out.stdout.split() == ["True", "False"]
