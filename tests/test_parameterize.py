"""The `lower` structure word, `tril`, and fitting through a Cholesky factor or a logarithm.

Reference derivatives come from JAX in float64 (reference library: JAX); the Gaussian
covariance MLE is the 1/N sample covariance (Anderson, An Introduction to Multivariate
Statistical Analysis, 3rd ed., section 3.2, from memory), computed here by NumPy.
"""

from __future__ import annotations

import numpy as np
import pytest

from checks import assert_close
from gradwright import FormulaError, derive
from gradwright.language import parse_block
from gradwright.printing import text

LOWER = """S: (n, n) spd
L: (n, n) lower
f = trace(solve(S, L @ L.T)) + logdet(L @ L.T) + sum(tril(L @ L.T)**2)"""

COVARIANCE = """Z: (m, p)
N: ()
S: (p, p) spd
f = N * logdet(S) + trace(solve(S, Z.T @ Z))"""


def test_lower_variable_gets_the_lower_triangle_of_the_gradient():
    d = derive(LOWER, wrt="L")
    a = d.sample_inputs()
    assert np.allclose(a["L"], np.tril(a["L"])) and np.all(np.diag(a["L"]) > 0)
    from checks import jax, jnp

    def f(L):  # the block written in jax.numpy, by hand
        S, M = jnp.asarray(a["S"]), L @ L.T
        return (
            jnp.trace(jnp.linalg.solve(S, M)) + jnp.linalg.slogdet(M)[1] + jnp.sum(jnp.tril(M) ** 2)
        )

    want = np.asarray(jax.grad(f)(jnp.asarray(a["L"])))  # reference library: JAX
    got = d.gradient_function()(**a)
    assert_close(got, np.tril(want), 1e-10, "gradient on the lower triangle")
    assert np.all(np.triu(got, 1) == 0)
    assert "lower-triangular" in d.text_steps()


def test_tril_reads_prints_and_round_trips():
    block = parse_block("A: (n, k)\nf = sum(tril(A)**2)")
    assert text(block.expr) == "sum(tril(A)**2)"
    with pytest.raises(FormulaError, match="tril needs a matrix"):
        parse_block("x: (n,)\nf = sum(tril(x))")
    with pytest.raises(FormulaError, match="square"):
        parse_block("L: (n, k) lower\nf = sum(L)")


def test_covariance_through_its_cholesky_factor_reaches_the_sample_covariance():
    from scipy.optimize import minimize

    rng = np.random.default_rng(5)
    Z = rng.standard_normal((40, 3)) @ rng.standard_normal((3, 3))
    d = derive(COVARIANCE, wrt="S", parameterize={"S": "cholesky"})
    assert d.variables == ("S_chol",)
    assert "definition of S" in d.text_steps()  # the chain-rule step is shown
    obj = d.objective(Z=Z, N=40.0)
    fit = minimize(obj, obj.pack(S_chol=np.eye(3)), jac=True, hess=obj.hess, method="trust-exact")
    assert fit.success
    S = d.values(Z=Z, N=40.0, **obj.unpack(fit.x))["S"]
    cov = np.cov(Z, rowvar=False, bias=True)  # reference: NumPy (Z has mean about zero: 1/N Zᵀ Z)
    assert_close(S, Z.T @ Z / 40, 1e-7, "S at the optimum")
    assert np.abs(cov - Z.T @ Z / 40).max() < 0.5  # the same object up to the mean correction
    se = d.standard_errors(Z=Z, N=40.0, **obj.unpack(fit.x))
    assert se["S_chol"].shape == (3, 3) and np.all(np.triu(se["S_chol"], 1) == 0)


def test_log_parameterization_of_a_positive_scalar():
    block = "N: ()\nr: ()\ns: () positive\nf = N * log(s) + r / s"
    d = derive(block, wrt="s", parameterize={"s": "log"})
    assert d.variables == ("log_s",)
    # f(log_s) = N log_s + r exp(-log_s): derivative N - r exp(-log_s), zero at s = r / N
    g = d.gradient_function()(N=10.0, r=30.0, log_s=np.log(3.0))
    assert g == pytest.approx(0.0, abs=1e-12)
    assert d.gradient_function()(N=10.0, r=30.0, log_s=0.0) == pytest.approx(10.0 - 30.0)


def test_parameterize_refuses_what_it_cannot_keep():
    with pytest.raises(FormulaError, match="Cholesky factor only"):
        derive("A: (n, n)\nf = trace(A)", wrt="A", parameterize={"A": "cholesky"})
    with pytest.raises(FormulaError, match="not a variable"):
        derive(COVARIANCE, wrt="N", parameterize={"S": "cholesky"})
    with pytest.raises(FormulaError, match="unknown parameterization"):
        derive(COVARIANCE, wrt="S", parameterize={"S": "softplus"})
    with pytest.raises(FormulaError, match="keeps no matrix structure"):
        derive(COVARIANCE, wrt="S", parameterize={"S": "log"})


def test_parameterize_works_with_a_shapes_mapping():
    d = derive(
        "N * logdet(S) + trace(solve(S, Z.T @ Z))",
        wrt="S",
        shapes={"Z": ("m", "p"), "N": (), "S": "(p, p) spd"},
        parameterize={"S": "cholesky"},
    )
    assert d.variables == ("S_chol",)
