"""The cost model of generated code: flop estimates, product-chain order and the lowering
rewrites chosen by it (inv(A) B as solve(A, B), products distributed over sums)."""

from __future__ import annotations

from .. import expr as E
from .cholesky import inverse_trace
from .gls import orthogonal_residuals

#: longest product chain ordered by dynamic programming (cubic in the length)
MAX_DP_CHAIN = 16


class CostModel:
    """Flop estimates from guessed dim sizes (user hints first)."""

    def __init__(self, sizes: dict, hinted=()):
        self.sizes = sizes
        self.hinted = frozenset(hinted)  # dims the user gave sizes for: decided here, not later
        self._orders: dict = {}
        self._flops: dict = {}
        self._samples: dict = {}  # the models of sampled sizes, kept so their caches are reused

    def sample_models(self, names) -> list:
        """Cost models at sampled sizes of `names` (for choices the sizes decide)."""
        key = frozenset(names)
        models = self._samples.get(key)
        if models is None:
            from .calltime import sample_sizes  # (calltime builds on this module)

            models = self._samples[key] = [CostModel(s) for s in sample_sizes(names)]
        return models

    def dim(self, d) -> float:
        if d is None:
            return 1.0
        out = float(d.coef)
        for n in d.names:
            out *= self.sizes.get(n, 1000.0)
        return out

    def size(self, shape) -> float:
        return self.dim(shape[0]) * self.dim(shape[1])

    def chain_order(self, factors):
        """Optimal parenthesization (dynamic programming, memoized on the dims); returns
        (cost, tree). Chains longer than MAX_DP_CHAIN are multiplied left to right."""
        dims = (self.dim(factors[0].shape[0]),) + tuple(self.dim(f.shape[1]) for f in factors)
        return self.chain_order_of_dims(dims)

    def chain_order_of_dims(self, dims: tuple):
        """chain_order for a chain d0 x d1, d1 x d2, ... given as numbers."""
        hit = self._orders.get(dims)
        if hit is None:
            hit = self._chain_order(dims)
            self._orders[dims] = hit
        return hit

    def _chain_order(self, dims):
        n = len(dims) - 1
        if n > MAX_DP_CHAIN:
            cost, tree = 0.0, 0
            for j in range(1, n):
                cost += dims[0] * dims[j] * dims[j + 1]
                tree = (tree, j)
            return cost, tree
        cost = [[0.0] * n for _ in range(n)]
        split = [[0] * n for _ in range(n)]
        for length in range(2, n + 1):
            for i in range(n - length + 1):
                j = i + length - 1
                best, arg = None, i
                for k in range(i, j):
                    c = cost[i][k] + cost[k + 1][j] + dims[i] * dims[k + 1] * dims[j + 1]
                    if best is None or c < best:
                        best, arg = c, k
                cost[i][j], split[i][j] = best, arg

        def tree(i, j):
            if i == j:
                return i
            k = split[i][j]
            return (tree(i, k), tree(k + 1, j))

        return cost[0][n - 1], tree(0, n - 1)

    def flops(self, e: E.Expr, free=frozenset(), memo=None) -> float:
        if memo is None:
            key = (e, free)
            hit = self._flops.get(key)
            if hit is None:
                hit = self.flops(e, free, {})
                self._flops[key] = hit
            return hit
        if e in free:
            return 0.0
        if e in memo:
            return 0.0  # computed once, shared
        t = type(e)
        if t in (E.Symbol, E.Const, E.Differential):
            return 0.0
        sub = sum(self.flops(c, free, memo) for c in e.children)
        memo[e] = True
        if t is E.MatMul:
            return sub + self.chain_order(e.args)[0]
        if t in (E.Solve, E.Inverse, E.Det, E.LogDet):
            n = self.dim(e.args[0].shape[0])
            k = self.dim(e.args[1].shape[1]) if t is E.Solve else (n if t is E.Inverse else 0)
            return sub + n**3 / 3 + n * n * k
        return sub + self.size(e.shape) + sum(self.size(c.shape) for c in e.children)


def guess_sizes(e: E.Expr, hints: dict | None = None) -> dict:
    """Dims that only ever appear as contracted inner dims of products (ranks, feature counts)
    are guessed small, the inner dim of a Gram product A.T @ A (observations) large, every
    other named dim in between. User hints override (common practice: low-rank factors are much
    smaller than the data dims, and samples outnumber features)."""
    outer, inner = set(), set()
    for node in E.walk(e):
        for d in node.shape:
            if d is not None:
                outer.update(d.names)
    for node in E.walk(e):
        if type(node) is E.MatMul:
            for a in node.args[:-1]:
                if a.shape[1] is not None:
                    inner.update(a.shape[1].names)
    result_dims = set()
    for node in E.walk(e):
        if type(node) is not E.Symbol:
            for d in node.shape:
                if d is not None:
                    result_dims.update(d.names)
    gram = set()  # the inner dim of A.T @ A counts observations: usually the largest
    for node in E.walk(e):
        if type(node) is E.MatMul:
            for a, b in zip(node.args, node.args[1:]):
                if a == E.transpose(b) and a.shape[1] is not None:
                    gram.update(a.shape[1].names)
    sizes = {}
    for name in outer | inner:
        small = name in inner and not _appears_as_result(e, name)
        sizes[name] = 10000.0 if name in gram else 30.0 if small else 1000.0
    sizes.update({k: float(v) for k, v in (hints or {}).items()})
    return sizes


def _appears_as_result(e: E.Expr, name: str) -> bool:
    for node in E.walk(e):
        if type(node) is E.MatMul:
            r, c = node.shape
            if (r is not None and name in r.names) or (c is not None and name in c.names):
                return True
    return False


# ---------------------------------------------------------------------------------------------
# lowering: rewrites for computation (before CSE and printing)
# ---------------------------------------------------------------------------------------------


def lower(e: E.Expr, cost: CostModel, free=frozenset()) -> E.Expr:
    """inv(A) @ B -> solve(A, B); distribute products over sums where the cost model says so;
    a solve with a sum distributed where every term becomes a solve computed anyway or one
    with a single right-hand side; products that vanish by the normal equations of a
    weighted least-squares residual dropped (gls.py)."""
    e = orthogonal_residuals(e)
    if free and len(free) <= 400:  # what is computed anyway is free transposed too
        free = free | {
            E.transpose(x) for x in free if type(x) in (E.Add, E.MatMul, E.Named, E.Func)
        }
    first = _lower(e, cost, free, frozenset())
    solves = frozenset(n for n in E.walk(first) if type(n) is E.Solve)
    solves |= frozenset(n for x in free for n in E.walk(x) if type(n) is E.Solve)
    return _lower(e, cost, free, solves)


def _lower(e: E.Expr, cost: CostModel, free, solves) -> E.Expr:
    memo: dict = {}

    def go(x: E.Expr) -> E.Expr:
        hit = memo.get(x)
        if hit is not None:
            return hit
        if type(x) is E.Named:
            out = E.Named(x.name, go(x.body))
        elif not x.children:
            out = x
        else:
            new = [go(c) for c in x.children]
            out = x if all(a is b for a, b in zip(new, x.children)) else E.rebuild_smart(x, new)
            if type(out) is E.MatMul:
                out = _distribute(out, cost, free, go)
                if type(out) is E.MatMul:
                    out = _all_solves(out)
            out = inverse_trace(_thin_solve(out, solves))
        memo[x] = out
        return out

    return go(e)


def _thin_solve(x: E.Expr, solves=frozenset()) -> E.Expr:
    """solve(A, v w) = solve(A, v) w for a column v: one right-hand side instead of many; a
    solve with a sum distributed when each term becomes a solve in `solves` (computed anyway)
    or one of those thin solves."""
    if type(x) is E.MatMul and type(x.args[-1]) is E.Solve:
        last = _thin_solve(x.args[-1], solves)
        return x if last is x.args[-1] else E.matmul(*x.args[:-1], last)
    if type(x) is E.Transpose and type(x.args[0]) is E.Solve:
        inner = _thin_solve(x.args[0], solves)
        return x if inner is x.args[0] else E.transpose(inner)
    if type(x) is not E.Solve:
        return x
    a, b = x.args
    if type(b) is E.MatMul and len(b.args) > 1 and E.is_col(b.args[0].shape):
        return E.matmul(E.Solve(a, b.args[0]), *b.args[1:])
    if type(b) is E.Mul and len(b.array_factors) == 1:
        inner = E.Solve(a, b.array_factors[0])
        thin = _thin_solve(inner)
        return x if thin is inner else E.mul(*b.scalar_factors, thin)
    if solves and type(b) is E.Add:
        terms = [_thin_solve(E.Solve(a, t)) for t in b.args]
        if all(t in solves or type(t) is not E.Solve for t in terms):
            return E.add(*terms)
    return x


def _larger_than(e: E.Expr, limit: int) -> bool:
    for count, _node in enumerate(E.walk(e)):
        if count >= limit:
            return True
    return False


def _unwrap(f: E.Expr) -> E.Expr:
    return f.body if type(f) is E.Named else f


def _distribute(m: E.MatMul, cost: CostModel, free, go) -> E.Expr:
    fs = m.args
    for i, f in enumerate(fs):
        body = _unwrap(f)
        if type(body) is not E.Add or f in free:
            continue
        # a scalar term of a broadcast sum is c * ones(shape) inside a product
        parts = [E.mul(t, E.Ones(body.shape)) if t.is_scalar else t for t in body.args]
        terms = [E.matmul(*fs[:i], t, *fs[i + 1 :]) for t in parts]

        def cheaper(model: CostModel, terms=terms) -> bool:
            factored = model.flops(m, free)
            distributed = sum(model.flops(t, free) for t in terms)
            return distributed + model.size(m.shape) * len(terms) < 0.8 * factored

        from .calltime import sym_flops  # (calltime builds on this module)

        names = {n for x in E.walk(m) for d in x.shape if d is not None for n in d.names}
        if names <= cost.hinted or _larger_than(m, 200):
            # (past a few hundred parts, sampling sizes costs more than the choice can save)
            votes = {cheaper(cost)}
        else:
            votes = {cheaper(model) for model in cost.sample_models(names)}
        if votes == {True}:
            return go(E.add(*terms))
        if votes == {True, False}:  # the sizes decide: both forms, chosen at call time
            from .calltime import CallTimeChoice

            dist = go(E.add(*terms))
            own = _solves(m)
            return CallTimeChoice(
                own, dist, sym_flops(own, cost, free), sym_flops(dist, cost, free)
            )
    return m


def _solves(m: E.MatMul) -> E.Expr:
    fs = list(m.args)
    # a trailing inverse: P inv(A) = solve(A.T, P.T).T
    for i in range(len(fs) - 1, -1, -1):
        if type(fs[i]) is E.Inverse and len(fs) > 1:
            a = fs[i].args[0]
            if i < len(fs) - 1:
                rest = E.matmul(*fs[i + 1 :])
                return E.matmul(*fs[:i], E.Solve(a, rest)) if i > 0 else E.Solve(a, rest)
            left = E.matmul(*fs[:i])
            return E.transpose(E.Solve(E.transpose(a), E.transpose(left)))
    return m


def _all_solves(m: E.MatMul) -> E.Expr:
    """Every inverse of a chain as a solve (an interior inv(A) would otherwise be formed)."""
    out = _solves(m)
    while type(out) is E.MatMul and out is not m and any(type(f) is E.Inverse for f in out.args):
        m, out = out, _solves(out)
    return out
