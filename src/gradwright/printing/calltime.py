"""Choices the generated code makes at call time, from the actual array sizes.

The best order of a product chain, or whether a product is cheaper distributed over a sum,
depends on the sizes, which are known only when the function is called. At generation time we
try the decision at many sample sizes; where it always comes out the same it is made once,
and where it does not, the code carries each candidate with its flop count as a polynomial in
the dims, and picks the cheapest with a few integer products and comparisons:

    (X.T @ X) @ W if n*p*p + p*p*k <= 2*n*p*k else X.T @ (X @ W)
"""

from __future__ import annotations

import itertools

from .. import expr as E
from .costmodel import MAX_DP_CHAIN, CostModel

#: sample sizes of every dim (small, medium, large; common practice for a cost survey)
SAMPLE_SIZES = (4.0, 64.0, 2048.0)
#: at most this many dims are sampled on the full grid; more get a sparser set
MAX_GRID_DIMS = 4
#: at most this many candidates are carried into the generated code
MAX_CANDIDATES = 3


def sample_sizes(names) -> list[dict]:
    """Size assignments that cover the regimes where decisions change."""
    names = sorted(names)
    if not names:
        return [{}]
    if len(names) <= MAX_GRID_DIMS:
        return [dict(zip(names, c)) for c in itertools.product(SAMPLE_SIZES, repeat=len(names))]
    out = [{n: s for n in names} for s in SAMPLE_SIZES]
    for big in names:
        for lo, hi in ((SAMPLE_SIZES[0], SAMPLE_SIZES[2]), (SAMPLE_SIZES[2], SAMPLE_SIZES[0])):
            out.append({n: (hi if n == big else lo) for n in names})
    return out


def _names(dims) -> set:
    return {n for d in dims if d is not None for n in d.names}


# --- flop counts as polynomials in the dims ---------------------------------------------------
# a polynomial is a dict {sorted tuple of dim names: coefficient}


def _dim_poly(d) -> dict:
    if d is None:
        return {(): 1.0}
    return {tuple(sorted(d.names)): float(d.coef)}


def _mul(a: dict, b: dict) -> dict:
    out: dict = {}
    for ka, va in a.items():
        for kb, vb in b.items():
            k = tuple(sorted(ka + kb))
            out[k] = out.get(k, 0.0) + va * vb
    return out


def _add(*ps: dict) -> dict:
    out: dict = {}
    for p in ps:
        for k, v in p.items():
            out[k] = out.get(k, 0.0) + v
    return out


def tree_cost(dims: list, tree) -> dict:
    """Flops of one parenthesization of a chain with dims d0 x d1, d1 x d2, ..."""

    def go(t):
        if isinstance(t, int):
            return {}, t, t
        (ca, i, k), (cb, _k1, j) = go(t[0]), go(t[1])
        here = _mul(_mul(_dim_poly(dims[i]), _dim_poly(dims[k + 1])), _dim_poly(dims[j + 1]))
        return _add(ca, cb, here), i, j

    return go(tree)[0]


def poly_text(p: dict) -> str:
    """The polynomial as Python text over `_dims` (integer arithmetic at call time)."""
    terms = []
    for k in sorted(p, key=lambda k: (len(k), k)):
        v = p[k]
        if v == 0:
            continue
        parts = [f'_dims["{n}"]' for n in k]
        coef = int(v) if float(v).is_integer() else v
        if coef != 1 or not parts:
            parts.insert(0, repr(coef))
        terms.append("*".join(parts))
    return " + ".join(terms) if terms else "0"


def chain_dims(shapes) -> list:
    return [shapes[0][0]] + [s[1] for s in shapes]


def chain_candidates(shapes, model: CostModel) -> list:
    """The parenthesizations that are optimal somewhere on the sample grid, most often first.
    One tree when the order does not depend on the sizes, or the user fixed them."""
    if len(shapes) < 3 or len(shapes) > MAX_DP_CHAIN:
        return [model.chain_order_of_dims(_dims_of(model, shapes))[1]]
    dims = chain_dims(shapes)
    names = _names(dims)
    if not names or names <= set(model.hinted):
        return [model.chain_order_of_dims(_dims_of(model, shapes))[1]]
    wins: dict = {}
    for sizes in sample_sizes(names):
        m = CostModel(sizes)
        tree = m.chain_order_of_dims(_dims_of(m, shapes))[1]
        wins[tree] = wins.get(tree, 0) + 1
    ranked = sorted(wins, key=lambda t: (-wins[t], repr(t)))
    return ranked[:MAX_CANDIDATES]


def _dims_of(model: CostModel, shapes) -> tuple:
    return tuple(model.dim(d) for d in chain_dims(shapes))


def choice_text(candidates: list, costs: list) -> str:
    """`a if ca <= min(cb, cc) else (b if cb <= cc else c)` over texts and cost texts."""
    if len(candidates) == 1:
        return candidates[0]
    rest = costs[1:]
    bound = rest[0] if len(rest) == 1 else f"min({', '.join(rest)})"
    tail = choice_text(candidates[1:], costs[1:])
    return f"{candidates[0]} if {costs[0]} <= {bound} else ({tail})"


class CallTimeChoice(E.Expr):
    """Two forms of one value and their flop counts as call-time text: `dist` is evaluated
    when `dist_cost < 0.8 * own_cost` (distributing must save a fifth, as at generation),
    else `own`. A node of the code generator only: it never leaves `lower()`."""

    __slots__ = ()

    def __init__(self, own: E.Expr, dist: E.Expr, own_cost: str, dist_cost: str):
        super().__init__(own, dist, own_cost, dist_cost)

    def _infer_shape(self):
        return self.args[0].shape


# --- symbolic flops of whole expressions (for distributing a product over a sum) -------------


def sym_flops(e: E.Expr, model: CostModel, free=frozenset()) -> str:
    """Flops of evaluating e as call-time text (chains at their call-time best order)."""
    poly: dict = {}
    mins: list[str] = []
    seen: set = set()

    def go(x):
        nonlocal poly
        if x in free or x in seen:
            return
        t = type(x)
        if t in (E.Symbol, E.Const, E.Differential):
            return
        seen.add(x)
        for c in x.children:
            go(c)
        if t is E.MatMul:
            shapes = [f.shape for f in x.args]
            trees = chain_candidates(shapes, model)
            polys = [tree_cost(chain_dims(shapes), tr) for tr in trees]
            if len(polys) == 1:
                poly = _add(poly, polys[0])
            else:
                mins.append(f"min({', '.join(poly_text(p) for p in polys)})")
        elif t in (E.Solve, E.Inverse, E.Det, E.LogDet):
            n = _dim_poly(x.args[0].shape[0])
            k = (
                _dim_poly(x.args[1].shape[1])
                if t is E.Solve
                else (n if t is E.Inverse else {(): 0.0})
            )
            cube = _mul(_mul(n, n), n)
            poly = _add(poly, {key: v / 3 for key, v in cube.items()}, _mul(_mul(n, n), k))
        else:
            size = _add(_size(x.shape), *[_size(c.shape) for c in x.children])
            poly = _add(poly, size)

    go(e)
    return " + ".join([poly_text(poly)] + mins)


def _size(shape) -> dict:
    return _mul(_dim_poly(shape[0]), _dim_poly(shape[1]))
