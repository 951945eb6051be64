"""Applying the catalogue to a user's formula: pattern matching of identity sides on subexpressions.

Each identity side is read by the formula language into a tree whose declared symbols are pattern
variables; a match binds them (and their dims) consistently, respecting shapes and structure.
"""

from __future__ import annotations

import itertools
from dataclasses import dataclass, field

from .. import expr as E
from .apply_match import (
    _Bindings,
    _build,
    _combine,
    _match,
    _match_chain,
    _match_commutative,
    _node_types,
    _Pattern,
    _Unbound,
    compiled_patterns,
)
from .apply_verify import _verified

__all__ = ["Match", "applicable", "compiled_patterns"]

_MAX_MATCHES_PER_NODE = 8
_MAX_SUBSETS = 64


# ---------------------------------------------------------------------------------------------
# results
# ---------------------------------------------------------------------------------------------


@dataclass(frozen=True)
class Match:
    """One way an identity applies to the user's expression.

    `direction` is "forward" (lhs found, replaced by rhs), "backward" (rhs found, replaced by
    lhs), "differential" (the function of a differential record found: `replacement` is its
    differential) or "gradient" (a derivative record: `replacement` is the gradient of `matched`
    with respect to the symbol `wrt`). For the two rewrite directions, `rewritten` is the whole
    expression with `matched` replaced and evaluates equal to the original.
    """

    identity: object
    direction: str
    matched: E.Expr
    replacement: E.Expr
    rewritten: E.Expr
    bindings: dict = field(compare=False)
    wrt: str | None = None

    @property
    def is_rewrite(self) -> bool:
        return self.direction in ("forward", "backward")

    @property
    def matched_text(self) -> str:
        return _text(self.matched)

    @property
    def replacement_text(self) -> str:
        return _text(self.replacement)

    @property
    def text(self) -> str:
        """The rewritten expression (rewrites), or the differential / gradient found."""
        if self.direction == "differential":
            return f"d({self.matched_text}) = {self.replacement_text}"
        if self.direction == "gradient":
            return f"gradient of {self.matched_text} in {self.wrt} = {self.replacement_text}"
        return _text(self.rewritten)

    @property
    def latex(self) -> str:
        if self.direction == "differential":
            return rf"\mathrm{{d}}\left({_latex(self.matched)}\right) = {_latex(self.replacement)}"
        if self.direction == "gradient":
            return (
                rf"\frac{{\partial}}{{\partial {self.wrt}}} {_latex(self.matched)} = "
                f"{_latex(self.replacement)}"
            )
        return _latex(self.rewritten)

    @property
    def summary(self) -> str:
        """One line for a user: which identity turns what into what."""
        arrow = {"forward": "->", "backward": "->", "differential": "d:", "gradient": "grad:"}
        return (
            f"{self.identity.id}: {self.matched_text} {arrow[self.direction]} "
            f"{self.replacement_text}"
        )

    @property
    def conditions(self) -> str:
        """The identity's conditions in words and formula text (`A and B invertible`)."""
        return self.identity.conditions_text

    def __repr__(self) -> str:
        return f"Match({self.summary!r})"


def _text(e):
    from ..printing import text

    return text(e)


def _latex(e):
    from ..printing import latex

    return latex(e)


# ---------------------------------------------------------------------------------------------
# the public function
# ---------------------------------------------------------------------------------------------


def _as_expr(expression_or_block, shapes):
    from ..language import parse_block

    x = expression_or_block
    if isinstance(x, E.Expr):
        return x
    if hasattr(x, "expr") and isinstance(x.expr, E.Expr):
        return x.expr
    if hasattr(x, "text") and isinstance(x.text, str):
        x = x.text
    if not isinstance(x, str):
        raise TypeError(
            f"applicable() takes a formula text, a parsed block or an expression, got "
            f"{type(x).__name__}"
        )
    return parse_block(x, shapes=shapes, allow_differentials=True).expr


def _subsets(kind_args, size):
    combos = itertools.combinations(range(len(kind_args)), size)
    return itertools.islice(combos, _MAX_SUBSETS)


def _candidates(pattern: _Pattern, node: E.Expr):
    """(matched expression, bindings, rebuild(replacement) -> new node) for one target node."""
    p = pattern.lhs
    tp = type(p)
    if tp in (E.Add, E.Mul) and type(node) is tp and len(node.args) > len(p.args):
        for chosen in _subsets(node.args, len(p.args)):
            part = [node.args[i] for i in chosen]
            rest = [a for i, a in enumerate(node.args) if i not in chosen]
            try:
                matched = _combine(tp, part)
            except Exception:  # noqa: BLE001
                continue
            for b in _match_commutative(p.args, tuple(part), _Bindings(), tp):

                def rebuild(repl, rest=rest):
                    return _combine(tp, [*rest, repl])

                yield matched, b, rebuild
    if tp is E.MatMul and type(node) is E.MatMul and len(node.args) > len(p.args):
        n = len(node.args)
        for s in range(n):
            for e in range(s + len(p.args), n + 1):
                if e - s == n:
                    continue
                part = node.args[s:e]
                for b in _match_chain(p.args, part, 0, 0, _Bindings()):

                    def rebuild(repl, s=s, e=e):
                        return E.matmul(*node.args[:s], repl, *node.args[e:])

                    yield E.matmul(*part), b, rebuild
    for b in _match(p, node, _Bindings()):
        yield node, b, lambda repl: repl


def applicable(expression_or_block, *, shapes=None, limit=None, verify=True) -> list[Match]:
    """Identities whose one side matches a subexpression of the expression, with the rewrite.

    `expression_or_block` is formula text (a block, or one expression with `shapes`), a parsed
    `Block`, a `Derivation` or an `Expr`. Equalities are tried in both directions; differential
    and derivative records report the differential or gradient of what they match. With
    `verify`, every rewrite is evaluated against the original at random values and dropped if
    they differ (a safety net; the matcher should never need it).

    >>> ms = applicable("A: (m, n)\\nX: (n, p)\\nB: (p, q)\\nf = vec(A @ X @ B)")
    >>> [m.text for m in ms if m.identity.id == "vec-triple-product"]
    ['kron(B.T, A) @ vec(X)']
    """
    root = _as_expr(expression_or_block, shapes)
    present = _node_types(root)
    # a definition is matched through its body, once
    nodes = [n for n in E.walk(root) if n.children and type(n) is not E.Named]
    out: list[Match] = []
    seen: set = set()
    for pattern in compiled_patterns():
        if not pattern.node_types <= present:
            continue
        for node in nodes:
            if type(pattern.lhs) is not type(node):
                continue
            found = 0
            for matched, b, rebuild in _candidates(pattern, node):
                if found >= _MAX_MATCHES_PER_NODE:
                    break
                match = _make_match(pattern, root, node, matched, b, rebuild)
                if match is None:
                    continue
                key = (
                    pattern.identity.id,
                    match.is_rewrite,
                    match.matched,
                    match.rewritten if match.is_rewrite else None,
                )
                if key in seen:
                    continue
                if verify and not _verified(match, root):
                    continue
                seen.add(key)
                out.append(match)
                found += 1
    rank = {"forward": 0, "backward": 1, "differential": 2, "gradient": 3}
    out.sort(key=lambda m: (rank[m.direction], -_size(m.matched)))
    return out[:limit] if limit else out


def _size(e: E.Expr) -> int:
    return sum(1 for _ in E.walk(e))


def _make_match(pattern, root, node, matched, b, rebuild):
    try:
        replacement = _build(pattern.rhs, b)
    except (_Unbound, Exception):  # noqa: BLE001 - a replacement that cannot be built is no match
        return None
    if pattern.direction == "gradient":
        target = b.vars.get(pattern.wrt)
        if type(target) is not E.Symbol:
            return None
        # the record's other symbols are constants: they must not depend on the variable
        if any(target.name in v.symbols for k, v in b.vars.items() if k != pattern.wrt):
            return None
        return Match(
            pattern.identity, "gradient", matched, replacement, replacement, b.vars, target.name
        )
    if pattern.direction == "differential":
        if not replacement.has_differential:
            return None
        varying = {n.symbol.name for n in E.walk(pattern.rhs) if type(n) is E.Differential}
        moved = frozenset().union(*(b.vars[n].symbols for n in varying))
        if not all(b.vars[n].symbols for n in varying):
            return None  # d of a constant is no differential worth showing
        if any(moved & v.symbols for k, v in b.vars.items() if k not in varying):
            return None
        return Match(pattern.identity, "differential", matched, replacement, replacement, b.vars)
    if replacement == matched:
        return None
    try:
        new_node = rebuild(replacement)
        rewritten = new_node if node is root else E.substitute(root, {node: new_node})
        if _text(rewritten) == _text(root):
            # the change sits inside a definition: show the expression with definitions inlined
            rewritten = E.substitute(
                E.inline_named(root), {E.inline_named(node): E.inline_named(new_node)}
            )
    except Exception:  # noqa: BLE001
        return None
    if rewritten == root:
        return None
    return Match(pattern.identity, pattern.direction, matched, replacement, rewritten, b.vars)
