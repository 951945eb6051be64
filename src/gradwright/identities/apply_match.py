"""Pattern matching of identity sides: the compiled patterns, the matcher and the builder.

A side read by the formula language is a tree whose declared symbols are pattern variables;
`_match` binds them (and their dims) consistently, respecting shapes and structure, and
`_build` instantiates the other side with the bindings. `apply.py` runs it over a formula.
"""

from __future__ import annotations

import itertools
from dataclasses import dataclass
from functools import lru_cache

from .. import expr as E
from .search import all_identities

# ---------------------------------------------------------------------------------------------
# patterns
# ---------------------------------------------------------------------------------------------


@dataclass(frozen=True)
class _Pattern:
    identity: object
    direction: str
    lhs: E.Expr
    rhs: E.Expr
    variables: frozenset
    node_types: frozenset
    wrt: str | None = None


def _node_types(e: E.Expr) -> frozenset:
    return frozenset(type(n) for n in E.walk(e) if type(n) is not E.Symbol)


def _operators(e: E.Expr) -> int:
    return sum(1 for n in E.walk(e) if type(n) not in (E.Symbol, E.Const))


def _trivial(e: E.Expr) -> bool:
    """A side too bare to search for: a lone symbol, a constant, or a tree without symbols."""
    return type(e) in (E.Symbol, E.Const) or not e.symbols


@lru_cache(maxsize=1)
def compiled_patterns() -> tuple[_Pattern, ...]:
    """Every usable (identity, direction) pattern, read once."""
    from ..language import parse_block

    out = []
    for ident in all_identities():

        def read(text, ident=ident):
            block = parse_block(
                "\n".join([*ident.declarations, f"f = {text}"]), allow_differentials=True
            )
            return block

        try:
            if ident.kind == "equality":
                left, right = read(ident.lhs).expr, read(ident.rhs).expr
                pairs = [("forward", left, right), ("backward", right, left)]
            elif ident.kind == "differential":
                inner = ident.lhs.strip()
                inner = inner[inner.index("(") + 1 : inner.rindex(")")]
                pairs = [("differential", read(inner).expr, read(ident.rhs).expr)]
            else:
                pairs = [("gradient", read(ident.lhs).expr, read(ident.rhs).expr)]
        except Exception:  # noqa: BLE001 - a record the reader rejects is simply not applied
            continue
        allowed = {"both": ("forward", "backward"), "none": ()}.get(ident.apply, (ident.apply,))
        for direction, lhs, rhs in pairs:
            if _trivial(lhs) or lhs == rhs:
                continue
            if ident.kind == "equality" and direction not in allowed:
                continue
            if ident.kind != "equality" and ident.apply == "none":
                continue
            if direction == "backward" and _operators(lhs) == 1 < _operators(rhs):
                # one bare operation blown up into several (kron(B, A) -> K (A x B) K): noise
                continue
            names = frozenset(n.name for n in E.walk(lhs) if type(n) is E.Symbol)
            needed = {n.name for n in E.walk(rhs) if type(n) is E.Symbol}
            if not needed <= names:
                continue
            out.append(_Pattern(ident, direction, lhs, rhs, names, _node_types(lhs), ident.wrt))
    return tuple(out)


# ---------------------------------------------------------------------------------------------
# matching
# ---------------------------------------------------------------------------------------------


class _Bindings:
    """Pattern symbol -> expression and pattern dim name -> Dim, extended functionally."""

    __slots__ = ("vars", "dims")

    def __init__(self, vars_=None, dims=None):
        self.vars = vars_ or {}
        self.dims = dims or {}

    def with_var(self, name, value):
        v = dict(self.vars)
        v[name] = value
        return _Bindings(v, self.dims)

    def with_dim(self, name, value):
        d = dict(self.dims)
        d[name] = value
        return _Bindings(self.vars, d)


def _unify_dim(pd, td, b: _Bindings):
    if pd is None or td is None:
        return b if pd is None and td is None else None
    if not pd.names:
        return b if td == pd else None
    if len(pd.names) == 1 and pd.coef == 1:
        name = pd.names[0]
        if name in b.dims:
            return b if b.dims[name] == td else None
        return b.with_dim(name, td)
    mapped = _map_dim(pd, b)
    return b if mapped is not None and mapped == td else None


def _map_dim(pd, b: _Bindings):
    if pd is None:
        return None
    out = E.Dim((), pd.coef)
    for name in pd.names:
        if name not in b.dims:
            return None
        out = out * b.dims[name]
    return out


def _is_positive(e) -> bool:
    t = type(e)
    if t is E.Const:
        return e.value > 0
    if t is E.Symbol:
        return "positive" in e.structure or ("spd" in e.structure and e.is_scalar)
    if t is E.Named:
        return _is_positive(e.body)
    if t is E.Func:
        return e.name in ("exp", "sigmoid", "softplus")
    if t is E.Mul:
        return all(_is_positive(f) for f in e.args)
    if t is E.Power:
        return _is_positive(e.args[0])
    return False


def _known_singular(t) -> bool:
    """True for square expressions that are singular whatever the values (rank one, zero)."""
    t = t.body if type(t) is E.Named else t
    if type(t) is E.Zero:
        return True
    if type(t) is E.Ones:
        return t.shape[0] != E.Dim((), 1)
    if type(t) is E.MatMul:
        # a chain through a unit axis (x y^T, A x y^T B) has rank at most one
        return any(f.shape[1] is None for f in t.args[:-1])
    if type(t) is E.Mul:
        return any(type(f) is E.Zero for f in t.args)
    return False


def _structure_ok(words, t) -> bool:
    for word in words:
        if word in ("square", "invertible"):
            if not (E.is_matrix_shape(t.shape) and t.shape[0] == t.shape[1]):
                return False
            if word == "invertible" and _known_singular(t):
                return False
        elif word == "symmetric":
            if not E.is_symmetric(t):
                return False
        elif word == "spd":
            if not E.is_spd(t):
                return False
        elif word == "diagonal":
            if not E.is_diagonal(t):
                return False
        elif word == "positive":
            if not _is_positive(t):
                return False
        elif word == "orthogonal":
            ok = (type(t) is E.Symbol and "orthogonal" in t.structure) or type(t) is E.Identity
            if not ok:
                return False
    return True


def _bind_var(p: E.Symbol, t: E.Expr, b: _Bindings):
    if t.has_differential:
        return
    for pd, td in zip(p.shape, t.shape):
        b = _unify_dim(pd, td, b)
        if b is None:
            return
    if not _structure_ok(p.structure, t):
        return
    name = p.name
    if name in b.vars:
        if b.vars[name] == t:
            yield b
        return
    yield b.with_var(name, t)


def _match(p: E.Expr, t: E.Expr, b: _Bindings):
    tp = type(p)
    if tp is E.Symbol:
        yield from _bind_var(p, t, b)
        return
    if type(t) is E.Named:
        yield from _match(p, t.body, b)
        return
    if tp is not type(t):
        return
    if tp is E.Const:
        if p == t:
            yield b
        return
    if tp is E.Identity:
        b2 = _unify_dim(p.args[0], t.args[0], b)
        if b2 is not None:
            yield b2
        return
    if tp in (E.Ones, E.Zero):
        b2 = b
        for pd, td in zip(p.shape, t.shape):
            b2 = _unify_dim(pd, td, b2) if b2 is not None else None
        if b2 is not None:
            yield b2
        return
    if tp is E.Commutation:
        b2 = _unify_dim(p.args[0], t.args[0], b)
        b2 = _unify_dim(p.args[1], t.args[1], b2) if b2 is not None else None
        if b2 is not None:
            yield b2
        return
    if tp is E.SizeOf:  # a dim used as a number (`c**n`) binds like a dim of a shape
        b2 = _unify_dim(p.args[0], t.args[0], b)
        if b2 is not None:
            yield b2
        return
    if tp is E.Func:
        if p.name == t.name:
            yield from _match(p.arg, t.arg, b)
        return
    if tp is E.MatPow:
        if p.args[1] == t.args[1]:
            yield from _match(p.args[0], t.args[0], b)
        return
    if tp in (E.Add, E.Mul):
        yield from _match_commutative(p.args, t.args, b, tp)
        return
    if tp is E.MatMul:
        yield from _match_chain(p.args, t.args, 0, 0, b)
        return
    yield from _match_seq(p.children, t.children, b)


def _match_seq(ps, ts, b):
    if len(ps) != len(ts):
        return
    if not ps:
        yield b
        return
    for b2 in _match(ps[0], ts[0], b):
        yield from _match_seq(ps[1:], ts[1:], b2)


def _combine(kind, parts):
    if len(parts) == 1:
        return parts[0]
    return E.add(*parts) if kind is E.Add else E.mul(*parts)


def _match_commutative(ps, ts, b, kind):
    """Match pattern terms to target terms in any order; one pattern symbol may take the rest."""
    if len(ts) < len(ps):
        return
    fixed = [p for p in ps if type(p) is not E.Symbol]
    free = [p for p in ps if type(p) is E.Symbol]

    def assign_fixed(i, used, b):
        if i == len(fixed):
            yield used, b
            return
        for j, t in enumerate(ts):
            if j in used:
                continue
            for b2 in _match(fixed[i], t, b):
                yield from assign_fixed(i + 1, used | {j}, b2)

    for used, b1 in assign_fixed(0, frozenset(), b):
        rest = [t for j, t in enumerate(ts) if j not in used]
        if not free:
            if not rest:
                yield b1
            continue
        if len(rest) < len(free):
            continue
        if len(rest) == len(free):
            for perm in itertools.permutations(rest):
                yield from _bind_all(free, list(perm), b1)
            continue
        # one free symbol takes several terms, the others one each
        for k, absorber in enumerate(free):
            others = free[:k] + free[k + 1 :]
            for chosen in itertools.permutations(range(len(rest)), len(others)):
                left = [t for j, t in enumerate(rest) if j not in chosen]
                try:
                    combined = _combine(kind, left)
                except Exception:  # noqa: BLE001 - shapes that do not combine do not match
                    continue
                yield from _bind_all(
                    [*others, absorber], [rest[j] for j in chosen] + [combined], b1
                )


def _bind_all(ps, ts, b):
    if not ps:
        yield b
        return
    for b2 in _bind_var(ps[0], ts[0], b):
        yield from _bind_all(ps[1:], ts[1:], b2)


def _run_transpose(run):
    """X with X.T == matmul(*run), when every factor of the run is a transpose or symmetric."""
    if not all(type(f) is E.Transpose or E.is_symmetric(f) for f in run):
        return None
    x = E.transpose(E.matmul(*run))
    return None if type(x) is E.Transpose else x


def _match_chain(ps, ts, i, j, b):
    """Match the pattern chain ps[i:] to exactly the target chain ts[j:]."""
    if i == len(ps):
        if j == len(ts):
            yield b
        return
    p = ps[i]
    room = len(ts) - j - (len(ps) - i - 1)
    if room < 1:
        return
    if type(p) is E.Symbol:
        for k in range(1, room + 1):
            run = ts[j : j + k]
            try:
                cand = run[0] if k == 1 else E.matmul(*run)
            except Exception:  # noqa: BLE001
                continue
            for b2 in _bind_var(p, cand, b):
                yield from _match_chain(ps, ts, i + 1, j + k, b2)
        return
    if type(p) is E.Transpose and type(p.args[0]) is E.Symbol:
        for b2 in _match(p, ts[j], b):
            yield from _match_chain(ps, ts, i + 1, j + 1, b2)
        for k in range(2, room + 1):
            x = _run_transpose(ts[j : j + k])
            if x is None:
                continue
            for b2 in _bind_var(p.args[0], x, b):
                yield from _match_chain(ps, ts, i + 1, j + k, b2)
        return
    for b2 in _match(p, ts[j], b):
        yield from _match_chain(ps, ts, i + 1, j + 1, b2)


# ---------------------------------------------------------------------------------------------
# building the replacement
# ---------------------------------------------------------------------------------------------


class _Unbound(Exception):
    pass


def _build(r: E.Expr, b: _Bindings) -> E.Expr:
    t = type(r)
    if t is E.Symbol:
        if r.name not in b.vars:
            raise _Unbound(r.name)
        return b.vars[r.name]
    if t is E.Differential:
        target = b.vars.get(r.symbol.name)
        if target is None:
            raise _Unbound(r.symbol.name)
        # a symbol's differential is a leaf; an expression's is a pending d(...) (chain rule)
        return E.Differential(target) if type(target) is E.Symbol else E.D(target)
    if t is E.Identity:
        d = _map_dim(r.args[0], b)
        if d is None:
            raise _Unbound("dim")
        return E.Identity(d)
    if t in (E.Ones, E.Zero):
        shape = tuple(None if d is None else _map_dim(d, b) for d in r.shape)
        if any(d is None and pd is not None for d, pd in zip(shape, r.shape)):
            raise _Unbound("dim")
        return t(shape)
    if t is E.Commutation:
        m, n = _map_dim(r.args[0], b), _map_dim(r.args[1], b)
        if m is None or n is None:
            raise _Unbound("dim")
        return E.Commutation(m, n)
    if t is E.SizeOf:
        d = _map_dim(r.args[0], b)
        if d is None:
            raise _Unbound("dim")
        return E.SizeOf(d)
    if not r.children:
        return r
    return E.rebuild_smart(r, [_build(c, b) for c in r.children])
