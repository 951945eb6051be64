"""A product of dims used as a number is one factor: `x / (k*n)`, never `x / k*n`.

Found by trying `mean(R**2)` of a matrix as a user would: the generated code printed the entry
count without parentheses and computed (x / k) * n. Values are checked against NumPy evaluating
the same line, gradients against JAX (reference libraries).
"""

from __future__ import annotations

import jax
import jax.numpy as jnp
import numpy as np
import pytest

from gradwright import derive

jax.config.update("jax_enable_x64", True)

CASES = [
    ("mean(R**2)", lambda R: jnp.mean(R**2)),
    ("mean(R)", jnp.mean),
    ("sum(R) / (2*n*k)", lambda R: jnp.sum(R) / (2 * R.size)),
    ("n*k / sum(R**2)", lambda R: R.size / jnp.sum(R**2)),
    ("sum(R**2) / n / k", lambda R: jnp.sum(R**2) / R.size),
    ("sum(exp(R / (n*k)))", lambda R: jnp.sum(jnp.exp(R / R.size))),
    ("mean(R, axis=0) @ mean(R, axis=0)", lambda R: jnp.mean(R, axis=0) @ jnp.mean(R, axis=0)),
]


@pytest.mark.parametrize(("text", "reference"), CASES, ids=[c[0] for c in CASES])
def test_products_of_dims_are_one_factor(text, reference):
    R = np.random.default_rng(4).standard_normal((7, 3))
    d = derive("R: (n, k)\nf = " + text, wrt="R")
    value = d.function()(R=R)
    assert value == pytest.approx(float(reference(R)), rel=1e-12, abs=1e-14)
    grad = d.gradient_function("R")(R=R)
    np.testing.assert_allclose(grad, np.asarray(jax.grad(reference)(R)), rtol=1e-10, atol=1e-13)
    # the printed text pastes back with the same value
    again = derive("R: (n, k)\nf = " + str(d.expr), wrt="R") if hasattr(d, "expr") else d
    assert again.function()(R=R) == pytest.approx(value, rel=1e-12, abs=1e-14)
