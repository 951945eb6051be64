"""Walking and rebuilding trees: substitution through the smart constructors, definitions
written out, sizes; a part of `expr`."""

from __future__ import annotations

from .expr_canonical import add, matmul, mul, power, transpose
from .expr_core import Add, Expr, MatMul, Mul, Named, Transpose
from .expr_elementwise import Power, Sum
from .expr_forms import diag, diagm, index, inverse, kron, solve, summation, trace, tril, unvec, vec
from .expr_structural import Diag, Diagm, Index, Inverse, Kron, Solve, Trace, Tril, Unvec, Vec

# ---------------------------------------------------------------------------------------------
# traversal helpers
# ---------------------------------------------------------------------------------------------


def substitute(e: Expr, mapping: dict) -> Expr:
    """Replace subexpressions (by equality) and rebuild through the smart constructors."""
    memo: dict = {}

    def go(x: Expr) -> Expr:
        if x in mapping:
            return mapping[x]
        if not x.children:
            return x
        hit = memo.get(id(x))
        if hit is not None:
            return hit[1]
        new_children = [go(c) for c in x.children]
        if all(a is b for a, b in zip(new_children, x.children)):
            out = x
        else:
            out = rebuild_smart(x, new_children)
        memo[id(x)] = (x, out)
        return out

    return go(e)


def rebuild_smart(x: Expr, ch: list[Expr]) -> Expr:
    """Rebuild x with new children using the canonicalizing constructors."""
    t = type(x)
    if t is Add:
        return add(*ch)
    if t is Mul:
        return mul(*ch)
    if t is MatMul:
        return matmul(*ch)
    if t is Transpose:
        return transpose(ch[0])
    if t is Power:
        return power(ch[0], ch[1])
    if t is Trace:
        return trace(ch[0])
    if t is Sum:
        return summation(ch[0])
    if t is Vec:
        return vec(ch[0])
    if t is Diag:
        return diag(ch[0])
    if t is Diagm:
        return diagm(ch[0])
    if t is Tril:
        return tril(ch[0])
    if t is Kron:
        return kron(ch[0], ch[1])
    if t is Solve:
        return solve(ch[0], ch[1])
    if t is Inverse:
        return inverse(ch[0])
    if t is Unvec:
        return unvec(ch[0], x.args[1], x.args[2])
    if t is Index:
        return index(ch[0], x.args[1], x.args[2])
    return x.rebuild(ch)


def walk(e: Expr):
    """Every node once (pre-order, deterministic), without recursion."""
    seen: set = set()
    stack = [e]
    while stack:
        x = stack.pop()
        if id(x) in seen:
            continue
        seen.add(id(x))
        yield x
        stack.extend(reversed(x.children))


def inline_named(e: Expr) -> Expr:
    """Replace every Named node by its body."""
    mapping = {x: inline_named(x.body) for x in walk(e) if type(x) is Named}
    return substitute(e, mapping) if mapping else e


def expanded_size(e: Expr, limit: int) -> int:
    """The size of e with every definition written out (linear time); capped at limit + 1."""
    memo: dict = {}
    stack: list = [(e, False)]
    while stack:
        x, done = stack.pop()
        if done:
            memo[id(x)] = min(limit + 1, 1 + sum(memo[id(c)] for c in x.children))
            continue
        if id(x) in memo:
            continue
        memo[id(x)] = 0
        stack.append((x, True))
        stack.extend((c, False) for c in x.children if id(c) not in memo)
    return memo[id(e)]
