"""The one shared numeric check utility of the test suite.

Random points that honor shapes and structure words, column-major vec, error measures, a
central-difference check along random directions that reports both numbers, the JAX
reference (gradients, Jacobians, JVP/VJP, Hessians, and `jax_reference`, an independent
reading of a block as NumPy would compute it), and a combinator that runs one check over
scalar, vector and matrix shapes.
"""

from __future__ import annotations

import functools
import os

import numpy as np

# every reference derivative in the suite comes from JAX in float64 (reference library: JAX)
os.environ.setdefault("JAX_PLATFORMS", "cpu")
import jax  # noqa: E402

jax.config.update("jax_enable_x64", True)
import jax.numpy as jnp  # noqa: E402

__all__ = [
    "SHAPES",
    "DEFAULT_SIZES",
    "assert_close",
    "sizes_as_numbers",
    "central_difference_check",
    "dim_size",
    "jax_grad",
    "jax_hessian",
    "jax_jacobian",
    "jax_hvp",
    "jax_jvp",
    "jax_reference",
    "UnreadableBlock",
    "jax_vjp",
    "jax_packed",
    "jnp",
    "jax",
    "over_shapes",
    "project",
    "random_direction",
    "random_point",
    "rel_err",
    "run_over_shapes",
    "sizes_for",
    "symbol_shape",
    "unvec",
    "vec",
]

#: distinct small sizes, so that a transposed dim shows up as a wrong shape
DEFAULT_SIZES = {"n": 3, "k": 4, "p": 2, "m": 5, "q": 3, "h": 4, "d": 3, "o": 2, "r": 2, "s": 4}

#: the three kinds of variable a check is run over (`over_shapes`)
SHAPES = {"scalar": "()", "vector": "(n,)", "matrix": "(n, k)"}


# --- sizes and random points --------------------------------------------------------------------


def dim_size(dim, sizes: dict) -> int:
    """An int dim, a name, or a product text like 'm*p' -> its size."""
    if isinstance(dim, int):
        return dim
    out = 1
    for part in str(dim).split("*"):
        part = part.strip()
        out *= int(part) if part.isdigit() else sizes[part]
    return out


def symbol_shape(info, sizes: dict) -> tuple:
    """The NumPy shape of a `SymbolInfo` at the given sizes."""
    return tuple(dim_size(d, sizes) for d in info.shape)


def sizes_for(derivation, sizes: dict | None = None) -> dict:
    """The size of every dim of the derivation (DEFAULT_SIZES, small values for other names)."""
    out = dict(DEFAULT_SIZES)
    extra = 6
    for name in derivation.dims:
        if name not in out:
            out[name] = extra % 4 + 2
            extra += 1
    out.update(sizes or {})
    return out


def _sample(shape, structure, rng, positive=False):
    words = set(structure)
    if len(shape) == 2 and "lower" in words:  # a Cholesky-like factor: positive diagonal
        n = shape[0]
        return np.tril(rng.standard_normal((n, n)), -1) + np.diag(rng.uniform(0.5, 2.0, n))
    if len(shape) == 2 and words & {"spd", "symmetric", "diagonal", "orthogonal", "invertible"}:
        n = shape[0]
        if "spd" in words:
            a = rng.standard_normal((n, n))
            return a @ a.T / n + np.eye(n)
        if "diagonal" in words:
            v = rng.uniform(0.5, 2.0, n)
            if "positive" not in words and not positive:
                v = v * rng.choice([-1.0, 1.0], n)
            return np.diag(v)
        if "symmetric" in words:
            a = rng.standard_normal((n, n))
            out = (a + a.T) / 2
            return np.abs(out) + 0.5 if ("positive" in words or positive) else out
        if "orthogonal" in words:
            q, r = np.linalg.qr(rng.standard_normal((n, n)))
            return q * np.sign(np.diag(r))
        return rng.standard_normal((n, n)) + 2 * np.sqrt(n) * np.eye(n)
    if "positive" in words or positive:
        out = rng.uniform(0.5, 2.0, shape)
    else:
        out = rng.standard_normal(shape)
    return float(out) if shape == () else out


def random_point(derivation, seed: int = 0, sizes: dict | None = None, positive=()) -> dict:
    """Random float64 arrays for every declared symbol, honoring its shape and structure.

    Independent of the engine's own sampler. Symbols in `positive` are drawn in [0.5, 2].
    """
    rng = np.random.default_rng(seed)
    sz = sizes_for(derivation, sizes)
    out = {}
    for name, info in derivation.symbols.items():
        if info.role in ("defined", "target"):
            continue
        out[name] = _sample(symbol_shape(info, sz), info.structure, rng, name in positive)
    return out


def random_direction(info, value, rng):
    """A random direction in the space the symbol lives in (symmetric, diagonal, plain)."""
    shape = np.shape(value)
    if shape == ():
        return float(rng.standard_normal())
    v = rng.standard_normal(shape)
    return project(v, info.structure)


def project(g, structure):
    """The symmetric part (symmetric/spd), the diagonal part (diagonal) or the lower triangle
    (lower) of a matrix."""
    g = np.asarray(g)
    if g.ndim != 2:
        return g
    words = set(structure)
    if "diagonal" in words:
        return np.diag(np.diag(g))
    if "lower" in words:
        return np.tril(g)
    if words & {"symmetric", "spd"}:
        return (g + g.T) / 2
    return g


# --- vec and error measures ---------------------------------------------------------------------


def vec(a) -> np.ndarray:
    """Column-major vec of a scalar, vector or matrix."""
    return np.reshape(np.asarray(a), -1, order="F")


def unvec(v, shape) -> np.ndarray:
    v = np.asarray(v)
    if shape == ():
        return v.reshape(())[()]
    return v.reshape(shape, order="F")


def rel_err(got, want) -> float:
    """||got - want|| / ||want|| (Frobenius), with ||want|| floored at 1e-12."""
    got = np.asarray(got, dtype=float)
    want = np.asarray(want, dtype=float)
    if got.shape != want.shape:
        raise AssertionError(f"shape {got.shape} != reference shape {want.shape}")
    return float(np.linalg.norm(got - want) / max(np.linalg.norm(want), 1e-12))


def assert_close(got, want, rtol=1e-8, what="value"):
    err = rel_err(got, want)
    assert err <= rtol, (
        f"{what}: relative error {err:.2e} > {rtol:.0e}\n got  {np.asarray(got)!r}\n"
        f" want {np.asarray(want)!r}"
    )


def central_difference_check(f, x, analytic_grad, *, n_dirs=3, seed=0, h=None, structure=()):
    """Compare <grad, v> with (f(x + h v) - f(x - h v)) / 2h along random directions v.

    Returns a list of (finite_difference, analytic) pairs, both numbers, one per direction.
    The step is h ≈ ε^(1/3)·scale (Nocedal and Wright, Numerical Optimization, 2nd ed., §8.1).
    """
    rng = np.random.default_rng(seed)
    x = np.asarray(x, dtype=float)
    g = np.asarray(analytic_grad, dtype=float)
    scale = max(1.0, float(np.max(np.abs(x)))) if x.size else 1.0
    h = h if h is not None else np.finfo(float).eps ** (1 / 3) * scale
    out = []
    for _ in range(n_dirs):
        v = project(rng.standard_normal(x.shape), structure)
        fd = (f(x + h * v) - f(x - h * v)) / (2 * h)
        out.append((float(fd), float(np.sum(g * v))))
    return out


# --- the JAX reference --------------------------------------------------------------------------


def _as_jax(arrays: dict) -> dict:
    return {k: jnp.asarray(v, dtype=jnp.float64) for k, v in arrays.items()}


def _split(arrays: dict, variables) -> tuple[dict, dict]:
    a = _as_jax(arrays)
    return {v: a[v] for v in variables}, {k: x for k, x in a.items() if k not in variables}


# compiled once per reference function and variable (then reused across seeds and tests)


@functools.cache
def _grad_fn(ref, variables: tuple):
    def fn(vs, consts):
        return ref(**consts, **vs)

    return jax.jit(jax.grad(fn))


def _vec_fn(ref, var: str, shape: tuple):
    def fv(x, consts):
        xs = dict(consts)
        xs[var] = x.reshape(shape, order="F") if shape else x.reshape(())
        return jnp.ravel(jnp.asarray(ref(**xs)), order="F")

    return fv


@functools.cache
def _jac_fn(ref, var: str, shape: tuple):
    return jax.jit(jax.jacfwd(_vec_fn(ref, var, shape)))


@functools.cache
def _hess_fn(ref, var: str, shape: tuple):
    fv = _vec_fn(ref, var, shape)
    return jax.jit(jax.hessian(lambda x, consts: fv(x, consts)[0]))


@functools.cache
def _jvp_fn(ref, var: str):
    def tangent(x, v, consts):
        return jax.jvp(lambda y: ref(**consts, **{var: y}), (x,), (v,))[1]

    return jax.jit(tangent)


@functools.cache
def _vjp_fn(ref, var: str):
    def pullback(x, g, consts):
        return jax.vjp(lambda y: ref(**consts, **{var: y}), x)[1](g)[0]

    return jax.jit(pullback)


def jax_grad(ref, arrays: dict, variables) -> tuple:
    """Gradients of the scalar `ref(**arrays)` w.r.t. `variables`, as NumPy arrays, in order."""
    variables = tuple(variables)
    vs, consts = _split(arrays, variables)
    g = _grad_fn(ref, variables)(vs, consts)
    return tuple(np.asarray(g[v]) for v in variables)


def jax_jacobian(ref, arrays: dict, var: str) -> np.ndarray:
    """d vec(F) / d vec(X)^T by forward mode on the column-major vec'ed function."""
    vs, consts = _split(arrays, (var,))
    shape = tuple(np.shape(arrays[var]))
    return np.asarray(_jac_fn(ref, var, shape)(jnp.ravel(vs[var], order="F"), consts))


def jax_jvp(ref, arrays: dict, var: str, direction) -> np.ndarray:
    vs, consts = _split(arrays, (var,))
    v = jnp.asarray(direction, dtype=jnp.float64)
    return np.asarray(_jvp_fn(ref, var)(vs[var], v, consts))


def jax_vjp(ref, arrays: dict, var: str, cotangent) -> np.ndarray:
    vs, consts = _split(arrays, (var,))
    g = jnp.asarray(cotangent, dtype=jnp.float64)
    return np.asarray(_vjp_fn(ref, var)(vs[var], g, consts))


def jax_hvp(ref, arrays: dict, var: str, direction) -> np.ndarray:
    """The Hessian of a scalar `ref` w.r.t. `var` applied to `direction` (forward over reverse)."""
    vs, consts = _split(arrays, (var,))
    v = jnp.asarray(direction, dtype=jnp.float64)

    def hvp(x, v, consts):
        grad = jax.grad(lambda y: ref(**consts, **{var: y}))
        return jax.jvp(grad, (x,), (v,))[1]

    return np.asarray(jax.jit(hvp)(vs[var], v, consts))


def jax_hessian(ref, arrays: dict, var: str) -> np.ndarray:
    """The dense Hessian of a scalar `ref` over column-major vec(var)."""
    vs, consts = _split(arrays, (var,))
    shape = tuple(np.shape(arrays[var]))
    return np.asarray(_hess_fn(ref, var, shape)(jnp.ravel(vs[var], order="F"), consts))


# --- the combinator -----------------------------------------------------------------------------


def over_shapes(template: str, kinds=("scalar", "vector", "matrix")) -> list[tuple[str, str]]:
    """Instantiate a block template at each kind of variable shape.

    `template` contains `{shape}` where the variable's declared shape goes; returns
    `[(kind, block), ...]` for `pytest.mark.parametrize`.

    >>> over_shapes("X: {shape}\\nf = sum(exp(X))", kinds=("vector",))
    [('vector', 'X: (n,)\\nf = sum(exp(X))')]
    """
    return [(kind, template.replace("{shape}", SHAPES[kind])) for kind in kinds]


def run_over_shapes(check, template: str, kinds=("scalar", "vector", "matrix")):
    """Run `check(block)` once per shape kind; raises on the first failure, naming the kind."""
    for kind, block in over_shapes(template, kinds):
        try:
            check(block)
        except AssertionError as err:
            raise AssertionError(f"[{kind}] {err}") from None


# --- an independent reading of a block, for the reference library -----------------------------

_JAX_FUNCS = {
    "exp": lambda a: jnp.exp(a),
    "log": lambda a: jnp.log(a),
    "sqrt": lambda a: jnp.sqrt(a),
    "sin": lambda a: jnp.sin(a),
    "cos": lambda a: jnp.cos(a),
    "tanh": lambda a: jnp.tanh(a),
    "sigmoid": lambda a: jax.nn.sigmoid(a),
    "softplus": lambda a: jax.nn.softplus(a),
    "trace": lambda a: jnp.trace(a),
    "det": lambda a: jnp.linalg.det(a),
    "logdet": lambda a: jnp.linalg.slogdet(a)[1],
    "inv": lambda a: jnp.linalg.inv(a),
    "solve": lambda a, b: jnp.linalg.solve(a, b),
    "kron": lambda a, b: jnp.kron(a, b),
    "vec": lambda a: jnp.ravel(a, order="F"),
    "diag": lambda a: jnp.diag(a),
    "diagm": lambda a: jnp.diag(a),
    "sum": lambda a: jnp.sum(a),
    "norm": lambda a: jnp.sqrt(jnp.sum(a * a)),
    "logsumexp": lambda a: jax.scipy.special.logsumexp(a),
    "softmax": lambda a: jax.nn.softmax(a),
    "outer": lambda a, b: jnp.outer(a, b),
}


# --- reductions over an axis and the NumPy entrywise functions (NumPy's/SciPy's meaning) ------


def _softmax_ref(a, axis=None):
    # scipy.special.softmax reads axis=None as every entry (jax.nn.softmax's default is -1)
    return jax.nn.softmax(a, axis=axis)


def _log_softmax_ref(a, axis=None):
    return jax.nn.log_softmax(a, axis=axis)


def _max_weights_ref(op):
    def weights(a, axis=None):
        best = (jnp.max if op == "max" else jnp.min)(a, axis=axis, keepdims=True)
        hits = (a == best).astype(a.dtype)
        return hits / jnp.sum(hits, axis=axis, keepdims=True)

    return weights


#: functions read with keyword arguments (axis=, keepdims=) and the functions NumPy/SciPy add
JAX_NUMPY_MORE = {
    "sum": lambda a, axis=None, keepdims=False: jnp.sum(a, axis=axis, keepdims=keepdims),
    "mean": lambda a, axis=None, keepdims=False: jnp.mean(a, axis=axis, keepdims=keepdims),
    "max": lambda a, axis=None, keepdims=False: jnp.max(a, axis=axis, keepdims=keepdims),
    "min": lambda a, axis=None, keepdims=False: jnp.min(a, axis=axis, keepdims=keepdims),
    "norm": lambda a, axis=None, keepdims=False: jnp.sqrt(
        jnp.sum(a * a, axis=axis, keepdims=keepdims)
    ),
    "logsumexp": lambda a, axis=None, keepdims=False: jax.scipy.special.logsumexp(
        a, axis=axis, keepdims=keepdims
    ),
    "softmax": _softmax_ref,
    "log_softmax": _log_softmax_ref,
    "max_weights": _max_weights_ref("max"),
    "min_weights": _max_weights_ref("min"),
    "maximum": jnp.maximum,
    "minimum": jnp.minimum,
    "abs": jnp.abs,
    "sign": jnp.sign,
    "cosh": jnp.cosh,
    "sinh": jnp.sinh,
    "arctan": jnp.arctan,
    "log1p": jnp.log1p,
    "expm1": jnp.expm1,
    "square": jnp.square,
    "reciprocal": lambda a: 1.0 / a,
    "erf": jax.scipy.special.erf,
    "gammaln": jax.scipy.special.gammaln,
    "digamma": jax.scipy.special.digamma,
    "polygamma": lambda n, a: jax.scipy.special.polygamma(int(n), a),
    "heaviside": lambda a, h: jnp.heaviside(a, h),
}


def _keyword_literal(node):
    import ast

    if isinstance(node, ast.UnaryOp) and isinstance(node.op, ast.USub):
        return -_keyword_literal(node.operand)
    if isinstance(node, ast.Constant):
        return node.value
    raise UnreadableBlock(f"not a literal keyword value: {ast.dump(node)[:60]}")


def _name_value(name: str, env: dict, sizes: dict):
    """A symbol or definition, else a dim (its size, as NumPy code would hold it), else pi."""
    if name in env:
        return env[name]
    if name in sizes:
        return float(sizes[name])
    if name == "pi":
        return np.pi
    raise KeyError(name)


def _subscript_key(node, dim):
    """The NumPy key of `a[...]` with integer literals, dims and None (new axes)."""
    import ast

    def one(item):
        if isinstance(item, ast.Slice):
            if item.step is not None:
                raise UnreadableBlock("a slice with a step")
            lo = None if item.lower is None else position(item.lower)
            hi = None if item.upper is None else position(item.upper)
            return slice(lo, hi)
        if isinstance(item, ast.Constant) and item.value is None:
            return None
        return position(item)

    def position(item):
        if isinstance(item, ast.UnaryOp) and isinstance(item.op, ast.USub):
            return -position(item.operand)
        return dim(item)

    items = node.elts if isinstance(node, ast.Tuple) else [node]
    return tuple(one(i) for i in items)


class UnreadableBlock(Exception):
    """The test-side reader cannot read the block (it is not in the language as NumPy reads it)."""


def jax_reference(block_text: str, sizes: dict):
    """Read a block as NumPy would compute it, with jax.numpy in place of NumPy.

    Independent of gradwright's parser: Python's `ast` on each line, mapped to jnp calls
    (test code reading test-generated text; nothing is eval'ed). Returns `ref(**arrays)`.
    """
    import ast
    import re

    defs: list[tuple[str, ast.AST]] = []
    for raw in block_text.split("\n"):
        line = raw.split("#", 1)[0].strip()
        if not line:
            continue
        m = re.match(r"^([A-Za-z_]\w*)\s*=(?!=)\s*(.*)$", line)
        if m:
            defs.append((m.group(1), ast.parse(m.group(2), mode="eval").body))
        elif not re.match(r"^[A-Za-z_]\w*\s*:", line):
            raise UnreadableBlock(f"cannot read line {raw!r}")
    if not defs:
        raise UnreadableBlock("no target")

    def dim(node):
        if isinstance(node, ast.Constant):
            return int(node.value)
        if isinstance(node, ast.Name):
            return sizes[node.id]
        if isinstance(node, ast.BinOp) and isinstance(node.op, ast.Mult):
            return dim(node.left) * dim(node.right)
        raise UnreadableBlock(f"not a dim: {ast.dump(node)}")

    def ev(node, env):
        if isinstance(node, ast.Constant):
            return float(node.value)
        if isinstance(node, ast.Name):
            return _name_value(node.id, env, sizes)
        if isinstance(node, ast.Subscript):
            return ev(node.value, env)[_subscript_key(node.slice, dim)]
        if isinstance(node, ast.UnaryOp) and isinstance(node.op, (ast.USub, ast.UAdd)):
            v = ev(node.operand, env)
            return -v if isinstance(node.op, ast.USub) else v
        if isinstance(node, ast.Attribute) and node.attr == "T":
            return jnp.transpose(ev(node.value, env))
        if isinstance(node, ast.BinOp):
            a, b = ev(node.left, env), ev(node.right, env)
            op = type(node.op)
            if op is ast.Add:
                return a + b
            if op is ast.Sub:
                return a - b
            if op is ast.Mult:
                return a * b
            if op is ast.Div:
                return a / b
            if op is ast.Pow:
                return a**b
            if op is ast.MatMult:
                return a @ b
        if isinstance(node, ast.Call) and isinstance(node.func, ast.Name):
            name = node.func.id
            if name in ("eye", "ones", "zeros"):
                dims = [dim(a) for a in node.args]
                if name == "eye":
                    return jnp.eye(dims[0])
                return (jnp.ones if name == "ones" else jnp.zeros)(tuple(dims))
            if name == "commutation":
                m, n = (dim(a) for a in node.args)
                # K vec(A) = vec(A^T) for A of shape (m, n) (Henderson and Searle, 1981)
                k = np.zeros((m * n, m * n))
                for i in range(m):
                    for j in range(n):
                        k[j + i * n, i + j * m] = 1.0
                return jnp.asarray(k)
            if name == "mpow":
                return jnp.linalg.matrix_power(ev(node.args[0], env), int(node.args[1].value))
            if name in _JAX_FUNCS and not node.keywords:
                return _JAX_FUNCS[name](*[ev(a, env) for a in node.args])
            if name in JAX_NUMPY_MORE:
                kwargs = {kw.arg: _keyword_literal(kw.value) for kw in node.keywords}
                return JAX_NUMPY_MORE[name](*[ev(a, env) for a in node.args], **kwargs)
        raise UnreadableBlock(f"cannot read {ast.dump(node)[:80]}")

    def ref(**arrays):
        env = dict(arrays)
        for name, node in defs:
            env[name] = ev(node, env)
        return env[defs[-1][0]]

    return ref


# --- complex variables (Wirtinger calculus) ------------------------------------------------------
# gradwright's gradient of a real f of complex Z is G = ∂f/∂Re Z + i ∂f/∂Im Z = 2 ∂f/∂conj(Z).
# JAX's grad of a real function of a complex input returns ∂f/∂Re Z - i ∂f/∂Im Z = conj(G)
# (JAX documentation, autodiff cookbook, "Complex numbers and differentiation"; checked here
# on f(z) = |z|², where grad gives 2 conj(z), in test_jax_convention_is_the_conjugate).


def jax_complex_gradient(fn, arrays: dict, var: str) -> np.ndarray:
    """G = conj(jax.grad) for a real-valued fn(**arrays) of the complex array arrays[var]."""
    others = {k: jnp.asarray(v) for k, v in arrays.items() if k != var}
    g = jax.grad(lambda z: fn(**{**others, var: z}))(jnp.asarray(arrays[var], dtype=complex))
    return np.conj(np.asarray(g))  # reference library: JAX, converted to our convention


def complex_directions(shape, rng, hermitian=False) -> list:
    """One real, one imaginary and one general complex direction (Hermitian if asked)."""
    out = []
    for make in (
        lambda: rng.standard_normal(shape) + 0j,
        lambda: 1j * rng.standard_normal(shape),
        lambda: rng.standard_normal(shape) + 1j * rng.standard_normal(shape),
    ):
        e = make()
        if hermitian:
            e = (e + np.conj(e).T) / 2
        out.append(e)
    return out


def complex_difference_check(f, arrays: dict, var: str, grad, *, h=1e-6, seed=0, hermitian=False):
    """Central differences of a real f along real and imaginary directions E agree with
    Re <G, E> = Re sum(conj(G) * E), the directional derivative our convention promises."""
    rng = np.random.default_rng(seed)
    x = np.asarray(arrays[var])
    directions = complex_directions(x.shape, rng, hermitian)
    if np.isrealobj(x):  # a real variable of a complex block: real directions only
        directions = [np.real(directions[0])]
    for e in directions:
        up = f(**{**arrays, var: x + h * e})
        down = f(**{**arrays, var: x - h * e})
        numeric = (up - down) / (2 * h)
        analytic = float(np.real(np.sum(np.conj(grad) * e)))
        assert abs(numeric - analytic) <= 1e-5 * max(1.0, abs(analytic)), (numeric, analytic)


# --- packed parameter vectors (fitting) ---------------------------------------------------------


def jax_packed(ref, arrays: dict, variables, shapes: dict):
    """JAX's value, gradient and Hessian of `ref` over the variables packed end to end, each
    column-major (reference library: JAX). Returns (flat, value, gradient, Hessian)."""
    consts = _as_jax({k: v for k, v in arrays.items() if k not in variables})
    sizes = [int(np.prod(shapes[v])) for v in variables]

    def unpacked(flat):
        out, start = {}, 0
        for v, size in zip(variables, sizes):
            piece = flat[start : start + size]
            out[v] = (
                piece.reshape(shapes[v][::-1]).T
                if len(shapes[v]) == 2
                else (piece.reshape(shapes[v]))
            )
            start += size
        return out

    def f(flat):
        return ref(**consts, **unpacked(flat))

    flat = np.concatenate([np.ravel(np.asarray(arrays[v], float), order="F") for v in variables])
    x = jnp.asarray(flat)
    return (
        flat,
        float(f(x)),
        np.asarray(jax.grad(f)(x)),
        np.asarray(jax.hessian(f)(x)),
    )


# --- references for spectral functions, factorizations and matrix equations (issue 9) -----------


def _jax_kron_solve(op, q):
    x = jnp.linalg.solve(op, jnp.ravel(q, order="F"))
    return jnp.reshape(x, q.shape, order="F")


def _jax_spectral(fn):
    """f(S) = U f(Λ) Uᵀ for a symmetric S, differentiated by JAX through eigh."""

    def apply(s):
        w, u = jnp.linalg.eigh(s)
        return (u * fn(w)) @ u.T

    return apply


def _matrix_function_references() -> dict:
    """jnp readings of eigvalsh, cholesky, expm, sqrtm/logm (symmetric arguments: through eigh)
    and SciPy's three matrix equations (through their Kronecker systems; Henderson and Searle,
    1981: vec(A X B) = (Bᵀ ⊗ A) vec X)."""
    eye = jnp.eye
    return {
        "eigvalsh": lambda s: jnp.linalg.eigvalsh(s),
        "cholesky": lambda s: jnp.linalg.cholesky(s),
        "expm": lambda a: jax.scipy.linalg.expm(a),
        "sqrtm": _jax_spectral(jnp.sqrt),
        "logm": _jax_spectral(jnp.log),
        "solve_sylvester": lambda a, b, q: _jax_kron_solve(
            jnp.kron(eye(b.shape[0]), a) + jnp.kron(b.T, eye(a.shape[0])), q
        ),
        "solve_continuous_lyapunov": lambda a, q: _jax_kron_solve(
            jnp.kron(eye(a.shape[0]), a) + jnp.kron(a, eye(a.shape[0])), q
        ),
        "solve_discrete_lyapunov": lambda a, q: _jax_kron_solve(
            eye(a.shape[0] ** 2) - jnp.kron(a, a), q
        ),
    }


_JAX_FUNCS.update(_matrix_function_references())


# --- text forms ------------------------------------------------------------------------------


def sizes_as_numbers(e, head: str, target: str):
    """e with tr(I_n), tr(1 1ᵀ) and sum(ones) replaced by the size they are, as the reader reads
    the text and LaTeX forms that show them as `n` (they are equal, the trees differ)."""
    from gradwright import expr as E
    from gradwright.language import parse_block
    from gradwright.printing import text

    mapping = {
        n: parse_block(head + f"{target} = {text(n)}").expr
        for n in E.walk(e)
        if (type(n) is E.Trace and type(n.args[0]) in (E.Identity, E.Ones))
        or (type(n) is E.Sum and type(n.args[0]) is E.Ones)
    }
    return E.substitute(e, mapping) if mapping else e
