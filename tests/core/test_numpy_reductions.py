"""Reductions over an axis, softmax over an axis, maximum/minimum and the new entrywise
functions: values against NumPy/SciPy on the same expression, derivatives against JAX.

Reference library for every derivative: JAX (float64), `jax.grad`, `jax.jvp`, `jax.vjp` and
forward-over-reverse for Hessian-vector products. Reference for values: NumPy and
scipy.special (`logsumexp`, `softmax`, `log_softmax`, `erf`, `gammaln`).
"""

from __future__ import annotations

import re

import numpy as np
import pytest
import scipy.special as sp

from checks import assert_close, jax, jnp
from gradwright import derive
from gradwright.errors import FormulaError, NotSupportedError

SIZES = {"n": 3, "k": 4}
RTOL = 1e-8


def _arrays(d, seed, positive=False):
    rng = np.random.default_rng(seed)
    out = {}
    for name, info in d.symbols.items():
        if info.role in ("defined", "target"):
            continue
        shape = tuple(SIZES[s] if isinstance(s, str) else s for s in info.shape)
        a = rng.standard_normal(shape)
        out[name] = np.abs(a) + 0.5 if positive else a
    return out


# (id, block, variable, JAX reference of the target, NumPy value reference, positive inputs)
# the JAX function is written the way a NumPy user writes the same line (reference: JAX)
jsp = jax.scipy.special
SCALAR_CASES = [
    ("sum-axis0", "Z: (n, k)\nf = sum(sum(Z**3, axis=0)**2)", "Z",
     lambda Z: jnp.sum(jnp.sum(Z**3, axis=0) ** 2), False),
    ("sum-axis1-keepdims", "Z: (n, k)\nW: (n, k)\nf = sum(sum(Z**2, axis=1, keepdims=True) @ ones(1, k) * W)",
     "Z", lambda Z, W: jnp.sum(jnp.sum(Z**2, axis=1, keepdims=True) @ jnp.ones((1, 4)) * W), False),
    ("sum-negative-axis", "Z: (n, k)\nf = sum(sin(sum(Z, axis=-1)))", "Z",
     lambda Z: jnp.sum(jnp.sin(jnp.sum(Z, axis=-1))), False),
    ("mean-all", "Z: (n, k)\nf = mean(Z**2) * mean(Z)", "Z",
     lambda Z: jnp.mean(Z**2) * jnp.mean(Z), False),
    ("mean-axis0", "Z: (n, k)\nf = sum(mean(Z, axis=0)**2)", "Z",
     lambda Z: jnp.sum(jnp.mean(Z, axis=0) ** 2), False),
    ("mean-axis-2-keepdims", "Z: (n, k)\nW: (n, k)\nf = trace(W @ mean(exp(Z), axis=-2, keepdims=True).T @ ones(1, n))", "Z",
     lambda Z, W: jnp.trace(W @ jnp.mean(jnp.exp(Z), axis=-2, keepdims=True).T @ jnp.ones((1, 3))), False),
    ("mean-vector", "x: (n,)\nf = mean(x**3) + mean(x, axis=0)", "x",
     lambda x: jnp.mean(x**3) + jnp.mean(x, axis=0), False),
    ("max-axis1", "Z: (n, k)\nf = sum(max(Z, axis=1)**2)", "Z",
     lambda Z: jnp.sum(jnp.max(Z, axis=1) ** 2), False),
    ("min-axis0-keepdims", "Z: (n, k)\nW: (k, n)\nf = sum(min(Z, axis=0, keepdims=True) @ W)", "Z",
     lambda Z, W: jnp.sum(jnp.min(Z, axis=0, keepdims=True) @ W), False),
    ("max-all", "Z: (n, k)\nf = max(Z) * min(Z)", "Z", lambda Z: jnp.max(Z) * jnp.min(Z), False),
    ("max-vector", "x: (n,)\nf = max(x, axis=-1)**2", "x", lambda x: jnp.max(x, axis=-1) ** 2, False),
    ("logsumexp-axis1", "Z: (n, k)\ny: (n,)\nf = sum(y * logsumexp(Z, axis=1))", "Z",
     lambda Z, y: jnp.sum(y * jsp.logsumexp(Z, axis=1)), False),
    ("logsumexp-axis0-keepdims", "Z: (n, k)\nW: (k, n)\nf = sum(logsumexp(Z, axis=0, keepdims=True) @ W)", "Z",
     lambda Z, W: jnp.sum(jsp.logsumexp(Z, axis=0, keepdims=True) @ W), False),
    ("logsumexp-all", "Z: (n, k)\nf = logsumexp(Z)**2", "Z", lambda Z: jsp.logsumexp(Z) ** 2, False),
    ("softmax-axis1", "Z: (n, k)\nY: (n, k)\nf = sum(Y * softmax(Z, axis=1)**2)", "Z",
     lambda Z, Y: jnp.sum(Y * jax.nn.softmax(Z, axis=1) ** 2), False),
    ("softmax-axis0", "Z: (n, k)\nY: (n, k)\nf = sum(Y * softmax(Z, axis=-2))", "Z",
     lambda Z, Y: jnp.sum(Y * jax.nn.softmax(Z, axis=0)), False),
    ("softmax-all", "Z: (n, k)\nY: (n, k)\nf = sum(Y * softmax(Z, axis=None))", "Z",
     lambda Z, Y: jnp.sum(Y * jax.nn.softmax(Z, axis=None)), False),
    ("log-softmax-axis1", "Z: (n, k)\nY: (n, k)\nf = -sum(Y * log_softmax(Z, axis=1))", "Z",
     lambda Z, Y: -jnp.sum(Y * jax.nn.log_softmax(Z, axis=1)), False),
    ("log-softmax-vector", "x: (n,)\ny: (n,)\nf = y @ log_softmax(x)", "x",
     lambda x, y: y @ jax.nn.log_softmax(x), False),
    ("norm-axis1", "Z: (n, k)\nf = sum(norm(Z, axis=1)**3)", "Z",
     lambda Z: jnp.sum(jnp.linalg.norm(Z, axis=1) ** 3), False),
    ("norm-axis0-keepdims", "Z: (n, k)\nW: (k, n)\nf = sum(norm(Z, axis=0, keepdims=True) @ W)", "Z",
     lambda Z, W: jnp.sum(jnp.linalg.norm(Z, axis=0, keepdims=True) @ W), False),
    ("relu", "Z: (n, k)\nW: (k, n)\nf = trace(maximum(Z, 0) @ W)", "Z",
     lambda Z, W: jnp.trace(jnp.maximum(Z, 0) @ W), False),
    ("maximum-two", "Z: (n, k)\nW: (n, k)\nf = sum(minimum(Z, W)**2 + maximum(W, Z))", "Z",
     lambda Z, W: jnp.sum(jnp.minimum(Z, W) ** 2 + jnp.maximum(W, Z)), False),
    ("maximum-scalar-variable", "Z: (n, k)\nc: ()\nf = sum(maximum(Z, c)**2)", "c",
     lambda Z, c: jnp.sum(jnp.maximum(Z, c) ** 2), False),
    ("abs-lad", "X: (n, k)\nw: (k,)\ny: (n,)\nf = sum(abs(y - X @ w))", "w",
     lambda X, w, y: jnp.sum(jnp.abs(y - X @ w)), False),
    ("sign-cosh-sinh", "x: (n,)\nf = sum(sign(x) * cosh(x) + sinh(x)**2)", "x",
     lambda x: jnp.sum(jnp.sign(x) * jnp.cosh(x) + jnp.sinh(x) ** 2), False),
    ("arctan-log1p-expm1", "x: (n,)\nf = sum(arctan(x) * log1p(x**2) + expm1(x))", "x",
     lambda x: jnp.sum(jnp.arctan(x) * jnp.log1p(x**2) + jnp.expm1(x)), False),
    ("square-reciprocal", "Z: (n, k)\nf = sum(square(Z) + reciprocal(Z + 3))", "Z",
     lambda Z: jnp.sum(jnp.square(Z) + jnp.reciprocal(Z + 3)), True),
    ("erf-probit", "X: (n, k)\nb: (k,)\ny: (n,)\nf = sum(y * log(1 + erf(X @ b / sqrt(2))))", "b",
     lambda X, b, y: jnp.sum(y * jnp.log(1 + jsp.erf(X @ b / jnp.sqrt(2.0)))), True),
    ("gammaln-dof", "nu: ()\nx: (n,)\nf = sum(gammaln(nu * x)) - gammaln(nu)", "nu",
     lambda nu, x: jnp.sum(jsp.gammaln(nu * x)) - jsp.gammaln(nu), True),
]  # fmt: skip


def _case_params(cases):
    return [pytest.param(c, id=c[0]) for c in cases]


@pytest.mark.parametrize("case", _case_params(SCALAR_CASES))
def test_gradient_matches_jax(case):
    _id, block, var, ref, positive = case
    d = derive(block, wrt=[var])
    grad = d.gradient_function(var)
    for seed in (0, 1):
        arrays = _arrays(d, seed, positive)
        want = jax.grad(ref, argnums=list(arrays).index(var))(*arrays.values())  # JAX
        assert_close(grad(**arrays), np.asarray(want), RTOL, what=f"{_id} gradient")
        assert_close(d.function()(**arrays), float(ref(*arrays.values())), 1e-12, what="value")


@pytest.mark.parametrize(
    "case", _case_params([c for c in SCALAR_CASES if c[0] in (
        "logsumexp-axis1", "softmax-axis1", "log-softmax-axis1", "max-axis1", "norm-axis1",
        "gammaln-dof", "erf-probit", "arctan-log1p-expm1", "relu", "mean-axis0")])
)  # fmt: skip
def test_hessian_vector_product_matches_jax(case):
    _id, block, var, ref, positive = case
    d = derive(block, wrt=[var])
    arrays = _arrays(d, 3, positive)
    i = list(arrays).index(var)
    v = np.random.default_rng(4).standard_normal(np.shape(arrays[var]))

    def g(x):
        args = list(arrays.values())
        args[i] = x
        return jax.grad(ref, argnums=i)(*args)

    want = jax.jvp(g, (arrays[var],), (v,))[1]  # forward-over-reverse (JAX)
    assert_close(d.hvp_function(var)(v, **arrays), np.asarray(want), 1e-7, what=f"{_id} HVP")


# array-valued targets: NumPy's result shape, the value, and the JVP/VJP against JAX
ARRAY_CASES = [
    ("Z: (n, k)\nF = sum(Z**2, axis=0)", lambda Z: jnp.sum(Z**2, axis=0), (4,)),
    ("Z: (n, k)\nF = sum(Z**2, axis=1, keepdims=True)",
     lambda Z: jnp.sum(Z**2, axis=1, keepdims=True), (3, 1)),
    ("Z: (n, k)\nF = mean(Z, axis=0, keepdims=True)",
     lambda Z: jnp.mean(Z, axis=0, keepdims=True), (1, 4)),
    ("Z: (n, k)\nF = max(Z, axis=1)", lambda Z: jnp.max(Z, axis=1), (3,)),
    ("Z: (n, k)\nF = min(Z, axis=-2, keepdims=True)",
     lambda Z: jnp.min(Z, axis=0, keepdims=True), (1, 4)),
    ("Z: (n, k)\nF = logsumexp(Z, axis=1)", lambda Z: jsp.logsumexp(Z, axis=1), (3,)),
    ("Z: (n, k)\nF = logsumexp(Z, axis=0, keepdims=True)",
     lambda Z: jsp.logsumexp(Z, axis=0, keepdims=True), (1, 4)),
    ("Z: (n, k)\nF = softmax(Z, axis=1)", lambda Z: jax.nn.softmax(Z, axis=1), (3, 4)),
    ("Z: (n, k)\nF = log_softmax(Z, axis=0)", lambda Z: jax.nn.log_softmax(Z, axis=0), (3, 4)),
    ("Z: (n, k)\nF = norm(Z, axis=1)", lambda Z: jnp.linalg.norm(Z, axis=1), (3,)),
    ("Z: (n, k)\nF = sum(Z, keepdims=True)", lambda Z: jnp.sum(Z, keepdims=True), (1, 1)),
    ("x: (n,)\nF = max(x, keepdims=True)", lambda x: jnp.max(x, keepdims=True), (1,)),
    ("Z: (n, k)\nF = maximum(Z, 0) - minimum(1, Z)",
     lambda Z: jnp.maximum(Z, 0) - jnp.minimum(1.0, Z), (3, 4)),
]  # fmt: skip


@pytest.mark.parametrize("case", ARRAY_CASES, ids=lambda c: c[0].split("= ")[1])
def test_array_targets_have_numpy_shapes_and_jax_products(case):
    block, ref, shape = case
    d = derive(block, wrt=["Z" if "Z:" in block else "x"])
    var = "Z" if "Z:" in block else "x"
    arrays = _arrays(d, 5)
    value = d.function()(**arrays)
    assert np.shape(value) == shape
    assert_close(value, np.asarray(ref(arrays[var])), 1e-12, what="value")
    rng = np.random.default_rng(6)
    v = rng.standard_normal(np.shape(arrays[var]))
    want = jax.jvp(ref, (arrays[var],), (v,))[1]  # JAX
    assert_close(d.jvp_function(var)(v, **arrays), np.asarray(want), RTOL, what="JVP")
    g = rng.standard_normal(shape)
    want = jax.vjp(ref, arrays[var])[1](g)[0]  # JAX
    assert_close(d.vjp_function(var)(g, **arrays), np.asarray(want), RTOL, what="VJP")


# --- kinks: the subgradient chosen, against JAX -------------------------------------------


def test_max_ties_share_the_derivative_equally_as_jax():
    d = derive("Z: (n, k)\nf = sum(max(Z, axis=1)) + max(Z)", wrt=["Z"])
    Z = np.array([[1.0, 3.0, 3.0, 0.0], [2.0, 2.0, 2.0, 2.0], [0.0, 5.0, 1.0, 5.0]])
    want = jax.grad(lambda Z: jnp.sum(jnp.max(Z, axis=1)) + jnp.max(Z))(Z)  # JAX 0.10
    assert_close(d.gradient_function("Z")(Z=Z), np.asarray(want), 1e-14)
    assert d.gradient_function("Z")(Z=Z)[1, 0] == pytest.approx(0.25)


def test_maximum_tie_gives_one_half_as_jax():
    d = derive("Z: (n, k)\nW: (n, k)\nf = sum(maximum(Z, W)) + sum(maximum(Z, 0))", wrt=["Z"])
    Z = np.array([[0.0, 1.0, -1.0, 2.0]] * 3)
    W = np.array([[1.0, 1.0, -2.0, 3.0]] * 3)
    ref = jax.grad(lambda Z: jnp.sum(jnp.maximum(Z, W)) + jnp.sum(jnp.maximum(Z, 0.0)))(Z)
    assert_close(d.gradient_function("Z")(Z=Z, W=W), np.asarray(ref), 1e-14)  # JAX


def test_abs_at_zero_is_zero_where_jax_gives_one():
    """Documented difference: abs'(0) = sign(0) = 0 here, 1 in JAX (both subgradients)."""
    d = derive("x: (n,)\nf = sum(abs(x))", wrt=["x"])
    x = np.array([-2.0, 0.0, 3.0])
    assert list(d.gradient_function("x")(x=x)) == [-1.0, 0.0, 1.0]
    assert float(jax.grad(lambda x: jnp.sum(jnp.abs(x)))(x)[1]) == 1.0  # JAX 0.10
    assert "0 at x = 0" in " ".join(s.rule for s in d.steps if getattr(s, "rule", None))


# --- the language: NumPy's reading, or a refusal with a caret --------------------------------


@pytest.mark.parametrize(
    "line, message",
    [
        ("sum(Z, axis=2)", "axis 2 is out of range"),
        ("sum(Z, axis=-3)", "axis -3 is out of range"),
        ("sum(Z, axis=k)", "integer literal"),
        ("sum(Z, keepdims=1)", "keepdims must be True or False"),
        ("sum(Z, 1)", "axis as a keyword"),
        ("max(Z, Z)", "maximum(A, B)"),
        ("max(Z, axis=0, out=Z)", "keyword arguments axis=, keepdims= only"),
        ("softmax(Z, keepdims=True)", "axis= only"),
        ("maximum(Z, Z.T)", "NumPy cannot broadcast"),
        ("sum(s, axis=0)", "a scalar has no axis 0"),
    ],
)
def test_refusals_have_a_caret(line, message):
    with pytest.raises(FormulaError, match=re.escape(message)) as err:
        derive(f"Z: (n, k)\ns: ()\nf = {line}", wrt=["Z"])
    assert "^" in str(err.value)


def test_heaviside_and_polygamma_read_only_the_printed_forms():
    with pytest.raises(NotSupportedError, match="h0 other than 0.5"):
        derive("x: (n,)\nf = sum(heaviside(x, 1))", wrt=["x"])
    with pytest.raises(NotSupportedError, match="n other than 1, 2, 3"):
        derive("x: (n,)\nf = sum(polygamma(4, x))", wrt=["x"])
    with pytest.raises(NotSupportedError, match="derivative of polygamma"):
        derive("x: (n,)\nf = sum(polygamma(3, x))", wrt=["x"]).gradient("x")


@pytest.mark.parametrize(
    "block, var",
    [
        ("Z: (n, k)\nf = sum(max(Z, axis=1)**2)", "Z"),
        ("Z: (n, k)\nf = sum(maximum(Z, 0)**2 + abs(Z))", "Z"),
        ("Z: (n, k)\nY: (n, k)\nf = sum(Y * log_softmax(Z, axis=1))", "Z"),
        ("x: (n,)\nf = sum(gammaln(x) + erf(x))", "x"),
        ("Z: (n, k)\nf = sum(mean(Z, axis=0, keepdims=True)**2)", "Z"),
    ],
)
def test_printed_gradients_parse_back_to_the_same_value(block, var):
    from gradwright.printing import text

    d = derive(block, wrt=[var])
    g = text(d.gradient(var))
    decls = "\n".join(line for line in block.split("\n") if ":" in line)
    back = derive(f"{decls}\nG = {g}", wrt=[var])
    arrays = _arrays(d, 7, positive=True)
    assert_close(back.function()(**arrays), d.gradient_function(var)(**arrays), 1e-12)


def test_value_is_what_scipy_computes():
    d = derive("Z: (n, k)\nF = log_softmax(Z, axis=1) + softmax(Z, axis=0)", wrt=["Z"])
    Z = np.random.default_rng(8).standard_normal((3, 4))
    # reference: scipy.special.log_softmax / softmax
    assert_close(d.function()(Z=Z), sp.log_softmax(Z, axis=1) + sp.softmax(Z, axis=0), 1e-13)


# constructs that combine a kept axis with broadcasting, which lands with another branch
BROADCAST_CASES = [
    ("Z: (n, k)\nY: (n, k)\nf = sum(Y * (Z - logsumexp(Z, axis=1, keepdims=True)))",
     lambda Z, Y: jnp.sum(Y * (Z - jsp.logsumexp(Z, axis=1, keepdims=True)))),
    ("Z: (n, k)\nY: (n, k)\nf = sum(Y * exp(Z - max(Z, axis=1, keepdims=True)))",
     lambda Z, Y: jnp.sum(Y * jnp.exp(Z - jnp.max(Z, axis=1, keepdims=True)))),
    ("Z: (n, k)\nY: (n, k)\nf = sum(Y * Z / sum(Z**2, axis=0, keepdims=True))",
     lambda Z, Y: jnp.sum(Y * Z / jnp.sum(Z**2, axis=0, keepdims=True))),
    ("Z: (n, k)\nY: (n, k)\nb: (k,)\nf = sum(Y * maximum(Z, b))",
     lambda Z, Y, b: jnp.sum(Y * jnp.maximum(Z, b))),
]  # fmt: skip


@pytest.mark.parametrize("case", BROADCAST_CASES, ids=lambda c: c[0].split("f = ")[1])
def test_kept_axes_broadcast_back_as_numpy(case):
    block, ref = case
    d = derive(block, wrt=["Z"])
    arrays = _arrays(d, 9)
    want = jax.grad(ref)(*arrays.values())  # JAX
    assert_close(d.gradient_function("Z")(**arrays), np.asarray(want), RTOL)


def test_softmax_of_a_matrix_needs_an_axis():
    """scipy.special.softmax(Z) normalizes every entry, jax.nn.softmax(Z) each row: refused."""
    with pytest.raises(FormulaError, match="needs axis=") as err:
        derive("Z: (n, k)\nf = sum(softmax(Z))", wrt=["Z"])
    assert "^" in str(err.value)
    d = derive("Z: (n, k)\nF = log_softmax(Z, axis=None)", wrt=["Z"])
    from gradwright.printing import text

    assert text(d.expr) == "log_softmax(Z, axis=None)"


# whole models written the way NumPy users write them (invented scenarios; reference: JAX)
MODELS = [
    # a bakery's two-layer demand network with a ReLU hidden layer
    ("Xb: (n, p)\nW1: (p, h)\nw2: (h,)\ny: (n,)\nH = maximum(Xb @ W1, 0)\n"
     "loss = mean((H @ w2 - y)**2)", ("W1", "w2"),
     lambda Xb, W1, w2, y: jnp.mean((jnp.maximum(Xb @ W1, 0) @ w2 - y) ** 2)),
    # one attention head over a tram timetable's stops
    ("Q: (n, h)\nK: (n, h)\nV: (n, h)\nA = softmax(Q @ K.T / 2, axis=-1)\n"
     "out = sum((A @ V)**2)", ("Q", "K", "V"),
     lambda Q, K, V: jnp.sum((jax.nn.softmax(Q @ K.T / 2, axis=-1) @ V) ** 2)),
    # ferry ticket classes: multinomial logit without intercepts
    ("X: (n, p)\nW: (p, h)\nY: (n, h)\nZ = X @ W\n"
     "nll = sum(logsumexp(Z, axis=1)) - sum(Y * Z)", ("W",),
     lambda X, W, Y: jnp.sum(jsp.logsumexp(X @ W, axis=1)) - jnp.sum(Y * (X @ W))),
    # least absolute deviations for a kiln's temperature probes, with a cosh penalty
    ("X: (n, p)\nb: (p,)\ny: (n,)\nf = sum(abs(y - X @ b)) + sum(cosh(b) - 1)", ("b",),
     lambda X, b, y: jnp.sum(jnp.abs(y - X @ b)) + jnp.sum(jnp.cosh(b) - 1)),
    # Student-t log-likelihood of orchard yield residuals, degrees of freedom a variable
    ("r: (n,)\nnu: ()\nf = sum(gammaln((nu + 1) / 2) - gammaln(nu / 2) - 0.5 * log(nu) "
     "- (nu + 1) / 2 * log1p(r**2 / nu))", ("nu",),
     lambda r, nu: jnp.sum(jsp.gammaln((nu + 1) / 2) - jsp.gammaln(nu / 2) - 0.5 * jnp.log(nu)
                           - (nu + 1) / 2 * jnp.log1p(r**2 / nu))),
    # worst-case row of a storage rack's load matrix, and its column-wise spread
    ("L: (n, h)\nf = max(sum(L**2, axis=1)) + sum(max(L, axis=0) - min(L, axis=0))", ("L",),
     lambda L: jnp.max(jnp.sum(L**2, axis=1)) + jnp.sum(jnp.max(L, axis=0) - jnp.min(L, axis=0))),
]  # fmt: skip


@pytest.mark.parametrize("case", MODELS, ids=lambda c: c[0].split("\n")[-1][:40])
def test_models_as_numpy_users_write_them(case):
    block, wrt, ref = case
    d = derive(block, wrt=list(wrt))
    sizes = dict(SIZES, p=3, h=5)
    rng = np.random.default_rng(21)
    arrays = {}
    for name, info in d.symbols.items():
        if info.role in ("defined", "target"):
            continue
        shape = tuple(sizes[s] if isinstance(s, str) else s for s in info.shape)
        arrays[name] = (
            np.abs(rng.standard_normal(shape)) + 1.0
            if name == "nu"
            else (rng.standard_normal(shape))
        )
    got = d.gradient_function(*wrt)(**arrays)
    got = got if len(wrt) > 1 else (got,)
    names = list(arrays)
    want = jax.grad(ref, argnums=[names.index(v) for v in wrt])(*arrays.values())  # JAX
    for v, g, w in zip(wrt, got, want):
        assert_close(g, np.asarray(w), RTOL, what=f"gradient wrt {v}")
    assert_close(d.function()(**arrays), float(ref(*arrays.values())), 1e-12)


def test_cancelled_array_factors_keep_the_array_shape():
    """c * sqrt(x) / sqrt(x) is c on every entry, a vector (it once collapsed to a scalar)."""
    d = derive("x: (n,)\nc: ()\nF = 2 * c * sqrt(x) / sqrt(x)", wrt=["c"])
    assert_close(d.function()(x=np.full(3, 2.0), c=1.5), np.full(3, 3.0), 1e-15)
    d = derive("X: (n, k)\nf = norm(X, axis=0) @ norm(X, axis=0)", wrt=["X"])
    X = np.random.default_rng(3).standard_normal((3, 4))
    assert_close(d.gradient_function("X")(X=X), 2 * X, 1e-12)  # d/dX sum(X**2) = 2 X


@pytest.mark.parametrize("library", ["torch", "jax"])
def test_generated_array_api_code_runs_on_other_libraries(library):
    """The reductions, tie weights and special functions reach PyTorch and JAX arrays too."""
    lib = pytest.importorskip(library)
    conv = lib.as_tensor if library == "torch" else lib.numpy.asarray
    blocks = [
        ("Z: (n, k)\nY: (n, k)\nf = sum(logsumexp(Z, axis=1)) - sum(Y * log_softmax(Z, axis=0))"
         " + sum(softmax(Z, axis=1) * Y) + sum(max(Z, axis=1)**2) + sum(maximum(Z, 0))", "Z"),
        ("x: (n,) positive\nf = sum(erf(x) + gammaln(x) + digamma(x) + abs(x - 1))", "x"),
    ]  # fmt: skip
    for block, var in blocks:
        d = derive(block, wrt=[var])
        arrays = _arrays(d, 13, positive=True)
        namespace: dict = {}
        exec(compile(d.source(backend="array_api"), "<generated>", "exec"), namespace)
        got = namespace[f"gradient_{var}"](**{k: conv(a) for k, a in arrays.items()})
        want = d.gradient_function(var)(**arrays)
        # other libraries implement digamma and erf themselves: agreement to 1e-8, not 1e-14
        assert_close(np.asarray(got), want, 1e-8, what=f"{library}: {block}")
