"""The table of differential rules: one entry per operation, each with the name shown to users.

`d(expr)` is built by these rules as an expression linear in the differential leaves dX.
"""

from __future__ import annotations

from collections.abc import Callable
from fractions import Fraction
from typing import NamedTuple

from .. import expr as E
from ..errors import NotSupportedError
from .rules_entrywise import EXTRA_DERIVATIVES, RULE_NOTES

DiffFn = Callable[[E.Expr], E.Expr]


class Rule(NamedTuple):
    name: str | Callable[[E.Expr], str]  # shown beside the step
    structural: bool  # linear bookkeeping (sum, constant multiple ...), merged into the next step
    apply: Callable[[E.Expr, DiffFn], E.Expr]


RULES: dict[type, Rule] = {}
#: a node class whose rule's name depends on the node (max vs logsumexp): node -> name
RULE_NAMERS: dict[type, Callable[[E.Expr], str]] = {}


def rule(cls, name, structural=False):
    def register(fn):
        RULES[cls] = Rule(name, structural, fn)
        return fn

    return register


def _zero(x: E.Expr) -> E.Expr:
    return E.zero_like(x.shape)


# --- constants and leaves ---------------------------------------------------------------------

for _cls in (E.Const, E.Identity, E.Ones, E.Zero, E.Commutation, E.Differential):
    RULES[_cls] = Rule("constants have zero differential", True, lambda x, d: _zero(x))


@rule(E.Symbol, "differential of a variable", structural=True)
def _symbol(x, d):
    return E.Differential(x)  # the driver only reaches here for a variable


@rule(E.Named, "definition", structural=True)
def _named(x, d):
    out = d(x.body)
    # f'(body) written with the definition's name: d(tanh(u)) for H = tanh(u) is (1 - H²) du
    # (not while steps are displayed: a pending d(body) renamed d(H) would expand forever)
    if not x.body.children or has_pending(out):
        return out
    return E.substitute(out, {x.body: x})


# --- linear structure -------------------------------------------------------------------------


@rule(E.Add, "sum rule", structural=True)
def _add(x, d):
    return E.add(*(d(t) for t in x.args))


@rule(E.Transpose, "transpose is linear", structural=True)
def _transpose(x, d):
    return E.transpose(d(x.args[0]))


@rule(E.Trace, "trace is linear", structural=True)
def _trace(x, d):
    return E.trace(d(x.args[0]))


@rule(E.Sum, "sum of entries is linear", structural=True)
def _sum(x, d):
    return E.summation(d(x.args[0]))


@rule(E.Vec, "vec is linear", structural=True)
def _vec(x, d):
    return E.vec(d(x.args[0]))


@rule(E.Unvec, "unvec is linear", structural=True)
def _unvec(x, d):
    return E.unvec(d(x.args[0]), x.args[1], x.args[2])


@rule(E.Diag, "diag is linear", structural=True)
def _diag(x, d):
    return E.diag(d(x.args[0]))


@rule(E.Diagm, "diagm is linear", structural=True)
def _diagm(x, d):
    return E.diagm(d(x.args[0]))


@rule(E.Tril, "tril is linear", structural=True)
def _tril(x, d):
    return E.tril(d(x.args[0]))


# --- products ---------------------------------------------------------------------------------


def _product_rule(x, d, build):
    """d(f1 f2 ... fk) = sum_i f1 ... d(fi) ... fk, for entrywise and matrix products alike."""
    terms = []
    fs = x.args
    for i, f in enumerate(fs):
        df = d(f)
        if not E.is_zero(df):
            terms.append(build(*fs[:i], df, *fs[i + 1 :]))
    return E.add(*terms) if terms else _zero(x)


@rule(E.Mul, "product rule")
def _mul(x, d):
    return _product_rule(x, d, E.mul)


@rule(E.MatMul, "product rule")
def _matmul(x, d):
    return _product_rule(x, d, E.matmul)


@rule(E.Kron, "Kronecker product rule")
def _kron(x, d):
    a, b = x.args
    return E.add(E.kron(d(a), b), E.kron(a, d(b)))


@rule(E.KronContract, "contraction is bilinear")
def _kron_contract(x, d):
    g, other, r, c, side = x.args
    return E.add(E.KronContract(d(g), other, r, c, side), E.KronContract(g, d(other), r, c, side))


@rule(E.MatPow, "matrix power rule")
def _matpow(x, d):
    a, k = x.args
    da = d(a)

    def p(i):
        return None if i == 0 else a if i == 1 else E.MatPow(a, i)

    terms = []
    for i in range(k):
        left, right = p(i), p(k - 1 - i)
        terms.append(E.matmul(*[f for f in (left, da, right) if f is not None]))
    return E.add(*terms)


# --- powers and entrywise functions -------------------------------------------------------------


@rule(E.Power, "power rule")
def _power(x, d):
    a, k = x.args
    da, dk = d(a), d(k)
    out = []
    if not E.is_zero(da):
        out.append(E.mul(k, E.power(a, E.add(k, E.Const(-1))), da))
    if not E.is_zero(dk):
        out.append(E.mul(x, E.Func("log", a), dk))
    return E.add(*out) if out else _zero(x)


def _func_derivative(name: str, a: E.Expr, fx: E.Expr) -> E.Expr:
    if name == "exp":
        return fx
    if name == "log":
        return E.power(a, E.Const(-1))
    if name == "sqrt":
        return E.mul(E.Const(Fraction(1, 2)), E.power(fx, E.Const(-1)))
    if name == "sin":
        return E.Func("cos", a)
    if name == "cos":
        return E.neg(E.Func("sin", a))
    if name == "tanh":
        return E.sub(E.ONE, E.power(fx, E.Const(2)))
    if name == "sigmoid":
        return E.mul(fx, E.sub(E.ONE, fx))
    if name == "softplus":
        return E.Func("sigmoid", a)
    if name in EXTRA_DERIVATIVES:
        return EXTRA_DERIVATIVES[name](a, fx)
    raise NotSupportedError(f"not supported yet: the derivative of {name}")  # pragma: no cover


@rule(E.Func, "chain rule")
def _func(x, d):
    name, a = x.args
    da = d(a)
    if E.is_zero(da):
        return _zero(x)
    return E.mul(_func_derivative(name, a, x), da)


# --- matrix functions ---------------------------------------------------------------------------


@rule(E.Inverse, "inverse rule")
def _inverse(x, d):
    a = x.args[0]
    return E.neg(E.matmul(x, d(a), x))


@rule(E.Solve, "solve rule")
def _solve(x, d):
    a, b = x.args
    out = []
    db = d(b)
    if not E.is_zero(db):
        out.append(E.solve(a, db))
    da = d(a)
    if not E.is_zero(da):
        out.append(E.neg(E.solve(a, E.matmul(da, x))))
    return E.add(*out) if out else _zero(x)


@rule(E.Det, "determinant rule")
def _det(x, d):
    a = x.args[0]
    return E.mul(x, E.trace(E.matmul(E.inverse(a), d(a))))


@rule(E.LogDet, "log-determinant rule")
def _logdet(x, d):
    a = x.args[0]
    return E.trace(E.matmul(E.inverse(a), d(a)))


@rule(E.Norm, "norm rule")
def _norm(x, d):
    a = x.args[0]
    return E.mul(E.power(x, E.Const(-1)), E.summation(E.mul(a, d(a))))


@rule(E.LogSumExp, "log-sum-exp rule")
def _logsumexp(x, d):
    a = x.args[0]
    if E.is_col(a.shape):
        weights = E.Softmax(a)
    else:
        weights = E.Func("exp", E.sub(a, x))
    return E.summation(E.mul(weights, d(a)))


@rule(E.Softmax, "softmax rule")
def _softmax(x, d):
    dx = d(x.args[0])
    return E.sub(E.mul(x, dx), E.matmul(x, E.transpose(x), dx))


@rule(E.D, "differential")
def _pending(x, d):  # pragma: no cover - pending differentials are expanded, never nested
    raise NotSupportedError("not supported yet: the differential of a differential expression")


# ---------------------------------------------------------------------------------------------
# driving the table
# ---------------------------------------------------------------------------------------------


def differential(e: E.Expr, wrt) -> E.Expr:
    """The full differential of e with respect to the symbols named in wrt.

    >>> from gradwright.language import parse_block
    >>> b = parse_block("X: (n, n)\\nf = trace(X @ X)")
    >>> differential(b.expr, {"X"}).key().count("Differential")
    2
    """
    wrt = frozenset(wrt)
    memo: dict = {}

    def d(x: E.Expr) -> E.Expr:
        if type(x) is E.Differential:
            return _zero(x)
        if not (x.symbols & wrt):
            return _zero(x)
        if type(x) is E.Symbol:
            return E.Differential(x)
        hit = memo.get(x)
        if hit is not None:
            return hit
        r = RULES.get(type(x))
        if r is None:
            raise NotSupportedError(f"not supported yet: the differential of {type(x).__name__}")
        out = r.apply(x, d)
        memo[x] = out
        return out

    return d(e)


def pending(x: E.Expr, wrt: frozenset) -> E.Expr:
    """d(x) written but not yet worked out (a leaf's differential is written directly)."""
    if type(x) is E.Differential or not (x.symbols & wrt):
        return _zero(x)
    if type(x) is E.Symbol:
        return E.Differential(x)
    return E.D(x)


def expand_once(e: E.Expr, wrt: frozenset) -> tuple[E.Expr, list[str], bool]:
    """Work out every pending d(...) in e by one rule; returns (new, rule names, substantive)."""
    mapping = {}
    names: list[str] = []
    substantive = False
    for node in E.walk(e):
        if type(node) is E.D and node not in mapping:
            inner = node.args[0]
            r = RULES.get(type(inner))
            if r is None:
                raise NotSupportedError(
                    f"not supported yet: the differential of {type(inner).__name__}"
                )
            mapping[node] = r.apply(inner, lambda c: pending(c, wrt))
            name = r.name(inner) if callable(r.name) else r.name  # a name may depend on the node
            if type(inner) is E.Named:
                name = f"definition of {inner.name}"
            if type(inner) is E.Func:
                name = f"chain rule for {inner.name}{RULE_NOTES.get(inner.name, '')}"
            if type(inner) in RULE_NAMERS:
                name = RULE_NAMERS[type(inner)](inner)
            if type(inner) is E.Mul and sum(1 for f in inner.args if f.symbols & wrt) == 1:
                name = "constant multiple"
                structural = True
            else:
                structural = r.structural
            substantive = substantive or not structural
            if name not in names:
                names.append(name)
    return E.substitute(e, mapping), names, substantive


def has_pending(e: E.Expr) -> bool:
    return any(type(n) is E.D for n in E.walk(e))
