"""Random inputs that honor each symbol's shape and structure words."""

from __future__ import annotations

import numpy as np

from . import expr as E

__all__ = ["default_sizes", "sample_symbol", "sample_inputs"]

_DEFAULT_SIZES = (3, 4, 2, 5, 3, 4)


def default_sizes(dim_names) -> dict:
    """Small distinct sizes, so that a transposed dim shows up as a shape error."""
    return {d: _DEFAULT_SIZES[i % len(_DEFAULT_SIZES)] for i, d in enumerate(dim_names)}


def _size(d, sizes) -> int:
    if d is None:
        return 1
    return d.value(sizes)


def sample_symbol(sym: E.Symbol, sizes: dict, rng: np.random.Generator, positive=False):
    """An array shaped like sym (NumPy shapes) satisfying its structure words."""
    r, c = (_size(d, sizes) for d in sym.shape)
    words = sym.structure
    n = r
    if "complex" in words:
        return _sample_complex(sym, r, c, rng)
    if "spd" in words:
        a = rng.standard_normal((n, n))
        out = a @ a.T / n + np.eye(n)
    elif "orthogonal" in words:
        q, rr = np.linalg.qr(rng.standard_normal((n, n)))
        out = q * np.sign(np.diag(rr))
    elif "diagonal" in words:
        v = (
            rng.uniform(0.5, 2.0, n)
            if ("positive" in words or positive)
            else rng.uniform(0.5, 2.0, n) * rng.choice([-1.0, 1.0], n)
        )
        out = np.diag(v)
    elif "lower" in words:
        # a Cholesky-like factor: a positive diagonal keeps L Lᵀ positive definite
        out = np.tril(rng.standard_normal((n, n)), -1) + np.diag(rng.uniform(0.5, 2.0, n))
    elif "symmetric" in words:
        a = rng.standard_normal((n, n))
        out = (a + a.T) / 2
        if "positive" in words or positive:
            out = np.abs(out) + 0.5
    elif "positive" in words or positive:
        out = rng.uniform(0.5, 2.0, (r, c))
    elif "invertible" in words:
        out = rng.standard_normal((n, n)) + np.sqrt(n) * 2 * np.eye(n)
    else:
        out = rng.standard_normal((r, c))
    if "positive" in words and "diagonal" not in words and "symmetric" not in words:
        out = np.abs(out) + 0.5
    if sym.shape[0] is None and sym.shape[1] is None:
        return float(out.reshape(()))
    if sym.shape[1] is None or sym.shape[0] is None:
        return out.reshape(-1)
    return out


def _sample_complex(sym: E.Symbol, r: int, c: int, rng: np.random.Generator):
    """A complex array: hermitian, hpd (AAᴴ/n + I) or general, unit-variance entries."""
    a = (rng.standard_normal((r, c)) + 1j * rng.standard_normal((r, c))) / np.sqrt(2)
    if "hpd" in sym.structure:
        a = a @ a.conj().T / r + np.eye(r)
    elif "hermitian" in sym.structure:
        a = (a + a.conj().T) / 2
    if sym.shape[0] is None and sym.shape[1] is None:
        return complex(a.reshape(()))
    if sym.shape[1] is None or sym.shape[0] is None:
        return a.reshape(-1)
    return a


def needs_positive(e: E.Expr) -> set[str]:
    """Symbols that sit directly under log, sqrt or a fractional power: sample them positive."""
    out: set[str] = set()
    for node in E.walk(e):
        arg = None
        if type(node) is E.Func and node.name in ("log", "sqrt"):
            arg = node.arg
        elif type(node) is E.Power and not (
            type(node.args[1]) is E.Const and node.args[1].value.denominator == 1
        ):
            arg = node.args[0]
        elif type(node) is E.Power and type(node.args[1]) is E.Const and node.args[1].value < 0:
            arg = node.args[0]
        if arg is not None:
            for leaf in E.walk(arg):
                if type(leaf) is E.Symbol:
                    out.add(leaf.name)
    return out


def sample_inputs(symbols: dict, sizes: dict, seed=0, positive=()) -> dict:
    rng = np.random.default_rng(seed)
    return {
        name: sample_symbol(sym, sizes, rng, positive=name in positive)
        for name, sym in symbols.items()
    }
