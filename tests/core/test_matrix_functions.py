"""Spectral functions, factorizations and matrix equations against outside references.

Reference library: JAX in float64 (eigh, cholesky, jax.scipy.linalg.expm, Kronecker solves);
SciPy (expm_frechet, sqrtm, solve_sylvester) and central differences; published results are
named beside each check.
"""

from __future__ import annotations

import subprocess
import sys
import warnings

import numpy as np
import pytest

from checks import assert_close, jax, jax_reference, jnp
from gradwright import derive
from gradwright.errors import FormulaError, NotSupportedError
from gradwright.language import parse_block
from gradwright.printing import latex, text

SIZES = (2, 3, 5)
RTOL = 1e-8


def _spd(rng, n, spread=1.0):
    """An spd matrix with well separated eigenvalues (1, 2, ..., n times spread, rotated)."""
    q, _ = np.linalg.qr(rng.standard_normal((n, n)))
    return (q * (spread * np.arange(1.0, n + 1))) @ q.T


def _stable(rng, n):
    """A matrix whose eigenvalues have negative real parts (a continuous-time stable system)."""
    a = rng.standard_normal((n, n)) / np.sqrt(n)
    return a - (np.max(np.linalg.eigvals(a).real) + 1.0) * np.eye(n)


def _sym(g):
    return 0.5 * (g + g.T)


def _arrays(d, n, seed):
    rng = np.random.default_rng(seed)
    out = {}
    for name, info in d.symbols.items():
        if info.role in ("defined", "target"):
            continue
        shape = tuple(n if not isinstance(s, int) else s for s in info.shape)
        words = set(info.structure)
        if "spd" in words:
            out[name] = _spd(rng, n)
        elif "symmetric" in words:
            out[name] = _sym(rng.standard_normal(shape)) * 2
        elif name.startswith("A"):
            out[name] = _stable(rng, n)
        else:
            out[name] = rng.standard_normal(shape)
    return out


def _central(f, arrays, var, direction, h=1e-5):
    """Central difference of f along direction (Nocedal and Wright, 2nd ed., section 8.1)."""
    up = dict(arrays, **{var: arrays[var] + h * direction})
    down = dict(arrays, **{var: arrays[var] - h * direction})
    return (np.asarray(f(**up)) - np.asarray(f(**down))) / (2 * h)


# every case: (block, variable); the reference is the block read by JAX (checks.jax_reference)
SCALAR_CASES = [
    ("S: (n, n) spd\nf = sum(log(eigvalsh(S)))", "S"),
    ("S: (n, n) spd\nw: (n,)\nf = eigvalsh(S) @ w", "S"),
    ("S: (n, n) spd\nC: (n, n)\nf = trace(C @ cholesky(S))", "S"),
    ("S: (n, n) spd\nC: (n, n)\nf = trace(C @ expm(S))", "S"),
    ("S: (n, n) spd\nC: (n, n)\nf = trace(C @ sqrtm(S))", "S"),
    ("S: (n, n) spd\nC: (n, n)\nf = trace(C @ logm(S))", "S"),
    ("A: (n, n)\nC: (n, n)\nf = trace(C @ expm(A))", "A"),
    ("A: (n, n)\nB: (n, n)\nC: (n, n)\nf = sum(solve_sylvester(A, B, C) ** 2)", "A"),
    ("A: (n, n)\nB: (n, n)\nC: (n, n)\nf = sum(solve_sylvester(A, B, C) ** 2)", "B"),
    ("A: (n, n)\nB: (n, n)\nC: (n, n)\nf = sum(solve_sylvester(A, B, C) ** 2)", "C"),
    ("A: (n, n)\nW: (n, n) spd\nC: (n, n)\nf = trace(C @ solve_continuous_lyapunov(A, W))", "A"),
    ("A: (n, n)\nW: (n, n) spd\nC: (n, n)\nf = trace(C @ solve_continuous_lyapunov(A, W))", "W"),
    ("A: (n, n)\nW: (n, n) spd\nC: (n, n)\nf = trace(C @ solve_discrete_lyapunov(A / 4, W))", "A"),
    ("A: (n, n)\nW: (n, n) spd\nC: (n, n)\nf = trace(C @ solve_discrete_lyapunov(A / 4, W))", "W"),
]


@pytest.mark.parametrize("n", SIZES)
@pytest.mark.parametrize("case", SCALAR_CASES, ids=lambda c: c[0].splitlines()[-1] + ":" + c[1])
def test_gradient_matches_jax_and_central_differences(case, n):
    block, var = case
    d = derive(block, wrt=[var])
    arrays = _arrays(d, n, seed=n)
    ref = jax_reference(block, {"n": n})
    f = d.function()
    assert_close(f(**arrays), float(ref(**arrays)), 1e-10, what="value")
    g = d.gradient_function(var)(**arrays)

    def along(x):
        return ref(**dict(arrays, **{var: x}))

    want = np.asarray(jax.grad(along)(jnp.asarray(arrays[var])))  # reference library: JAX
    if "spd" in d.symbols[var].structure:
        want = _sym(want)
    assert_close(g, want, RTOL, what=f"gradient wrt {var}")
    rng = np.random.default_rng(7)
    direction = rng.standard_normal(np.shape(arrays[var]))
    if "spd" in d.symbols[var].structure:
        direction = _sym(direction)
    fd = _central(f, arrays, var, direction)
    assert abs(np.sum(g * direction) - fd) <= 1e-6 * max(1.0, abs(fd))


ARRAY_CASES = [
    ("S: (n, n) spd\nF = eigvalsh(S)", "S"),
    ("S: (n, n) spd\nF = cholesky(S)", "S"),
    ("S: (n, n) spd\nF = expm(S)", "S"),
    ("S: (n, n) spd\nF = sqrtm(S)", "S"),
    ("S: (n, n) spd\nF = logm(S)", "S"),
    ("A: (n, n)\nF = expm(A)", "A"),
    ("A: (n, n)\nB: (n, n)\nQ: (n, n)\nF = solve_sylvester(A, B, Q)", "B"),
    ("A: (n, n)\nQ: (n, n)\nF = solve_continuous_lyapunov(A, Q)", "A"),
    ("A: (n, n)\nQ: (n, n)\nF = solve_discrete_lyapunov(A / 4, Q)", "A"),
]


@pytest.mark.parametrize("n", (2, 4))
@pytest.mark.parametrize("case", ARRAY_CASES, ids=lambda c: c[0].splitlines()[-1])
def test_jvp_vjp_and_the_adjoint_identity(case, n):
    """JVP against JAX; ⟨G, J[dX]⟩ = ⟨J*[G], dX⟩ at random points."""
    block, var = case
    d = derive(block, wrt=[var])
    arrays = _arrays(d, n, seed=10 + n)
    ref = jax_reference(block, {"n": n})
    rng = np.random.default_rng(n)
    dx = rng.standard_normal(np.shape(arrays[var]))
    if "spd" in d.symbols[var].structure:
        dx = _sym(dx)
    jvp = d.jvp_function(var)(dx, **arrays)

    def along(x):
        return ref(**dict(arrays, **{var: x}))

    _, want = jax.jvp(along, (jnp.asarray(arrays[var]),), (jnp.asarray(dx),))
    assert_close(jvp, np.asarray(want), RTOL, what="JVP against JAX")
    g = rng.standard_normal(np.shape(jvp))
    vjp = d.vjp_function(var)(g, **arrays)
    assert abs(np.sum(g * jvp) - np.sum(vjp * dx)) <= 1e-10 * max(1.0, abs(np.sum(g * jvp)))


# --- published results ------------------------------------------------------------------------


def test_eigenvalue_derivative_magnus_1985():
    """J. R. Magnus, "On differentiating eigenvalues and eigenvectors", Econometric Theory 1
    (1985), Theorem 1: dλ = uᵀ dS u for a simple eigenvalue with unit eigenvector u. Worked
    example: S = [[2, 1], [1, 2]] has λ = 1, 3 with u = (1, -1)/√2, (1, 1)/√2."""
    d = derive("S: (2, 2) symmetric\nw: (2,)\nf = eigvalsh(S) @ w", wrt=["S"])
    s = np.array([[2.0, 1.0], [1.0, 2.0]])
    g_low = d.gradient_function("S")(S=s, w=np.array([1.0, 0.0]))
    assert_close(g_low, np.array([[0.5, -0.5], [-0.5, 0.5]]), 1e-14)
    g_high = d.gradient_function("S")(S=s, w=np.array([0.0, 1.0]))
    assert_close(g_high, np.array([[0.5, 0.5], [0.5, 0.5]]), 1e-14)


def test_daleckii_krein_at_a_diagonal_matrix_bhatia():
    """R. Bhatia, Matrix Analysis (1997), Theorem V.3.3: at Λ = diag(λ), the derivative of f
    along E is f^[1](λᵢ, λⱼ) Eᵢⱼ. Worked example: f = sqrt at diag(1, 4): f^[1] = 1/(√λᵢ + √λⱼ),
    so the entries are E11/2, E12/3, E21/3, E22/4."""
    d = derive("S: (2, 2) symmetric\nF = sqrtm(S)", wrt=["S"])
    e = np.array([[1.0, 2.0], [2.0, 3.0]])
    got = d.jvp_function("S")(e, S=np.diag([1.0, 4.0]))
    assert_close(got, np.array([[1 / 2, 2 / 3], [2 / 3, 3 / 4]]), 1e-14)
    # f = exp at diag(0, 1): f^[1](0, 1) = (e - 1)/1, f^[1](0, 0) = 1, f^[1](1, 1) = e
    d = derive("S: (2, 2) symmetric\nF = expm(S)", wrt=["S"])
    got = d.jvp_function("S")(np.ones((2, 2)), S=np.diag([0.0, 1.0]))
    assert_close(got, np.array([[1.0, np.e - 1], [np.e - 1, np.e]]), 1e-14)


def test_divided_differences_stay_accurate_for_close_eigenvalues():
    """Eigenvalues 1 and 1 + 1e-12: the divided differences tend to f'(1) (Bhatia 1997, ch. V);
    the naive quotient (f(λ₁) - f(λ₂))/(λ₁ - λ₂) would lose about 4 digits here."""
    s = np.diag([1.0, 1.0 + 1e-12, 3.0])
    e = np.ones((3, 3))
    for fn, deriv in (("expm", np.exp(1.0)), ("logm", 1.0), ("sqrtm", 0.5)):
        d = derive(f"S: (3, 3) spd\nF = {fn}(S)", wrt=["S"])
        with warnings.catch_warnings():
            warnings.simplefilter("error")
            got = d.jvp_function("S")(e, S=s)
        assert abs(got[0, 1] - deriv) <= 1e-10 * deriv, fn


def test_cholesky_derivative_murray_2016():
    """I. Murray, "Differentiation of the Cholesky decomposition" (2016), eq. for the forward
    mode dL = L Φ(L⁻¹ dS L⁻ᵀ) and its reverse mode. Worked example by hand: for 1×1, L = √s and
    dL = ds / (2√s); for S = [[4, 2], [2, 5]], L = [[2, 0], [1, 2]] and along dS = E₁₁,
    dL = [[1/4, 0], [-1/8, 1/16]] (from L₁₁ = √s₁₁, L₂₁ = s₂₁/L₁₁, L₂₂ = √(s₂₂ - L₂₁²))."""
    d = derive("S: (1, 1) spd\nF = cholesky(S)", wrt=["S"])
    assert_close(d.jvp_function("S")(np.array([[1.0]]), S=np.array([[9.0]])), [[1 / 6]], 1e-15)
    d = derive("S: (2, 2) spd\nF = cholesky(S)", wrt=["S"])
    s = np.array([[4.0, 2.0], [2.0, 5.0]])
    got = d.jvp_function("S")(np.array([[1.0, 0.0], [0.0, 0.0]]), S=s)
    assert_close(got, np.array([[0.25, 0.0], [-0.125, 0.0625]]), 1e-15)
    # reverse mode equals the adjoint of the forward mode at the same point
    g = np.array([[1.0, 0.0], [3.0, -2.0]])
    vjp = d.vjp_function("S")(g, S=s)
    for k in range(4):
        e = np.zeros(4)
        e[k] = 1.0
        e = _sym(e.reshape(2, 2))
        assert abs(np.sum(vjp * e) - np.sum(g * d.jvp_function("S")(e, S=s))) < 1e-14


def test_expm_frechet_al_mohy_higham_2009():
    """A. H. Al-Mohy and N. J. Higham, SIAM J. Matrix Anal. Appl. 30 (2009), eq. (1.2) with
    Higham, Functions of Matrices (2008), Theorem 3.6 (from memory): expm([[A, E], [0, A]]) has
    L(A, E) in its upper-right block; for E commuting with A, L(A, E) = E expm(A)."""
    import scipy.linalg

    rng = np.random.default_rng(3)
    a = rng.standard_normal((4, 4))
    e = rng.standard_normal((4, 4))
    d = derive("A: (4, 4)\nF = expm(A)", wrt=["A"])
    got = d.jvp_function("A")(e, A=a)
    block = scipy.linalg.expm(np.block([[a, e], [np.zeros((4, 4)), a]]))
    assert_close(got, block[:4, 4:], 1e-12)
    assert_close(d.jvp_function("A")(a, A=a), a @ scipy.linalg.expm(a), 1e-12)


def test_sqrtm_of_a_general_matrix_higham_2008():
    """N. J. Higham, Functions of Matrices (2008), §6.1: the Fréchet derivative L of the
    principal square root X at A solves X L + L X = E; checked against SciPy's sqrtm by central
    differences (Nocedal and Wright, 2nd ed., section 8.1)."""
    import scipy.linalg

    rng = np.random.default_rng(4)
    a = rng.standard_normal((4, 4)) + 4 * np.eye(4)  # eigenvalues off the negative axis
    e = rng.standard_normal((4, 4))
    d = derive("A: (4, 4)\nF = sqrtm(A)", wrt=["A"])
    x = d.function()(A=a)
    assert_close(x @ x, a, 1e-12)
    got = d.jvp_function("A")(e, A=a)
    assert_close(x @ got + got @ x, e, 1e-10)
    h = 1e-6
    fd = (scipy.linalg.sqrtm(a + h * e) - scipy.linalg.sqrtm(a - h * e)) / (2 * h)
    assert_close(got, fd.real, 1e-7)
    # the gradient of a scalar target through it, against central differences
    g = derive("A: (4, 4)\nC: (4, 4)\nf = trace(C @ sqrtm(A))", wrt=["A"])
    c = rng.standard_normal((4, 4))
    grad = g.gradient_function("A")(A=a, C=c)
    fd = (g.function()(A=a + h * e, C=c) - g.function()(A=a - h * e, C=c)) / (2 * h)
    assert abs(np.sum(grad * e) - fd) < 1e-7 * max(1.0, abs(fd))


def test_logm_of_a_general_matrix_higham_2008():
    """N. J. Higham, Functions of Matrices (2008), eq. (11.10) (from memory): the Fréchet
    derivative of the principal logarithm is ∫₀¹ (t(A - I) + I)⁻¹ E (t(A - I) + I)⁻¹ dt (the
    reference evaluator's quadrature); the generated code takes the block-triangular form
    (eq. (3.16)); both against central differences of SciPy's logm."""
    import scipy.linalg

    from gradwright.evaluate import evaluate

    rng = np.random.default_rng(13)
    a = rng.standard_normal((4, 4)) + 4 * np.eye(4)
    e = rng.standard_normal((4, 4))
    d = derive("A: (4, 4)\nF = logm(A)", wrt=["A"])
    got = d.jvp_function("A")(e, A=a)
    assert_close(got, evaluate(d.differential(), {"A": a}, {"A": e}), 1e-10)
    h = 1e-6
    fd = (scipy.linalg.logm(a + h * e) - scipy.linalg.logm(a - h * e)) / (2 * h)
    assert_close(got, fd.real, 1e-7)
    g = rng.standard_normal((4, 4))
    assert abs(np.sum(g * got) - np.sum(d.vjp_function("A")(g, A=a) * e)) < 1e-10
    # the gradient of tr(logm(A)) = log det A is A⁻ᵀ (Jacobi's formula)
    t = derive("A: (4, 4)\nf = trace(logm(A))", wrt=["A"])
    assert_close(t.gradient_function("A")(A=a), np.linalg.inv(a).T, 1e-12)


# --- closed forms -----------------------------------------------------------------------------


def test_closed_forms_of_spectral_gradients():
    """d/dS trace(sqrtm(S)) = ½ S^(-1/2) and d/dS sum(log(eigvalsh(S))) = S⁻¹ (both from
    d tr f(S) = tr(f'(S) dS); Bhatia 1997, ch. V)."""
    rng = np.random.default_rng(5)
    s = _spd(rng, 4)
    w, u = np.linalg.eigh(s)
    d = derive("S: (n, n) spd\nf = trace(sqrtm(S))", wrt=["S"])
    assert_close(d.gradient_function("S")(S=s), 0.5 * (u / np.sqrt(w)) @ u.T, 1e-12)
    d = derive("S: (n, n) spd\nf = sum(log(eigvalsh(S)))", wrt=["S"])
    assert_close(d.gradient_function("S")(S=s), np.linalg.inv(s), 1e-12)


def test_lqr_cost_gradient_equals_the_closed_form():
    """Continuous-time LQR with a static gain K: J(K) = tr(P Σ₀) with
    (A - BK)ᵀ P + P (A - BK) + Q + Kᵀ R K = 0. Closed form (W. S. Levine and M. Athans, IEEE
    Trans. Automatic Control 15 (1970), from memory): ∇J = 2 (R K - Bᵀ P) Y with
    (A - BK) Y + Y (A - BK)ᵀ + Σ₀ = 0."""
    import scipy.linalg

    block = (
        "A: (n, n)\nB: (n, m)\nK: (m, n)\nQ: (n, n) spd\nR: (m, m) spd\nX0: (n, n) spd\n"
        "Acl = A - B @ K\n"
        "P = solve_continuous_lyapunov(Acl.T, -(Q + K.T @ R @ K))\n"
        "J = trace(P @ X0)"
    )
    d = derive(block, wrt=["K"])
    rng = np.random.default_rng(6)
    n, m = 4, 2
    arrays = {
        "A": _stable(rng, n),
        "B": rng.standard_normal((n, m)),
        "K": 0.1 * rng.standard_normal((m, n)),
        "Q": _spd(rng, n),
        "R": _spd(rng, m),
        "X0": _spd(rng, n),
    }
    acl = arrays["A"] - arrays["B"] @ arrays["K"]
    k, r, q = arrays["K"], arrays["R"], arrays["Q"]
    p = scipy.linalg.solve_continuous_lyapunov(acl.T, -(q + k.T @ r @ k))
    y = scipy.linalg.solve_continuous_lyapunov(acl, -arrays["X0"])
    want = 2 * (r @ k - arrays["B"].T @ p) @ y
    assert_close(d.gradient_function("K")(**arrays), want, 1e-9)
    # one adjoint Lyapunov solve, no Kronecker system in the generated code
    src = d.source()
    assert "np.kron" not in src and "_gw_solve_continuous_lyapunov" in src
    # second derivatives go through the same implicit differentiation: HVP against JAX
    ref = jax_reference(block, {"n": n, "m": m})
    v = rng.standard_normal((m, n))

    def cost(k):
        return ref(**dict(arrays, K=k))

    _, want = jax.jvp(jax.grad(cost), (jnp.asarray(k),), (jnp.asarray(v),))  # reference: JAX
    assert_close(d.hvp_function("K")(v, **arrays), np.asarray(want), 1e-9)


# --- the hidden cases a user would try ---------------------------------------------------------

USER_CASES = [
    # von Neumann entropy of a density matrix R (spd, trace one in use): -tr(R log R)
    ("R: (n, n) spd\nH = -trace(R @ logm(R))", ["R"]),
    # Gaussian negative log-likelihood written with the Cholesky factor
    ("S: (n, n) spd\ny: (n,)\nL = cholesky(S)\nz = solve(L, y)\nf = 2 * sum(log(diag(L))) + z @ z",
     ["S"]),
    # fit of a linear system's generator to a trajectory point: x(t) = expm(t A) x0
    ("A: (n, n)\nx0: (n,)\ny: (n,)\nt: ()\nf = sum((expm(t * A) @ x0 - y) ** 2)", ["A"]),
    # Bures distance between covariances
    ("S1: (n, n) spd\nS2: (n, n) spd\nR1 = sqrtm(S1)\n"
     "f = trace(S1) + trace(S2) - 2 * trace(sqrtm(R1 @ S2 @ R1))", ["S2"]),
    # log-Euclidean distance between covariances
    ("S1: (n, n) spd\nS2: (n, n) spd\nf = sum((logm(S1) - logm(S2)) ** 2)", ["S1", "S2"]),
    # Ky Fan: the sum of all eigenvalues and a weighted sum of them
    ("S: (n, n) spd\nw: (n,)\nf = sum(eigvalsh(S)) + eigvalsh(S) @ w", ["S"]),
]  # fmt: skip


@pytest.mark.parametrize("case", USER_CASES, ids=lambda c: c[0].splitlines()[-1][:40])
def test_user_cases_match_jax(case):
    block, wrt = case
    d = derive(block, wrt=wrt)
    n = 4
    arrays = _arrays(d, n, seed=21)
    if "t" in arrays:
        arrays["t"] = 0.7
    ref = jax_reference(block, {"n": n})
    assert_close(d.function()(**arrays), float(ref(**arrays)), 1e-10, what="value")
    for var in wrt:

        def along(x, var=var):
            return ref(**dict(arrays, **{var: x}))

        want = np.asarray(jax.grad(along)(jnp.asarray(arrays[var])))  # reference library: JAX
        if "spd" in d.symbols[var].structure:
            want = _sym(want)
        assert_close(d.gradient_function(var)(**arrays), want, RTOL, what=f"gradient wrt {var}")


def test_entropy_gradient_closed_form():
    """d/dR (-tr(R log R)) = -(log R + I) (from d tr f(R) = tr(f'(R) dR) with f(x) = x log x)."""
    rng = np.random.default_rng(8)
    r = _spd(rng, 3)
    r /= np.trace(r)
    w, u = np.linalg.eigh(r)
    d = derive("R: (n, n) spd\nH = -trace(R @ logm(R))", wrt=["R"])
    assert_close(d.gradient_function("R")(R=r), -((u * np.log(w)) @ u.T + np.eye(3)), 1e-12)


def test_top_k_eigenvalues():
    """Ky Fan: the sum of the k largest eigenvalues has the gradient U_k U_kᵀ (the projector on
    their eigenvectors) where λ_k > λ_(k+1) (K. Fan, 1949, from memory)."""
    d = derive("S: (n, n) spd\nf = sum(eigvalsh(S)[-2:])", wrt=["S"])
    rng = np.random.default_rng(9)
    s = _spd(rng, 4)
    _, u = np.linalg.eigh(s)
    assert_close(d.gradient_function("S")(S=s), u[:, -2:] @ u[:, -2:].T, 1e-12)
    top = jax.grad(lambda x: jnp.sum(jnp.linalg.eigvalsh(x)[-2:]))  # reference library: JAX
    want = _sym(np.asarray(top(jnp.asarray(s))))
    assert_close(d.gradient_function("S")(S=s), want, 1e-12)


def test_largest_eigenvalue():
    from gradwright.language.parser import FUNCTIONS

    if "max" not in FUNCTIONS:
        pytest.skip("needs the reductions max/min of the NumPy-semantics work")
    d = derive("S: (n, n) spd\nf = max(eigvalsh(S))", wrt=["S"])
    rng = np.random.default_rng(10)
    s = _spd(rng, 4)
    _, u = np.linalg.eigh(s)
    assert_close(d.gradient_function("S")(S=s), np.outer(u[:, -1], u[:, -1]), 1e-12)


# --- warnings, refusals, printers ---------------------------------------------------------------


def test_repeated_eigenvalues_warn_only_where_the_derivative_does_not_exist():
    s = np.diag([2.0, 2.0, 5.0])
    single = derive("S: (3, 3) spd\nw: (3,)\nf = eigvalsh(S) @ w", wrt=["S"])
    with pytest.warns(RuntimeWarning, match="numerically repeated"):
        single.gradient_function("S")(S=s, w=np.array([1.0, 0.0, 0.0]))
    spectral = derive("S: (3, 3) spd\nf = sum(log(eigvalsh(S)))", wrt=["S"])
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        g = spectral.gradient_function("S")(S=s)
    assert_close(g, np.linalg.inv(s), 1e-14)


@pytest.mark.parametrize(
    "block, message, cls",
    [
        ("A: (n, n)\nf = sum(eigvalsh(A))", "eigvalsh needs a matrix known to be symmetric",
         FormulaError),
        ("A: (n, n)\nf = trace(cholesky(A))", "cholesky needs a matrix known", FormulaError),
        ("A: (n, k)\nf = trace(expm(A))", "expm needs a square matrix", FormulaError),
        ("A: (n, n)\nB: (k, k)\nQ: (n, n)\nF = solve_sylvester(A, B, Q)", "needs Q of shape",
         FormulaError),
    ],
)  # fmt: skip
def test_refusals_have_a_caret(block, message, cls):
    with pytest.raises(cls, match=message) as info:
        parse_block(block)
    assert "^" in str(info.value)


def test_second_derivatives_are_refused_not_guessed():
    from gradwright.calculus import differential

    d = derive("S: (n, n) spd\nf = sum(log(eigvalsh(S)))", wrt=["S"])
    with pytest.raises(NotSupportedError, match="not supported yet: second derivatives"):
        differential(d.gradient("S"), {"S"})
    with pytest.raises(NotSupportedError, match="not supported yet"):
        d.hvp_function("S")


@pytest.mark.parametrize(
    "formula",
    [
        "eigvalsh(S)", "cholesky(S)", "expm(A)", "sqrtm(S)", "logm(S)", "expm(S) @ sqrtm(A)",
        "logm(A)",
        "solve_sylvester(A, S, A)", "solve_continuous_lyapunov(A, S)",
        "solve_discrete_lyapunov(A.T, S)",
    ],
)  # fmt: skip
def test_text_round_trip_and_latex(formula):
    head = "S: (n, n) spd\nA: (n, n)\n"
    e = parse_block(head + f"F = {formula}").expr
    assert parse_block(head + f"F = {text(e)}").expr == e
    assert latex(e)


def test_import_stays_free_of_scipy():
    code = "import sys, gradwright; sys.exit('scipy' in sys.modules)"
    assert subprocess.run([sys.executable, "-c", code], check=False).returncode == 0


# --- stationary points that solve a Sylvester or Lyapunov equation -------------------------------


def test_stationary_point_of_a_two_sided_smoothing_is_a_sylvester_solve():
    """A store x week demand table Y smoothed along store similarities Ls and week similarities
    Lw: f = |X - Y|² + tr(Xᵀ Ls X) + tr(X Lw Xᵀ). Setting the gradient 2(X - Y) + 2 Ls X + 2 X Lw
    to zero gives (I + Ls) X + X Lw = Y, solved here by scipy.linalg.solve_sylvester."""
    import scipy.linalg

    block = (
        "Y: (s, w)\nLs: (s, s) spd\nLw: (w, w) spd\nX: (s, w)\n"
        "f = sum((X - Y)**2) + trace(X.T @ Ls @ X) + trace(X @ Lw @ X.T)"
    )
    d = derive(block, wrt=["X"])
    point = d.stationary_point("X")
    assert "solve_sylvester" in point.text()
    rng = np.random.default_rng(11)
    arrays = {"Y": rng.standard_normal((5, 3)), "Ls": _spd(rng, 5), "Lw": _spd(rng, 3)}
    x = point.function()(**arrays)
    want = scipy.linalg.solve_sylvester(np.eye(5) + arrays["Ls"], arrays["Lw"], arrays["Y"])
    assert_close(x, want, 1e-10)
    assert np.max(np.abs(d.gradient_function("X")(X=x, **arrays))) < 1e-10


def test_stationary_point_over_symmetric_matrices_is_a_lyapunov_solve():
    """f = tr(X A X) - tr(Q X) over symmetric X: the symmetric part of the gradient vanishes
    where M X + X Mᵀ = Q with M = (A + Aᵀ)/2 (scipy.linalg.solve_continuous_lyapunov)."""
    import scipy.linalg

    d = derive("A: (n, n)\nQ: (n, n) spd\nX: (n, n) symmetric\nf = trace(X @ A @ X) - trace(Q @ X)",
               wrt=["X"])  # fmt: skip
    point = d.stationary_point("X")
    rng = np.random.default_rng(12)
    a, q = rng.standard_normal((4, 4)), _spd(rng, 4)
    x = point.function()(A=a, Q=q)
    assert_close(x, scipy.linalg.solve_continuous_lyapunov(0.5 * (a + a.T), q), 1e-10)
    assert np.max(np.abs(d.gradient_function("X")(X=x, A=a, Q=q))) < 1e-10


# --- the check panel: valid samples and notes near non-differentiable points ---------------------


@pytest.mark.parametrize(
    "block, var",
    [
        ("S: (n, n) spd\nw: (n,)\nf = eigvalsh(S) @ w", "S"),
        ("S: (n, n) symmetric\nC: (n, n)\nf = trace(C @ logm(S))", "S"),
        ("A: (n, n)\nC: (n, n)\nf = trace(C @ sqrtm(A))", "A"),
        ("A: (n, n)\nQ: (n, n)\nF = solve_discrete_lyapunov(A, Q)", "A"),
    ],
)
def test_check_panel_draws_valid_inputs_and_passes(block, var):
    from gradwright.notebook.fdcheck import run_check

    d = derive(block, wrt=[var])
    arrays = d.sample_inputs(seed=3)
    a = arrays[var]
    if "eigvalsh" in block or "logm" in block:
        w = np.linalg.eigvalsh(a)
        assert w[0] > 0 and np.min(np.diff(w)) > 0.2 * w[-1] / len(w)
    if "discrete" in block:
        assert np.max(np.abs(np.linalg.eigvals(a))) < 1
    result = run_check(d, [var], arrays)
    assert result.passed, result.summary()
    assert not result.notes


def test_check_panel_notes_repeated_eigenvalues_and_singular_arguments():
    from gradwright.notebook.fdcheck import run_check

    d = derive("S: (n, n) spd\nw: (n,)\nf = eigvalsh(S) @ w", wrt=["S"])
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)  # the generated code's own warning
        result = run_check(d, ["S"], {"S": np.diag([1.0, 1.0, 2.0]), "w": np.ones(3)})
    assert any("numerically repeated" in note for note in result.notes)
    d = derive("S: (n, n) symmetric\nf = trace(sqrtm(S))", wrt=["S"])
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        result = run_check(d, ["S"], {"S": np.diag([0.0, 1.0, 2.0])})
    assert any("singular" in note for note in result.notes)


@pytest.mark.parametrize(
    "block, var",
    [
        ("A: (n, n)\nB: (k, k)\nQ: (n, k)\nF = solve_sylvester(A, B, Q)", "Q"),
        ("A: (n, n)\nB: (k, k)\nQ: (n, k)\nF = solve_sylvester(A, B, Q)", "B"),
        ("A: (n, n)\nQ: (n, n)\nF = solve_continuous_lyapunov(A, Q)", "A"),
        ("A: (n, n)\nQ: (n, n)\nF = solve_discrete_lyapunov(A / 4, Q)", "A"),
    ],
)
def test_kronecker_form_of_matrix_equations(block, var):
    """vec(A X + X B) = (I ⊗ A + Bᵀ ⊗ I) vec X (Henderson and Searle, 1981): the displayed
    Jacobian equals the dense one from JVPs and JAX's Jacobian."""
    from gradwright.evaluate import evaluate

    sizes = {"n": 3, "k": 2}
    d = derive(block, wrt=[var])
    arrays = _arrays(d, 3, seed=17)
    arrays = {k: (v if np.shape(v) != (3, 3) or k != "B" else v[:2, :2]) for k, v in arrays.items()}
    if "Q" in arrays and "B" in arrays:
        arrays["Q"] = arrays["Q"][:, :2]
    dense = d.jacobian_function()(**arrays)
    assert_close(evaluate(d.jacobian(), arrays, dims=sizes), dense, 1e-10)
    ref = jax_reference(block, sizes)

    def along(x):
        return jnp.ravel(ref(**dict(arrays, **{var: x})), order="F")

    want = jax.jacobian(along)(jnp.asarray(arrays[var]))  # reference library: JAX
    want = np.asarray(want).reshape(dense.shape[0], -1, order="F")
    assert_close(dense, want, 1e-9)


# --- every displayed step is checkable ----------------------------------------------------------


@pytest.mark.parametrize(
    "case", SCALAR_CASES + USER_CASES, ids=lambda c: c[0].splitlines()[-1][:40] + ":" + c[1][0]
)
def test_displayed_steps_evaluate_equal_and_read_off_the_gradient(case):
    """Each differential step equals the one before at a random point and direction (pending
    d(...) by the reference evaluator's finite differences, hence 1e-6), and the read-off
    gradient, evaluated by the reference evaluator (block-triangular Fréchet derivatives,
    Kronecker solves), equals the generated code's."""
    from gradwright.evaluate import evaluate

    block, wrt = case
    wrt = [wrt] if isinstance(wrt, str) else wrt
    d = derive(block, wrt=wrt)
    arrays = _arrays(d, 3, seed=31)
    if "t" in arrays:
        arrays["t"] = 0.7
    rng = np.random.default_rng(32)
    diffs = {}
    for v in wrt:
        dv = rng.standard_normal(np.shape(arrays[v]))
        diffs[v] = _sym(dv) if "spd" in d.symbols[v].structure else dv
    prev = None
    for step in d.steps:
        if step.kind == "differential":
            value = np.asarray(evaluate(step.expr, arrays, differentials=diffs, dims={"n": 3}))
            if prev is not None:
                scale = max(np.linalg.norm(prev), 1e-8)
                assert np.linalg.norm(value - prev) <= 1e-6 * scale, (step.rule, step.text())
            prev = value
        elif step.kind == "gradient":
            got = evaluate(step.expr, arrays, dims={"n": 3})
            assert_close(got, d.gradient_function(step.var)(**arrays), 1e-9, what=step.var)


@pytest.mark.parametrize(
    "case", SCALAR_CASES + USER_CASES, ids=lambda c: c[0].splitlines()[-1][:40] + ":" + c[1][0]
)
def test_printed_gradients_read_back(case):
    """The text of every gradient is in the language and reads back to the same expression."""
    block, wrt = case
    wrt = [wrt] if isinstance(wrt, str) else wrt
    d = derive(block, wrt=wrt)
    lines = block.rstrip("\n").split("\n")
    head = "\n".join(lines[:-1]) + "\n"
    for v in wrt:
        g = d.gradient(v)
        again = parse_block(head + f"G = {text(g)}").expr
        assert again == g, (text(g), text(again))
