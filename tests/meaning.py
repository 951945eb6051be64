"""The meaning test's reader: a block's text evaluated as NumPy (or jax.numpy) code.

The promise of the formula language is "what NumPy computes from the same line, gradwright
derives". This helper is the other side of that promise: it runs each definition's text with
Python's `eval` in a namespace of NumPy functions (test code only; the product never evaluates
text), with every dim bound to its size and `pi` to π. With `JAX_NAMES` the same text is a
JAX function, so that JAX differentiates exactly what NumPy computes (reference library: JAX).

Families of functions add their spellings to NUMPY_NAMES and JAX_NAMES (one entry each).
"""

from __future__ import annotations

import re

import numpy as np
import scipy.special

from checks import jax, jnp


def _commutation(xp, m: int, n: int):
    # K vec(A) = vec(A^T) for A of shape (m, n) (Henderson and Searle, 1981)
    k = np.zeros((m * n, m * n))
    for i in range(m):
        for j in range(n):
            k[j + i * n, i + j * m] = 1.0
    return xp.asarray(k)


def _kron_contract(xp, side: str):
    """The adjoint of kron(L, B) in L (left) or of kron(A, L) in L (right), from its definition
    (the (m, n) blocks of G, each (p, q), contracted with the other factor)."""

    def contract(g, other):
        g2 = g.reshape(g.shape[0], -1) if g.ndim == 2 else g.reshape(-1, 1)
        o2 = other.reshape(other.shape[0], -1) if other.ndim == 2 else other.reshape(-1, 1)
        if side == "left":
            p, q = o2.shape
            m, n = g2.shape[0] // p, g2.shape[1] // q
            out = xp.einsum("ikjl,kl->ij", g2.reshape(m, p, n, q), o2)
        else:
            m, n = o2.shape
            p, q = g2.shape[0] // m, g2.shape[1] // n
            out = xp.einsum("ikjl,ij->kl", g2.reshape(m, p, n, q), o2)
        return out.reshape(-1) if g.ndim == 1 else out

    return contract


def _names(xp, special) -> dict:
    return {
        "exp": xp.exp,
        "log": xp.log,
        "sqrt": xp.sqrt,
        "sin": xp.sin,
        "cos": xp.cos,
        "tanh": xp.tanh,
        "sigmoid": special["sigmoid"],
        "softplus": lambda a: xp.logaddexp(0.0, a),
        "trace": xp.trace,
        "det": xp.linalg.det,
        "logdet": lambda a: xp.linalg.slogdet(a)[1],
        "inv": xp.linalg.inv,
        "solve": xp.linalg.solve,
        "kron": xp.kron,
        "vec": lambda a: xp.ravel(a, order="F"),
        "diag": xp.diagonal,
        "diagm": xp.diag,
        "sum": xp.sum,
        "norm": xp.linalg.norm,
        "logsumexp": special["logsumexp"],
        "softmax": special["softmax"],
        "outer": xp.outer,
        "eye": xp.eye,
        "ones": lambda *dims: xp.ones(dims),
        "zeros": lambda *dims: xp.zeros(dims),
        "mpow": xp.linalg.matrix_power,
        "commutation": lambda m, n: _commutation(xp, m, n),
        "pi": np.pi,
        # the printed forms of adjoints (language/calls_printed.py)
        "unvec": lambda g, r, c: xp.reshape(g, (r, c), order="F"),
        "kron_contract_left": _kron_contract(xp, "left"),
        "kron_contract_right": _kron_contract(xp, "right"),
    }


NUMPY_NAMES = _names(
    np,
    {
        "sigmoid": scipy.special.expit,
        "logsumexp": scipy.special.logsumexp,
        "softmax": scipy.special.softmax,
    },
)
JAX_NAMES = _names(
    jnp,
    {
        "sigmoid": jax.nn.sigmoid,
        "logsumexp": jax.scipy.special.logsumexp,
        "softmax": jax.nn.softmax,
    },
)


def _numpy_more_names(xp, special) -> dict:
    """Reductions over an axis, softmax over an axis, maximum/minimum and the entrywise
    functions of NumPy/SciPy (language/calls_reductions.py, calls_entrywise.py)."""

    def weights(op):
        def w(a, axis=None):
            best = (xp.max if op == "max" else xp.min)(a, axis=axis, keepdims=True)
            hits = (a == best) * 1.0
            return hits / xp.sum(hits, axis=axis, keepdims=True)

        return w

    return {
        "mean": xp.mean,
        "max": xp.max,
        "min": xp.min,
        "log_softmax": special["log_softmax"],
        "maximum": xp.maximum,
        "minimum": xp.minimum,
        "abs": xp.abs,
        "sign": xp.sign,
        "cosh": xp.cosh,
        "sinh": xp.sinh,
        "arctan": xp.arctan,
        "log1p": xp.log1p,
        "expm1": xp.expm1,
        "square": xp.square,
        "reciprocal": lambda a: 1.0 / a,
        "erf": special["erf"],
        "gammaln": special["gammaln"],
        "digamma": special["digamma"],
        "polygamma": special["polygamma"],
        "heaviside": xp.heaviside,
        "max_weights": weights("max"),
        "min_weights": weights("min"),
    }


NUMPY_NAMES.update(
    _numpy_more_names(
        np,
        {
            "log_softmax": scipy.special.log_softmax,
            "erf": scipy.special.erf,
            "gammaln": scipy.special.gammaln,
            "digamma": scipy.special.digamma,
            "polygamma": scipy.special.polygamma,
        },
    )
)
JAX_NAMES.update(
    _numpy_more_names(
        jnp,
        {
            "log_softmax": jax.nn.log_softmax,
            "erf": jax.scipy.special.erf,
            "gammaln": jax.scipy.special.gammaln,
            "digamma": jax.scipy.special.digamma,
            "polygamma": jax.scipy.special.polygamma,
        },
    )
)

_DECL = re.compile(r"^\s*([A-Za-z_]\w*)\s*:(?!=)")
_DEF = re.compile(r"^\s*([A-Za-z_]\w*)\s*=(?!=)(.*)$", re.S)


def definitions(text: str) -> list[tuple[str, str]]:
    """(name, expression text) of every definition, the target last; declarations skipped."""
    out = []
    for raw in text.split("\n"):
        line = raw.split("#", 1)[0].rstrip()
        if not line.strip() or _DECL.match(line):
            continue
        m = _DEF.match(line)
        out.append((m.group(1), m.group(2).strip()) if m else ("_target", line.strip()))
    return out


def numpy_value(text: str, arrays: dict, sizes: dict, names: dict | None = None):
    """The target of `text` as NumPy computes it (JAX with names=JAX_NAMES).

    `sizes` binds each dim name to its size, as a dim used in a formula means its size.
    """
    env = {"__builtins__": {}}
    env.update(names or NUMPY_NAMES)
    env.update(sizes)
    env.update(arrays)
    value = None
    for name, expr in definitions(text):
        value = eval(expr, env)  # noqa: S307 - test code reading the test's own blocks
        env[name] = value
    return value
