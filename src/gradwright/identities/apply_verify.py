"""The numeric safety net of `applicable`: every match is evaluated at random values before it
is offered (rewrites against the original, differentials and gradients against a central
difference)."""

from __future__ import annotations

from typing import TYPE_CHECKING

import numpy as np

from .. import expr as E

if TYPE_CHECKING:
    from .apply import Match

# ---------------------------------------------------------------------------------------------
# the numeric safety net
# ---------------------------------------------------------------------------------------------


def _symbols(e: E.Expr) -> dict:
    out = {}
    for n in E.walk(e):
        if type(n) is E.Symbol:
            out[n.name] = n
        elif type(n) is E.Differential:
            out[n.symbol.name] = n.symbol
    return out


def _sample(e: E.Expr, seed: int):
    from ..sampling import default_sizes, needs_positive, sample_symbol

    symbols = _symbols(e)
    dims = []
    for node in E.walk(e):
        shapes = [node.shape]
        if type(node) in (E.Commutation, E.SizeOf):
            shapes.append(tuple(node.args))
        for shape in shapes:
            for d in shape:
                for name in () if d is None else d.names:
                    if name not in dims:
                        dims.append(name)
    sizes = default_sizes(dims)
    positive = needs_positive(E.inline_named(e))
    rng = np.random.default_rng(seed)
    arrays = {
        name: sample_symbol(s, sizes, rng, positive=name in positive) for name, s in symbols.items()
    }
    return arrays, sizes, rng


def _close(a, b) -> bool:
    a, b = np.asarray(a, dtype=float), np.asarray(b, dtype=float)
    if a.shape != b.shape:
        return False
    scale = max(1.0, float(np.max(np.abs(a), initial=0.0)))
    return bool(np.allclose(a, b, rtol=1e-6, atol=1e-8 * scale))


def _verified(match: Match, root: E.Expr) -> bool:
    from ..evaluate import evaluate

    try:
        with np.errstate(all="ignore"):
            arrays, sizes, rng = _sample(root if match.is_rewrite else match.matched, 7)
            if match.is_rewrite:
                before = evaluate(root, arrays, dims=sizes)
                if not np.all(np.isfinite(before)):
                    return True
                return _close(before, evaluate(match.rewritten, arrays, dims=sizes))
            if match.direction == "differential":
                names = sorted(
                    frozenset().union(
                        *(
                            n.symbols if type(n) is E.D else {n.symbol.name}
                            for n in E.walk(match.replacement)
                            if type(n) in (E.D, E.Differential)
                        )
                    )
                )
            else:
                names = [match.wrt]
            dirs = {n: rng.standard_normal(np.shape(arrays[n])) for n in names}
            for n, s in _symbols(match.matched).items():
                if n in dirs and np.ndim(arrays[n]) == 2 and E.is_symmetric(s):
                    dirs[n] = (dirs[n] + dirs[n].T) / 2
            h = 1e-6
            plus = {k: v + h * dirs[k] if k in dirs else v for k, v in arrays.items()}
            minus = {k: v - h * dirs[k] if k in dirs else v for k, v in arrays.items()}
            fd = (
                np.asarray(evaluate(match.matched, plus, dims=sizes))
                - np.asarray(evaluate(match.matched, minus, dims=sizes))
            ) / (2 * h)
            if not np.all(np.isfinite(fd)):
                return True
            if match.direction == "differential":
                # each pending d(e) is replaced by a central difference of e along the directions
                pending = {}
                extra = {}
                for k, node in enumerate(n for n in E.walk(match.replacement) if type(n) is E.D):
                    name = f"_gw_pending_{k}"
                    body = node.args[0]
                    pending[node] = E.Symbol(name, body.shape)
                    extra[name] = (
                        np.asarray(evaluate(body, plus, dims=sizes))
                        - np.asarray(evaluate(body, minus, dims=sizes))
                    ) / (2 * h)
                replacement = (
                    E.substitute(match.replacement, pending) if pending else match.replacement
                )
                full_dirs = {**dirs}
                for n in E.walk(replacement):
                    if type(n) is E.Differential and n.symbol.name not in full_dirs:
                        full_dirs[n.symbol.name] = np.zeros_like(np.asarray(arrays[n.symbol.name]))
                analytic = evaluate(
                    replacement, {**arrays, **extra}, differentials=full_dirs, dims=sizes
                )
            else:
                g = np.asarray(evaluate(match.replacement, arrays, dims=sizes))
                analytic = float(np.sum(g * dirs[match.wrt]))
            a = np.asarray(analytic, dtype=float)
            return a.shape == fd.shape and bool(np.allclose(fd, a, rtol=1e-4, atol=1e-6))
    except Exception:  # noqa: BLE001 - what cannot be evaluated is not offered
        return False
