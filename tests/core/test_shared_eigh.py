"""One eigendecomposition per symmetric matrix per generated function (printing/shared_eigh.py):
calls of NumPy's eigh/eigvalsh counted by monkeypatching, values against JAX
(jax.grad / jax.jvp of jnp.linalg.eigvalsh and jax.scipy.linalg.expm, float64).
"""

from __future__ import annotations

import numpy as np
import pytest

from checks import jax, jnp
from gradwright import derive
from gradwright.printing.shared_eigh import HELPERS

SPECTRUM = "S: (n, n) symmetric\nf = sum(eigvalsh(S)**2) + sum(exp(eigvalsh(S)))"
EXPM = "S: (n, n) symmetric\nB: (n, n)\nf = trace(expm(S) @ B)"


def _spectrum(S):
    w = jnp.linalg.eigvalsh(S)
    return jnp.sum(w**2) + jnp.sum(jnp.exp(w))


def _expm(S, B):
    return jnp.trace(jax.scipy.linalg.expm(S) @ B)


@pytest.fixture
def counted(monkeypatch):
    calls = {"eigh": 0, "eigvalsh": 0}
    for name in calls:
        real = getattr(np.linalg, name)

        def wrapper(*args, _real=real, _name=name, **kwargs):
            calls[_name] += 1
            return _real(*args, **kwargs)

        monkeypatch.setattr(np.linalg, name, wrapper)
    return calls


def _symmetric(n, seed):
    a = np.random.default_rng(seed).standard_normal((n, n))
    return 0.5 * (a + a.T)


def test_every_variant_exists():
    assert sorted(HELPERS) == [
        "_gw_eigvalsh_jvp_of",
        "_gw_eigvalsh_vjp_jvp_of",
        "_gw_eigvalsh_vjp_of",
        "_gw_matrix_function_of",
        "_gw_spectral_frechet_of",
    ]
    for name, text in HELPERS.items():
        assert f"def {name}(" in text and "_gw_eigh(a" not in text


def test_value_and_gradient_decompose_once(counted):
    d = derive(SPECTRUM, wrt="S")
    S = _symmetric(5, 1)
    value, grad = d.value_and_gradient_function()(S=S)
    assert counted == {"eigh": 1, "eigvalsh": 0}
    want = jax.grad(_spectrum)(jnp.asarray(S))
    np.testing.assert_allclose(value, float(_spectrum(jnp.asarray(S))), rtol=1e-12)
    np.testing.assert_allclose(grad, 0.5 * (want + want.T), rtol=1e-9, atol=1e-11)
    # the value alone needs the eigenvalues only: eigvalsh, not eigh
    counted.update(eigh=0, eigvalsh=0)
    d.function()(S=S)
    assert counted == {"eigh": 0, "eigvalsh": 1}


def test_hessian_vector_product_decomposes_once(counted):
    d = derive(SPECTRUM, wrt="S")
    S, E = _symmetric(4, 2), _symmetric(4, 3)
    got = d.hvp_function(var="S")(E, S=S)
    assert counted == {"eigh": 1, "eigvalsh": 0}
    grad = jax.grad(_spectrum)
    want = jax.jvp(grad, (jnp.asarray(S),), (jnp.asarray(E),))[1]
    np.testing.assert_allclose(got, 0.5 * (want + want.T), rtol=1e-7, atol=1e-9)


def test_spectral_function_and_its_derivative_share_the_decomposition(counted):
    d = derive(EXPM, wrt="S")
    S, B = _symmetric(4, 4), np.random.default_rng(5).standard_normal((4, 4))
    value, grad = d.value_and_gradient_function()(S=S, B=B)
    assert counted["eigh"] == 1
    want = jax.grad(_expm)(jnp.asarray(S), jnp.asarray(B))
    np.testing.assert_allclose(value, float(_expm(jnp.asarray(S), jnp.asarray(B))), rtol=1e-10)
    np.testing.assert_allclose(grad, 0.5 * (want + want.T), rtol=1e-8, atol=1e-10)


def test_an_unsymmetric_argument_is_still_refused():
    d = derive(SPECTRUM, wrt="S")
    with pytest.raises(ValueError, match="S is not symmetric"):
        d.value_and_gradient_function()(S=np.arange(9.0).reshape(3, 3))


def test_other_libraries_refuse_by_the_same_name():
    torch = pytest.importorskip("torch")
    d = derive(SPECTRUM, wrt="S")
    S = torch.tensor(_symmetric(3, 6))
    with pytest.raises(NotImplementedError, match=r"^eigvalsh_vjp_jvp is not available"):
        d.hvp_function(var="S")(torch.eye(3, dtype=torch.float64), S=S)
    value, grad = d.value_and_gradient_function()(S=S)  # computed with torch, one eigh
    want = d.value_and_gradient_function()(S=S.numpy())[1]
    np.testing.assert_allclose(grad.numpy(), want, rtol=1e-12)
