"""Identification as an adjoint: for df = L(dX), the gradient is L*(1); for array targets L*(G).

Each linear node has one small adjoint rule; cotangents are accumulated over the expression
DAG in reverse topological order, so shared subexpressions cost once.
"""

from __future__ import annotations

from .. import expr as E
from ..errors import NotSupportedError

ADJOINTS: dict = {}


def adjoint_rule(cls):
    def register(fn):
        ADJOINTS[cls] = fn
        return fn

    return register


def _unbroadcast(g: E.Expr, shape) -> E.Expr:
    if E.is_scalar_shape(shape) and not g.is_scalar:
        return E.summation(g)
    return g


def _nonlinear(node):
    raise NotSupportedError(
        f"not supported yet: the expression is not linear in the differential at "
        f"{type(node).__name__}"
    )


@adjoint_rule(E.Add)
def _add(node, g):
    return [(t, _unbroadcast(g, t.shape)) for t in node.args if t.has_differential]


@adjoint_rule(E.Mul)
def _mul(node, g):
    fs = node.args
    idx = [i for i, f in enumerate(fs) if f.has_differential]
    if len(idx) != 1:
        _nonlinear(node)
    i = idx[0]
    others = fs[:i] + fs[i + 1 :]
    contrib = E.mul(g, *others)
    return [(fs[i], _unbroadcast(contrib, fs[i].shape))]


@adjoint_rule(E.MatMul)
def _matmul(node, g):
    fs = node.args
    idx = [i for i, f in enumerate(fs) if f.has_differential]
    if len(idx) != 1:
        _nonlinear(node)
    i = idx[0]
    left = [E.transpose(f) for f in reversed(fs[:i])]
    right = [E.transpose(f) for f in reversed(fs[i + 1 :])]
    return [(fs[i], E.matmul(*left, g, *right))]


@adjoint_rule(E.Transpose)
def _transpose(node, g):
    return [(node.args[0], E.transpose(g))]


@adjoint_rule(E.Trace)
def _trace(node, g):
    a = node.args[0]
    return [(a, E.mul(g, E.Identity(a.shape[0])))]


@adjoint_rule(E.Sum)
def _sum(node, g):
    a = node.args[0]
    return [(a, E.mul(g, E.Ones(a.shape)))]


@adjoint_rule(E.Vec)
def _vec(node, g):
    a = node.args[0]
    return [(a, E.unvec(g, a.shape[0], a.shape[1]))]


@adjoint_rule(E.Unvec)
def _unvec(node, g):
    return [(node.args[0], E.vec(g))]


@adjoint_rule(E.Diag)
def _diag(node, g):
    return [(node.args[0], E.diagm(g))]


@adjoint_rule(E.Diagm)
def _diagm(node, g):
    return [(node.args[0], E.diag(g))]


@adjoint_rule(E.Kron)
def _kron(node, g):
    a, b = node.args
    if a.has_differential and b.has_differential:
        _nonlinear(node)
    pq = _kron_factors(g)
    if pq is not None and (pq[0].shape, pq[1].shape) == (
        a.shape,
        b.shape,
    ):  # blocks of P ⊗ Q are P_ij Q: the contraction has a closed form
        p, q = pq
        if a.has_differential:
            return [(a, E.mul(_inner(q, b), p))]
        return [(b, E.mul(_inner(p, a), q))]
    if a.has_differential:
        return [(a, E.KronContract(g, b, a.shape[0], a.shape[1], "left"))]
    return [(b, E.KronContract(g, a, b.shape[0], b.shape[1], "right"))]


def _inner(p, q):
    """<P, Q> as tr(Pᵀ Q) for matrices (so that tr(B⁻¹ B) folds to a dim), else sum(P ∘ Q)."""
    if E.is_matrix_shape(p.shape):
        return E.trace(E.matmul(E.transpose(p), q))
    return E.summation(E.mul(p, q))


def _kron_factors(g):
    """(P, Q) with g = P ⊗ Q, seen through inverses and transposes; None otherwise."""
    t = type(g)
    if t is E.Kron:
        return g.args
    if t is E.Mul and g.scalar_factors and len(g.array_factors) == 1:
        inner = _kron_factors(g.array_factors[0])
        if inner is not None:
            return E.mul(*g.scalar_factors, inner[0]), inner[1]
    if t in (E.Inverse, E.Transpose):
        inner = _kron_factors(g.args[0])
        if inner is not None:
            f = E.inverse if t is E.Inverse else E.transpose
            return f(inner[0]), f(inner[1])
    return None


@adjoint_rule(E.KronContract)
def _kron_contract(node, g):
    inner, other, _r, _c, side = node.args
    if other.has_differential:
        _nonlinear(node)
    return [(inner, E.kron(g, other) if side == "left" else E.kron(other, g))]


@adjoint_rule(E.Solve)
def _solve(node, g):
    a, b = node.args
    if a.has_differential:
        _nonlinear(node)
    return [(b, E.solve(E.transpose(a), g))]


def adjoint(linear: E.Expr, seed: E.Expr) -> dict[str, E.Expr]:
    """The adjoint of the linear map `linear` (in its differential leaves) applied to seed.

    Returns symbol name -> expression shaped like that symbol.
    """
    order: list[E.Expr] = []
    seen: set = set()
    stack: list[tuple[E.Expr, bool]] = [(linear, False)]
    while stack:
        node, done = stack.pop()
        if done:
            order.append(node)
            continue
        if node in seen or not node.has_differential:
            continue
        seen.add(node)
        stack.append((node, True))
        for c in node.children:
            if c.has_differential and c not in seen:
                stack.append((c, False))
    cot: dict = {linear: [seed]}
    out: dict[str, list] = {}
    for node in reversed(order):
        gs = cot.pop(node, None)
        if not gs:
            continue
        g = gs[0] if len(gs) == 1 else E.add(*gs)
        if type(node) is E.Differential:
            out.setdefault(node.symbol.name, []).append(g)
            continue
        fn = ADJOINTS.get(type(node))
        if fn is None:
            _nonlinear(node)
        for child, contrib in fn(node, g):
            cot.setdefault(child, []).append(contrib)
    return {k: (v[0] if len(v) == 1 else E.add(*v)) for k, v in out.items()}
