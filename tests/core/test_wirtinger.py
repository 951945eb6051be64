"""Complex blocks (Wirtinger calculus) against JAX, central differences along real and
imaginary directions, and a table of published Wirtinger gradients.

Convention under test: for a real f of a complex Z, G = ∂f/∂Re Z + i ∂f/∂Im Z = 2 ∂f/∂conj(Z).
JAX (reference library) returns conj(G); `checks.jax_complex_gradient` converts.
"""

from __future__ import annotations

import numpy as np
import pytest

from checks import complex_difference_check, jax, jax_complex_gradient, jnp
from gradwright import FormulaError, NotSupportedError, derive
from gradwright import expr as E
from gradwright.evaluate import evaluate
from gradwright.printing import text

RTOL = 1e-8

# scenario 5 flavour: an antenna array (m antennas, n transmitters, k snapshots)
CH = "H: (m, n) complex\nx: (n,) complex\ny: (m,) complex\n"


def _h(a):
    return jnp.conj(a).T


#: (id, block, variable, JAX function of the same arrays, Hermitian variable)
CASES = [
    ("channel-ls", CH + "f = norm(y - H @ x)**2", "x",
     lambda H, x, y: jnp.sum(jnp.abs(y - H @ x) ** 2), False),
    ("channel-ls-wrt-H", CH + "f = norm(y - H @ x)**2", "H",
     lambda H, x, y: jnp.sum(jnp.abs(y - H @ x) ** 2), False),
    ("matrix-ls", "Y: (m, k) complex\nH: (m, n) complex\nX: (n, k) complex\n"
     "f = norm(Y - H @ X)**2", "X",
     lambda Y, H, X: jnp.sum(jnp.abs(Y - H @ X) ** 2), False),
    ("quadratic-hermitian", "R: (n, n) hermitian\nw: (n,) complex\nf = w.conj() @ R @ w", "w",
     lambda R, w: jnp.real(jnp.conj(w) @ R @ w), False),
    ("wiener", "R: (n, n) hpd\np: (n,) complex\nw: (n,) complex\ns: ()\n"
     "J = s - 2 * real(vdot(w, p)) + w.conj() @ R @ w", "w",
     lambda R, p, w, s: s - 2 * jnp.real(jnp.vdot(w, p)) + jnp.real(jnp.conj(w) @ R @ w), False),
    ("mvdr-power-ratio", "R: (n, n) hpd\na: (n,) complex\nw: (n,) complex\n"
     "f = real(w.conj() @ R @ w) / abs(vdot(a, w))**2", "w",
     lambda R, a, w: jnp.real(jnp.conj(w) @ R @ w) / jnp.abs(jnp.vdot(a, w)) ** 2, False),
    ("modulus-energy", "Z: (n, k) complex\nf = sum(abs(Z)**2)", "Z",
     lambda Z: jnp.sum(jnp.abs(Z) ** 2), False),
    ("modulus-sum", "Z: (n, k) complex\nf = sum(abs(Z))", "Z",
     lambda Z: jnp.sum(jnp.abs(Z)), False),
    ("norm-unsquared", "z: (n,) complex\nf = norm(z)", "z",
     lambda z: jnp.linalg.norm(z), False),
    ("real-trace", "A: (n, n) complex\nZ: (n, n) complex\nf = real(trace(A @ Z @ Z))", "Z",
     lambda A, Z: jnp.real(jnp.trace(A @ Z @ Z)), False),
    ("imag-part", "a: (n,) complex\nz: (n,) complex\nf = imag(a @ z) + real(z @ z)", "z",
     lambda a, z: jnp.imag(a @ z) + jnp.real(z @ z), False),
    ("logabsdet", "Z: (n, n) complex\nf = logdet(Z)", "Z",
     lambda Z: jnp.linalg.slogdet(Z)[1], False),
    ("logdet-gram", "Z: (m, n) complex\nf = logdet(Z.conj().T @ Z + eye(n))", "Z",
     lambda Z: jnp.linalg.slogdet(_h(Z) @ Z + jnp.eye(Z.shape[1]))[1], False),
    ("inverse", "A: (n, n) complex\nZ: (n, n) complex\nf = real(trace(A @ inv(Z)))", "Z",
     lambda A, Z: jnp.real(jnp.trace(A @ jnp.linalg.inv(Z))), False),
    ("solve", "Z: (n, n) complex\nb: (n,) complex\nf = norm(solve(Z, b))**2", "Z",
     lambda Z, b: jnp.sum(jnp.abs(jnp.linalg.solve(Z, b)) ** 2), False),
    ("det-modulus", "Z: (n, n) complex\nf = abs(det(Z))**2", "Z",
     lambda Z: jnp.abs(jnp.linalg.det(Z)) ** 2, False),
    ("kron", "A: (p, p) complex\nZ: (n, n) complex\nf = norm(kron(A, Z))**2", "Z",
     lambda A, Z: jnp.sum(jnp.abs(jnp.kron(A, Z)) ** 2), False),
    ("exp", "z: (n,) complex\nf = sum(abs(exp(z))**2)", "z",
     lambda z: jnp.sum(jnp.abs(jnp.exp(z)) ** 2), False),
    ("real-variable-in-complex-block", "H: (m, n) complex\nt: (n,)\ny: (m,) complex\n"
     "f = norm(y - H @ t)**2", "t",
     lambda H, t, y: jnp.sum(jnp.abs(y - H @ t) ** 2), False),
    ("mvdr-output-power", "R: (n, n) hpd\na: (n,) complex\nP = 1 / (a.conj() @ solve(R, a))", "a",
     lambda R, a: 1 / jnp.real(jnp.conj(a) @ jnp.linalg.solve(R, a)), False),
    ("mvdr-output-power-wrt-R", "R: (n, n) hpd\na: (n,) complex\nP = 1 / (a.conj() @ solve(R, a))",
     "R", lambda R, a: 1 / jnp.real(jnp.conj(a) @ jnp.linalg.solve(R, a)), True),
    ("channel-capacity", "H: (m, n) complex\ns: ()\nC = logdet(eye(m) + H @ H.conj().T / s)", "H",
     lambda H, s: jnp.linalg.slogdet(jnp.eye(H.shape[0]) + H @ jnp.conj(H).T / s)[1], False),
    ("hermitian-logdet", "R: (n, n) hpd\nS: (n, n) hermitian\nf = logdet(R) - trace(S @ R)", "R",
     lambda R, S: jnp.linalg.slogdet(R)[1] - jnp.real(jnp.trace(S @ R)), True),
    ("hermitian-quadratic", "R: (n, n) hermitian\nx: (n,) complex\nf = x.conj() @ R @ x", "R",
     lambda R, x: jnp.real(jnp.conj(x) @ R @ x), True),
]  # fmt: skip


def _herm(g):
    return (g + np.conj(g).T) / 2


@pytest.mark.parametrize(("block", "var", "ref", "herm"), [c[1:] for c in CASES],
                         ids=[c[0] for c in CASES])  # fmt: skip
def test_gradient_matches_jax_and_differences(block, var, ref, herm):
    d = derive(block, wrt=var)
    for seed in (0, 1):
        arrays = d.sample_inputs(seed=seed)
        got = d.gradient_function()(**arrays)
        want = jax_complex_gradient(ref, arrays, var)  # reference library: JAX
        if herm:
            want = _herm(want)
        if np.isrealobj(arrays[var]):
            want = np.real(want)
            assert np.isrealobj(got)
        scale = max(1.0, float(np.max(np.abs(want))))
        assert np.max(np.abs(got - want)) <= RTOL * scale, (text(d.gradient()), got, want)
        # and against central differences along real and imaginary directions (no library)
        complex_difference_check(d.function(), arrays, var, got, seed=seed, hermitian=herm)
        # the value and the generated value_and_gradient agree with the reference
        value, g2 = d.value_and_gradient_function()(**arrays)
        assert abs(value - float(ref(**arrays))) <= 1e-9 * max(1.0, abs(value))
        assert np.allclose(g2, got, rtol=1e-12, atol=1e-12)


def test_jax_convention_is_the_conjugate():
    """JAX's grad of |z|² at z is 2 conj(z); ours (∂/∂Re + i ∂/∂Im) is 2 z."""
    z = 1.0 + 2.0j
    assert complex(jax.grad(lambda u: jnp.real(u * jnp.conj(u)))(z)) == 2 * np.conj(z)
    d = derive("z: () complex\nf = abs(z)**2", wrt="z")
    assert d.gradient_function()(z=z) == pytest.approx(2 * z)


# --- published Wirtinger gradients ----------------------------------------------------------------
# Each row: a block, its variable, and the gradient 2 ∂f/∂conj(Z) (or the Hermitian gradient) in
# closed form as printed in the source. Sources: A. Hjørungnes, Complex-Valued Matrix
# Derivatives, Cambridge University Press, 2011 (tables of derivatives, chapters 3 and 4; from
# memory); D. H. Brandwood, "A complex gradient operator and its application in adaptive array
# theory", IEE Proc. F/H 130(1), 1983 (the gradient of a Hermitian form and the Wiener solution;
# from memory); K. Kreutz-Delgado, "The complex gradient operator and the CR-calculus", 2009
# (arXiv:0906.4835; the least-squares example; from memory).

TABLE = [
    # Brandwood 1983: ∂(wᴴ R w)/∂conj(w) = R w, so G = 2 R w
    ("brandwood-hermitian-form", "R: (n, n) hermitian\nw: (n,) complex\nf = w.conj() @ R @ w",
     "w", lambda R, w: 2 * R @ w),
    # Brandwood 1983: the mean square error of an array, ∂J/∂conj(w) = R w - p
    ("brandwood-wiener", "R: (n, n) hpd\np: (n,) complex\nw: (n,) complex\n"
     "J = real(w.conj() @ R @ w) - 2 * real(vdot(p, w))", "w", lambda R, p, w: 2 * (R @ w - p)),
    # Kreutz-Delgado 2009: ‖y - A x‖², ∂/∂conj(x) = -Aᴴ (y - A x)
    ("kreutz-delgado-ls", CH + "f = norm(y - H @ x)**2", "x",
     lambda H, x, y: -2 * np.conj(H).T @ (y - H @ x)),
    # Hjørungnes 2011: ∂ tr(Zᴴ Z)/∂conj(Z) = Z
    ("hjorungnes-frobenius", "Z: (n, k) complex\nf = real(trace(Z.conj().T @ Z))", "Z",
     lambda Z: 2 * Z),
    # Hjørungnes 2011: ∂ Re tr(Aᴴ Z)/∂conj(Z) = A / 2
    ("hjorungnes-linear", "A: (n, k) complex\nZ: (n, k) complex\nf = real(trace(A.conj().T @ Z))",
     "Z", lambda A, Z: A),
    # Hjørungnes 2011: ∂ ln det(Zᴴ Z)/∂conj(Z) = Z (Zᴴ Z)⁻¹ (Z of full column rank)
    ("hjorungnes-logdet-gram", "Z: (m, n) complex\nf = logdet(Z.conj().T @ Z)", "Z",
     lambda Z: 2 * Z @ np.linalg.inv(np.conj(Z).T @ Z)),
    # Hjørungnes 2011: ln|det Z| = Re ln det Z, ∂/∂conj(Z) = Z⁻ᴴ / 2
    ("hjorungnes-logabsdet", "Z: (n, n) complex\nf = logdet(Z)", "Z",
     lambda Z: np.conj(np.linalg.inv(Z)).T),
    # Hermitian positive definite R: the gradient of ln det R on the Hermitian matrices is R⁻¹
    # (Hjørungnes 2011, patterned matrices, chapter 6; from memory)
    ("hjorungnes-hermitian-logdet", "R: (n, n) hpd\nf = logdet(R)", "R",
     lambda R: np.linalg.inv(R)),
]  # fmt: skip


@pytest.mark.parametrize(("block", "var", "closed"), [c[1:] for c in TABLE],
                         ids=[c[0] for c in TABLE])  # fmt: skip
def test_published_wirtinger_gradients(block, var, closed):
    d = derive(block, wrt=var, sizes=None)
    arrays = d.sample_inputs(sizes={"m": 5, "n": 3, "k": 4}, seed=3)
    got = d.gradient_function()(**arrays)
    want = closed(**{k: v for k, v in arrays.items() if k in block})
    assert np.allclose(got, want, rtol=1e-10, atol=1e-10), (text(d.gradient()), got, want)


# --- Wirtinger derivatives of complex-valued targets ---------------------------------------------


def test_holomorphic_target_has_zero_conjugate_part():
    d = derive("A: (n, n) complex\nZ: (n, n) complex\nf = trace(A @ Z)", wrt="Z")
    a, b = d.wirtinger_derivatives()
    assert text(a) == "A.T" and type(b) is E.Zero  # Hjørungnes 2011: ∂ tr(AZ)/∂Z = Aᵀ
    with pytest.raises(FormulaError, match="complex-valued"):
        d.gradient()
    d = derive("Z: (n, n) complex\nf = det(Z)", wrt="Z")
    a, b = d.wirtinger_derivatives()
    arrays = d.sample_inputs()
    Z = arrays["Z"]
    assert type(b) is E.Zero
    # Hjørungnes 2011: ∂ det Z/∂Z = det(Z) Z⁻ᵀ (from memory)
    assert np.allclose(evaluate(a, arrays), np.linalg.det(Z) * np.linalg.inv(Z).T)


def test_array_target_jacobians_and_products():
    d = derive("H: (n, n) complex\nz: (n,) complex\nF = H @ z + 2 * conj(z)", wrt="z")
    j, k = d.wirtinger_jacobians()
    arrays = d.sample_inputs(seed=2)
    H = arrays["H"]
    assert np.allclose(evaluate(j, arrays), H)
    assert np.allclose(evaluate(k, arrays, dims={"n": 3}), 2 * np.eye(3))
    v = np.array([1.0 - 2j, 0.5j, 3.0])
    assert np.allclose(d.jvp_function()(v, **arrays), H @ v + 2 * np.conj(v))
    # the VJP is the adjoint under Re <A, B>: Re <c, J v> = Re <vjp(c), v> for every v
    c = np.array([0.3 + 1j, -2.0, 1j])
    u = d.vjp_function()(c, **arrays)
    for w in (v, 1j * v, np.ones(3) + 0j):
        lhs = np.real(np.vdot(c, d.jvp_function()(w, **arrays)))
        assert lhs == pytest.approx(np.real(np.vdot(u, w)))


def test_hvp_over_real_and_imaginary_parts():
    d = derive("R: (n, n) hpd\nz: (n,) complex\nf = sum(abs(z)**4) + z.conj() @ R @ z", wrt="z")
    arrays = d.sample_inputs(seed=4)
    g = d.gradient_function()
    hvp = d.hvp_function()
    rng = np.random.default_rng(0)
    for v in (rng.standard_normal(3) + 0j, 1j * rng.standard_normal(3)):
        h = 1e-6
        up = g(**{**arrays, "z": arrays["z"] + h * v})
        down = g(**{**arrays, "z": arrays["z"] - h * v})
        assert np.allclose(hvp(v, **arrays), (up - down) / (2 * h), rtol=1e-6, atol=1e-6)


def test_stationary_points():
    d = derive(CH + "f = norm(y - H @ x)**2", wrt="x")
    arrays = d.sample_inputs(sizes={"m": 6, "n": 3})
    point = d.stationary_point().function()(H=arrays["H"], y=arrays["y"])
    # complex least squares (reference library: NumPy's lstsq)
    assert np.allclose(point, np.linalg.lstsq(arrays["H"], arrays["y"], rcond=None)[0])
    d = derive("R: (n, n) hpd\np: (n,) complex\nw: (n,) complex\n"
               "J = real(w.conj() @ R @ w) - 2 * real(vdot(w, p))", wrt="w")  # fmt: skip
    sp = d.stationary_point()
    assert sp.text() == "w = solve(R, p)"  # the Wiener solution R⁻¹p (Brandwood 1983)
    with pytest.raises(NotSupportedError):
        derive("z: (n,) complex\nf = sum(abs(z)**4)", wrt="z").stationary_point()


# --- the language and the read-off ---------------------------------------------------------------


def test_not_provably_real_target_is_refused_or_shown_real():
    with pytest.raises(FormulaError, match="complex-valued"):
        derive("A: (n, n) complex\nx: (n,) complex\nf = x.conj() @ A @ x", wrt="x").gradient()
    d = derive("R: (n, n) hermitian\nx: (n,) complex\nf = x.conj() @ R @ x", wrt="x")
    assert d.target_is_real and d.field("f") == "real"
    assert any(r["field"] == "complex" for r in d.shape_table())


def test_language_spellings_build_the_same_tree():
    base = "Z: (n, k) complex\nA: (n, k) complex\n"
    one = derive(base + "f = real(trace(Z.conj().T @ A))", wrt="Z").expr
    two = derive(base + "f = real(trace(conj(Z).T @ A))", wrt="Z").expr
    three = derive(base + "f = trace(Z.conj().T @ A).real", wrt="Z").expr
    assert one == two == three
    with pytest.raises(FormulaError, match="complex numbers"):
        derive("x: (n,)\nf = sum(x) * 2j", wrt="x")
    with pytest.raises(NotSupportedError, match="spd"):
        derive("S: (n, n) complex spd\nf = logdet(S)", wrt="S")
    with pytest.raises(NotSupportedError, match="sigmoid"):
        derive("z: (n,) complex\nf = sum(abs(sigmoid(z)))", wrt="z")
    d = derive("z: (n,) complex\nf = real(2j * (z @ z))", wrt="z")
    arrays = d.sample_inputs()
    assert d.function()(**arrays) == pytest.approx(np.real(2j * (arrays["z"] @ arrays["z"])))


def test_real_declared_symbols_still_refuse_complex_arrays():
    d = derive(CH + "s: ()\nf = s * norm(y - H @ x)**2", wrt="x")
    arrays = d.sample_inputs()
    for fn in (d.function(), d.gradient_function()):
        with pytest.raises(TypeError, match="s is a complex array"):
            fn(**{**arrays, "s": 1.0 + 1j})


def test_every_displayed_step_is_the_same_differential():
    d = derive("R: (n, n) hpd\np: (n,) complex\nw: (n,) complex\n"
               "J = real(w.conj() @ R @ w) - 2 * real(vdot(w, p))", wrt="w")  # fmt: skip
    arrays = d.sample_inputs(seed=5)
    dw = {"w": np.array([1.0 + 0.5j, -1j, 2.0])}
    values = [evaluate(s.expr, arrays, dw) for s in d.steps[1:] if s.kind == "differential"]
    assert len(values) >= 4
    for v in values[1:]:
        assert v == pytest.approx(values[0], rel=1e-6, abs=1e-8)
    assert "steepest ascent" in d.steps[-1].rule
    assert "∂J/∂Re w + i ∂J/∂Im w = 2 ∂J/∂conj(w) = 2 * (R @ w - p)" in d.text_steps()
    assert r"2\frac{\partial J}{\partial \overline{w}}" in d.result_latex()


# --- the finite-difference check of the notebook face --------------------------------------------


def test_check_runs_along_real_and_imaginary_directions_and_catches_a_conjugate():
    from gradwright.notebook.fdcheck import COMPLEX_STEP_UNAVAILABLE, run_check

    d = derive("R: (n, n) hpd\n" + CH + "f = norm(y - H @ x)**2 + x.conj() @ R @ x", wrt=["x", "R"])
    result = run_check(d, ["x", "R"], d.sample_inputs())
    assert result.error is None and result.passed, result.summary()
    d = derive("H: (n, n) complex\nz: (n,) complex\nF = H @ z + 2 * conj(z)", wrt="z")
    result = run_check(d, ["z"], d.sample_inputs())
    assert result.error is None and result.passed, result.summary()
    # a gradient off by a conjugate (the classic convention slip) must fail the check
    d = derive("z: (n,) complex\nf = sum(abs(z - 1j)**2)", wrt="z")
    namespace = d._namespace()
    good = namespace["gradient_z"]
    d._fn = lambda name: (
        (lambda **a: np.conj(good(**a))) if name == "gradient_z" else namespace[name]
    )
    assert not run_check(d, ["z"], d.sample_inputs()).passed
    assert d.supports_complex_step is False
    with pytest.raises(ValueError, match="complex step is unavailable"):
        run_check(d, ["z"], d.sample_inputs(), method="complex step")
    assert "real and imaginary directions" in COMPLEX_STEP_UNAVAILABLE


def test_pytorch_returns_our_gradient_unchanged():
    """A second reference library: PyTorch's backward of a real loss of a complex leaf gives
    2 ∂f/∂conj(z), our G (PyTorch documentation, "Autograd for complex numbers"; checked here)."""
    torch = pytest.importorskip("torch")
    d = derive(CH + "f = norm(y - H @ x)**2 + sum(abs(x)**4)", wrt="x")
    arrays = d.sample_inputs(seed=7)
    t = {k: torch.tensor(v, dtype=torch.complex128) for k, v in arrays.items()}
    t["x"].requires_grad_(True)
    loss = torch.sum(torch.abs(t["y"] - t["H"] @ t["x"]) ** 2) + torch.sum(torch.abs(t["x"]) ** 4)
    loss.backward()
    want = t["x"].grad.numpy()  # reference library: PyTorch
    assert np.allclose(d.gradient_function()(**arrays), want, rtol=1e-10, atol=1e-12)


def test_optimizer_packing_and_shape_table_fields():
    from scipy import optimize

    from gradwright.notebook.functions import Packer
    from gradwright.notebook.render import shape_table_bundle

    d = derive("Y: (a, k) complex\nH: (a, t) complex\nX: (t, k) complex\nloss = norm(Y - H @ X)**2",
               wrt="H")  # fmt: skip
    arrays = d.sample_inputs(sizes={"a": 6, "t": 2, "k": 9}, seed=1)
    packer = Packer.for_derivation(d)
    x0 = packer.pack(H=np.zeros((6, 2), complex))
    assert x0.shape == (24,) and np.isrealobj(x0)  # real parts, then imaginary parts
    objective = packer.objective(d.value_and_gradient_function())
    constants = {"Y": arrays["Y"], "X": arrays["X"]}
    result = optimize.minimize(lambda v: objective(v, **constants), x0, jac=True, method="BFGS")
    fitted = packer.unpack(result.x)
    # reference: NumPy's least squares on the transposed system Xᵀ Hᵀ = Yᵀ
    want = np.linalg.lstsq(arrays["X"].T, arrays["Y"].T, rcond=None)[0].T
    assert np.allclose(fitted, want, atol=1e-5)
    table = shape_table_bundle(d)["text/plain"]
    assert "field" in table and "complex" in table and "real" in table


def test_abs_of_a_real_block_is_the_absolute_value_and_refuses_the_complex_step():
    d = derive("x: (n,)\nf = sum(abs(x - 1)) + abs(sum(x))", wrt="x")
    assert type(d).__name__ == "Derivation"  # a real block stays on the real path
    assert d.supports_complex_step is False  # |x + ih| has no useful imaginary part
    arrays = d.sample_inputs(seed=2)
    x = arrays["x"]
    # reference: the sign function, d|u|/du = sign(u) away from 0 (from memory)
    want = np.sign(x - 1) + np.sign(np.sum(x))
    assert np.allclose(d.gradient_function()(**arrays), want)
    assert np.isrealobj(d.gradient_function()(**arrays))


def test_text_round_trip_of_complex_expressions():
    from gradwright.language import parse_block

    decl = "H: (m, n) complex\nx: (n,) complex\ny: (m,) complex\nR: (n, n) hermitian\n"
    body = (
        "norm(y - H @ x)**2 + x.conj() @ R @ x + sum(abs(x)**2) + real(vdot(H @ x, y))"
        " + 2j * imag(x @ x) + abs(det(R))"
    )
    e = parse_block(decl + "f = " + body).expr
    for cls in (E.Conj, E.Real, E.Imag, E.Abs, E.ImagUnit):
        assert any(type(n) is cls for n in E.walk(e)), cls
    assert parse_block(decl + "f = " + text(e)).expr == e
