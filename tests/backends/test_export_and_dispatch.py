"""Modules written for one library run without gradwright; dispatch on the arguments; clear
errors where a library lacks an operation or arrays of two libraries meet.

Reference libraries: PyTorch and JAX (their own arrays and jit), NumPy for the numbers.
"""

from __future__ import annotations

import subprocess
import sys
import textwrap

import numpy as np
import pytest

from checks import jax, jnp, rel_err
from gradwright import FormulaError, derive

torch = pytest.importorskip("torch")

GLS = "X: (n, p)\nB: (p, k)\nY: (n, k)\nS: (k, k) spd\nR = Y - X @ B\nf = trace(solve(S, R.T @ R)) + logdet(S)"


def _point(seed=0, n=9, p=4, k=3):
    rng = np.random.default_rng(seed)
    A = rng.standard_normal((k, k))
    return {
        "X": rng.standard_normal((n, p)),
        "B": rng.standard_normal((p, k)),
        "Y": rng.standard_normal((n, k)),
        "S": A @ A.T + k * np.eye(k),
    }


@pytest.mark.parametrize("backend", ["numpy", "array_api", "torch", "jax"])
def test_exported_module_runs_without_gradwright(backend, tmp_path):
    d = derive(GLS, wrt=["B", "S"])
    (tmp_path / "gls_gradients.py").write_text(d.source(backend=backend))
    arrays = _point()
    np.savez(tmp_path / "point.npz", **arrays)
    want = d.value_and_gradient_function()(**arrays)
    np.save(tmp_path / "want_value.npy", want[0])
    np.save(tmp_path / "want_B.npy", want[1][0])
    np.save(tmp_path / "want_S.npy", want[1][1])
    convert = {
        "numpy": "lambda a: a",
        "array_api": "torch.asarray",
        "torch": "torch.asarray",
        "jax": "jax.numpy.asarray",
    }[backend]
    script = textwrap.dedent(
        f"""
        import sys
        sys.modules["gradwright"] = None  # vendored: any import of gradwright fails
        import numpy as np, torch, jax
        jax.config.update("jax_enable_x64", True)
        import gls_gradients as m
        point = dict(np.load("point.npz"))
        conv = {convert}
        value, (gB, gS) = m.value_and_gradient(**{{k: conv(v) for k, v in point.items()}})
        kind = type(gB).__module__.split(".")[0]
        for got, name in ((value, "value"), (gB, "B"), (gS, "S")):
            want = np.load(f"want_{{name}}.npy")
            err = np.linalg.norm(np.asarray(got) - want) / max(np.linalg.norm(want), 1e-12)
            assert err < 1e-12, (name, err)
        print(kind)
        """
    )
    out = subprocess.run(
        [sys.executable, "-c", script], cwd=tmp_path, capture_output=True, text=True, timeout=120
    )
    assert out.returncode == 0, out.stderr[-3000:]
    expected = {"numpy": "numpy", "array_api": "torch", "torch": "torch", "jax": "jax"}
    assert out.stdout.split()[-1].startswith(expected[backend][:3])


def test_export_for_torch_takes_numpy_arrays_and_refuses_jax_arrays():
    d = derive(GLS, wrt="B")
    ns: dict = {}
    exec(compile(d.source(backend="torch"), "<torch module>", "exec"), ns)  # our generated text
    arrays = _point()
    g = ns["gradient_B"](**arrays)
    assert isinstance(g, torch.Tensor) and g.dtype == torch.float64
    assert rel_err(g.numpy(), d.gradient_function()(**arrays)) <= 1e-12
    with pytest.raises(TypeError, match="written for torch arrays"):
        ns["gradient_B"](**{k: jnp.asarray(v) for k, v in arrays.items()})


def test_unknown_backend_is_refused():
    d = derive(GLS, wrt="B")
    with pytest.raises(FormulaError, match="unknown backend 'tensorflow'"):
        d.source(backend="tensorflow")


def test_jax_jit_of_the_gradient():
    d = derive(GLS, wrt=["B", "S"])
    arrays = _point()
    want = d.value_and_gradient_function()(**arrays)
    jitted = jax.jit(d.value_and_gradient_function())
    got = jitted(**{k: jnp.asarray(v) for k, v in arrays.items()})
    assert rel_err(np.asarray(got[0]), want[0]) <= 1e-12
    for g, w in zip(got[1], want[1]):
        assert isinstance(g, jax.Array)
        assert rel_err(np.asarray(g), w) <= 1e-12
    # the hvp is jittable too, with the direction positional
    hvp = jax.jit(d.hvp_function("B"))
    v = np.random.default_rng(3).standard_normal(arrays["B"].shape)
    want_h = d.hvp_function("B")(v, **arrays)
    got_h = hvp(jnp.asarray(v), **{k: jnp.asarray(a) for k, a in arrays.items()})
    assert rel_err(np.asarray(got_h), want_h) <= 1e-12


def test_numpy_arrays_and_numbers_join_torch_arrays():
    """An optimizer's NumPy parameters with tensors of data: the result is a tensor."""
    d = derive("X: (n, p)\nw: (p,)\ny: (n,)\nlam: ()\nf = sum((X @ w - y)**2) + lam * w @ w", "w")
    rng = np.random.default_rng(0)
    X, y, w = rng.standard_normal((6, 3)), rng.standard_normal(6), rng.standard_normal(3)
    want = d.gradient_function()(X=X, y=y, w=w, lam=0.5)
    got = d.gradient_function()(X=torch.asarray(X), y=torch.asarray(y), w=w, lam=0.5)
    assert isinstance(got, torch.Tensor)
    assert rel_err(got.numpy(), want) <= 1e-12
    # a Python number adopts the tensors' dtype: float32 stays float32
    got32 = d.gradient_function()(
        X=torch.asarray(X, dtype=torch.float32),
        y=torch.asarray(y, dtype=torch.float32),
        w=torch.asarray(w, dtype=torch.float32),
        lam=0.5,
    )
    assert got32.dtype == torch.float32


def test_arrays_of_two_libraries_are_refused():
    d = derive("X: (n, p)\nw: (p,)\nf = sum((X @ w)**2)", "w")
    with pytest.raises(TypeError, match="w is a jax array but X is a torch array"):
        d.gradient_function()(X=torch.ones((3, 2)), w=jnp.ones(2))


@pytest.mark.parametrize("library", ["torch", "jax"])
def test_dense_jacobian_and_hessian_on_tensors(library):
    convert = torch.asarray if library == "torch" else jnp.asarray
    d = derive("A: (m, n)\nX: (n, p)\nF = tanh(A @ X)", "X")
    rng = np.random.default_rng(0)
    arrays = {"A": rng.standard_normal((2, 3)), "X": rng.standard_normal((3, 2))}
    want = d.jacobian_function()(**arrays)
    got = d.jacobian_function()(**{k: convert(v) for k, v in arrays.items()})
    assert type(got).__module__.split(".")[0] in ("torch", "jax", "jaxlib")
    assert rel_err(np.asarray(got), want) <= 1e-12
    h = derive(GLS, wrt="S")
    point = _point()
    want = h.hessian_function()(**point)
    got = h.hessian_function()(**{k: convert(v) for k, v in point.items()})
    assert got.shape == want.shape and rel_err(np.asarray(got), want) <= 1e-12


def test_an_operation_a_library_lacks_is_named():
    """The gradient of det at a singular matrix is the adjugate: NumPy computes it through the
    SVD; on tensors it is refused by name rather than computed wrongly."""
    d = derive("X: (n, n)\nf = det(X)", "X")
    singular = np.array([[1.0, 2.0], [2.0, 4.0]])
    want = d.gradient_function()(X=singular)  # adj(X)ᵀ = [[4, -2], [-2, 1]] (from memory)
    np.testing.assert_allclose(want, [[4.0, -2.0], [-2.0, 1.0]], atol=1e-12)
    with pytest.raises(
        NotImplementedError, match="adjugate of a singular matrix is not available for torch arrays"
    ):
        d.gradient_function()(X=torch.asarray(singular))


def test_numpy_calls_reach_the_numpy_function():
    d = derive("X: (n, p)\nw: (p,)\nf = sum((X @ w)**2)", "w")
    g = d.gradient_function()
    assert g.__globals__["gradient_w"] is g  # the NumPy module's own function: no wrapper
    assert "_gw_check" in g.__globals__ and "xp" not in g.__globals__
    assert type(g(X=np.ones((2, 2)), w=np.ones(2))) is np.ndarray


def test_cupy_on_a_gpu():
    cupy = pytest.importorskip("cupy", reason="CuPy is not installed (no GPU on this machine)")
    try:
        if cupy.cuda.runtime.getDeviceCount() == 0:
            pytest.skip("no GPU: CuPy is tested only where a GPU exists")
    except Exception as err:  # no driver
        pytest.skip(f"no GPU: CuPy is tested only where a GPU exists ({err})")
    d = derive(GLS, wrt=["B", "S"])
    arrays = _point()
    want = d.value_and_gradient_function()(**arrays)
    got = d.value_and_gradient_function()(**{k: cupy.asarray(v) for k, v in arrays.items()})
    assert isinstance(got[1][0], cupy.ndarray)
    for g, w in zip(got[1], want[1]):
        assert rel_err(cupy.asnumpy(g), w) <= 1e-12


def test_torch_on_a_gpu():
    if not torch.cuda.is_available():
        pytest.skip("no GPU: PyTorch on CUDA is tested only where a GPU exists")
    d = derive(GLS, wrt=["B", "S"])
    arrays = _point()
    want = d.value_and_gradient_function()(**arrays)
    got = d.value_and_gradient_function()(
        **{k: torch.asarray(v, device="cuda") for k, v in arrays.items()}
    )
    assert got[1][0].device.type == "cuda"
    for g, w in zip(got[1], want[1]):
        assert rel_err(g.cpu().numpy(), w) <= 1e-12


def test_scipy_functions_come_from_the_library_or_are_refused_by_name():
    """A SciPy function in a NumPy module (as a Lyapunov or Sylvester solve would print) runs
    with SciPy on NumPy arrays and is refused by name on tensors (reference: SciPy)."""
    from scipy.linalg import solve_continuous_lyapunov

    from gradwright.printing.array_api_code import translate

    numpy_module = textwrap.dedent(
        '''
        """NumPy code generated by gradwright from the block: (a hand-made module)"""
        import numpy as np
        import scipy.linalg as sl
        from scipy.linalg import solve_continuous_lyapunov


        def value(*, A, Q):
            """The value."""
            (A, Q), _dims = _gw_check((('A', A, ('n', 'n')), ('Q', Q, ('n', 'n'))))
            _value = np.sum(solve_continuous_lyapunov(A, Q)) + np.trace(sl.expm(A))
            return np.asarray(_value)[()]
        '''
    )
    ns: dict = {}
    exec(compile(translate(numpy_module), "<module>", "exec"), ns)  # text written right here
    A = np.array([[-2.0, 0.5], [0.0, -1.0]])
    Q = np.eye(2)
    from scipy.linalg import expm

    want = np.sum(solve_continuous_lyapunov(A, Q)) + np.trace(expm(A))
    assert abs(ns["value"](A=A, Q=Q) - want) < 1e-12
    with pytest.raises(
        NotImplementedError, match="solve_continuous_lyapunov is not available for torch arrays"
    ):
        ns["value"](A=torch.asarray(A), Q=torch.asarray(Q))


SPECTRAL = "S: (n, n) spd\nA: (n, n)\nf = sum(cholesky(S) * A) + sum(eigvalsh(S) ** 2)"


@pytest.mark.parametrize("library", ["torch", "jax"])
def test_eigvalsh_and_cholesky_on_tensors(library):
    """The library's own eigh and cholesky, with the NumPy helpers' formulas for the
    derivatives (reference: the NumPy functions, themselves checked against JAX)."""
    convert = torch.asarray if library == "torch" else jnp.asarray
    d = derive(SPECTRAL, wrt="S")
    rng = np.random.default_rng(4)
    M = rng.standard_normal((4, 4))
    arrays = {"S": M @ M.T + 4 * np.eye(4), "A": rng.standard_normal((4, 4))}
    data = {k: convert(v) for k, v in arrays.items()}
    want = d.value_and_gradient_function()(**arrays)
    got = d.value_and_gradient_function()(**data)
    assert rel_err(np.asarray(got[0]), want[0]) <= 1e-12
    assert rel_err(np.asarray(got[1]), want[1]) <= 1e-12
    v = rng.standard_normal((4, 4))
    v = v + v.T
    for kind, direction in (("jvp", v), ("vjp", np.float64(0.7))):
        fn = getattr(d, f"{kind}_function")("S")
        got = fn(convert(direction), **data)
        assert rel_err(np.asarray(got), fn(direction, **arrays)) <= 1e-10


@pytest.mark.parametrize(
    "block",
    [
        "A: (n, n)\nQ: (n, n) symmetric\nf = sum(solve_continuous_lyapunov(A, Q))",
        "A: (n, n)\nf = trace(expm(A))",
    ],
)
def test_matrix_equations_and_functions_are_refused_by_name(block):
    d = derive(block, wrt="A")
    A = -np.eye(3) + 0.1 * np.ones((3, 3))
    arrays = {k: A for k in ("A", "Q") if k in d.symbols}
    d.gradient_function()(**arrays)  # NumPy (and SciPy) compute it
    name = "solve_continuous_lyapunov" if "lyapunov" in block else "expm"
    with pytest.raises(NotImplementedError, match=f"{name} is not available for torch arrays"):
        d.gradient_function()(**{k: torch.asarray(v) for k, v in arrays.items()})


MORE_NUMPY = [
    ("Z: (n, k)\nW: (k, c)\nb: (c,)\nY: (n, c)\nL = Z @ W + b\nf = sum(logsumexp(L, axis=1)) - sum(Y * L)", "W b"),
    ("X: (n, k)\nf = sum(softmax(X, axis=1) ** 2) + sum(log_softmax(X, axis=1))", "X"),
    ("X: (n, k)\nf = sum(erf(X)) + sum(arctan(X)) + sum(maximum(X, 0))", "X"),
    ("x: (n,) positive\nf = sum(gammaln(x))", "x"),
    ("S: (n, n) spd\nA: (n, n)\nf = logdet(A @ S @ A.T + eye(n))", "S"),
]  # fmt: skip


@pytest.mark.parametrize("library", ["torch", "jax"])
@pytest.mark.parametrize("block", [b for b, _ in MORE_NUMPY], ids=range(len(MORE_NUMPY)))
def test_axis_reductions_special_functions_and_built_spd(block, library):
    """Row-wise log-sum-exp and softmax, erf, gammaln (from the library's own special
    functions), constants like pi and a matrix built to be spd (reference: NumPy's numbers)."""
    convert = torch.asarray if library == "torch" else jnp.asarray
    wrt = dict(MORE_NUMPY)[block]
    d = derive(block, wrt=wrt)
    rng = np.random.default_rng(0)
    sizes = {"n": 4, "k": 3, "c": 2}
    arrays = {}
    for name, info in d.symbols.items():
        if info.role in ("defined", "target"):
            continue
        shape = tuple(sizes[s] for s in info.shape)
        a = rng.standard_normal(shape)
        if "positive" in info.structure:
            a = rng.uniform(0.5, 1.5, size=shape)
        if "spd" in info.structure:
            a = a @ a.T + 4 * np.eye(shape[0])
        arrays[name] = a
    want = d.value_and_gradient_function()(**arrays)
    got = d.value_and_gradient_function()(**{k: convert(v) for k, v in arrays.items()})
    flat = lambda t: [y for x in t for y in (flat(x) if isinstance(x, tuple) else [x])]  # noqa: E731
    for g, w in zip(flat(got), flat(want), strict=True):
        assert rel_err(np.asarray(g), w) <= 1e-12
