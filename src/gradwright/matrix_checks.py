"""Valid sample inputs for spectral functions, factorizations and matrix equations, and notes
on inputs near points where their derivatives do not exist (used by the check panel).

>>> from gradwright.language import parse_block
>>> sorted(sample_needs(parse_block("S: (n, n) spd\\nf = sum(eigvalsh(S))").expr).items())
[('S', 'separated')]
"""

from __future__ import annotations

import numpy as np

from . import expr as E
from . import matrix_functions as M

#: how far apart sampled eigenvalues are kept, relative to the largest (common practice)
_SEPARATION = 0.25
#: relative gap below which eigenvalues count as numerically repeated (about sqrt(eps) scaled)
_REPEATED = 1e-6


def _leaves(e: E.Expr) -> list[str]:
    return sorted({x.name for x in E.walk(e) if type(x) is E.Symbol})


def sample_needs(e: E.Expr) -> dict[str, str]:
    """Symbol name -> what a sample of it must satisfy: 'separated' (symmetric with well
    separated positive eigenvalues), 'shifted' (square with eigenvalues off the negative real
    axis), 'contractive' (spectral radius below one)."""
    out: dict[str, str] = {}
    for node in E.walk(E.inline_named(e)):
        t = type(node)
        if t in (M.Eigvalsh, M.Cholesky):
            arg, kind = node.args[0], "separated"
        elif t is M.MatrixFunction:
            arg = node.args[1]
            kind = "separated" if E.is_symmetric(arg) else "shifted"
            if node.args[0] == "expm" and not E.is_symmetric(arg):
                continue  # any square matrix will do
        elif t is M.SolveDiscreteLyapunov:
            arg, kind = node.args[0], "contractive"
        else:
            continue
        if type(arg) is E.Symbol:  # a symbol used directly; built arguments are left alone
            out.setdefault(arg.name, kind)
    return out


def adjust_samples(e: E.Expr, symbols: dict, arrays: dict, seed: int = 0) -> dict:
    """Replace the samples of symbols that `sample_needs` names by valid ones (same shape)."""
    rng = np.random.default_rng(seed + 7919)
    out = dict(arrays)
    for name, kind in sample_needs(e).items():
        value = np.asarray(out.get(name))
        if value.ndim != 2 or value.shape[0] != value.shape[1]:
            continue
        n = value.shape[0]
        sym = symbols.get(name)
        words = sym.structure if sym is not None else frozenset()
        if kind == "separated" and words & {"symmetric", "spd"}:
            q, _ = np.linalg.qr(rng.standard_normal((n, n)))
            # eigenvalues 1, 1 + s, 1 + 2s, ...: simple, positive, and well conditioned
            w = 1.0 + _SEPARATION * np.arange(n) * rng.uniform(1.0, 1.5)
            out[name] = (q * w) @ q.T
        elif kind == "shifted":
            out[name] = value + (np.sqrt(n) + np.max(np.abs(value), initial=0.0)) * np.eye(n)
        elif kind == "contractive":
            radius = np.max(np.abs(np.linalg.eigvals(value)), initial=0.0)
            if radius >= 0.8:
                out[name] = value * (0.5 / radius)
    return out


def derivative_notes(e: E.Expr, arrays: dict) -> list[str]:
    """Notes on an input near a point where a derivative of these operations does not exist:
    repeated eigenvalues (eigvalsh), eigenvalues near zero (logm, sqrtm, cholesky), nearly
    singular matrix equations."""
    from .evaluate import evaluate

    notes: list[str] = []
    seen: set = set()
    from .printing import text

    for node in E.walk(E.inline_named(e)):
        t = type(node)
        if t not in (M.Eigvalsh, M.Cholesky, M.MatrixFunction):
            continue
        arg = node.args[-1]
        if arg in seen or not E.is_symmetric(arg):
            continue
        seen.add(arg)
        try:
            value = np.asarray(evaluate(arg, arrays), dtype=float)
            w = np.linalg.eigvalsh(0.5 * (value + value.T))
        except Exception:  # an input the check itself will report
            continue
        scale = max(1.0, float(np.max(np.abs(w), initial=0.0)))
        shown = text(arg)
        if t is M.Eigvalsh and w.size > 1 and np.min(np.diff(w)) <= _REPEATED * scale:
            notes.append(
                f"{shown} has numerically repeated eigenvalues here: the derivative of an "
                "individual eigenvalue does not exist at such a point (sums and spectral functions "
                "of all of them are fine); finite differences may disagree."
            )
        name = node.args[0] if t is M.MatrixFunction else "cholesky"
        if name in ("logm", "sqrtm", "cholesky") and w[0] <= _REPEATED * scale:
            notes.append(
                f"{shown} is (nearly) singular here (smallest eigenvalue {w[0]:.3g}): {name} has "
                "no derivative at a matrix with a zero or negative eigenvalue."
            )
    return notes
