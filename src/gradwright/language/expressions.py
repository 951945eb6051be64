"""Expressions: names, numbers, operators and attributes (`.T`, `.real`) read into trees,
with the bounds on their size and depth; a part of the reader."""

from __future__ import annotations

import ast
import builtins
import difflib
import keyword
import re
from fractions import Fraction

from .. import expr as E
from ..errors import FormulaError, NotSupportedError, ShapeError
from .broadcast import broadcast_all, broadcast_shapes, clash_message, internal_shape, numpy_shape
from .subscripts import subscript
from .vocabulary import (
    _BINOP_NAMES,
    _CONSTRUCT_NAMES,
    _GENERATED_MODULE_NAMES,
    _LITERAL_NAMES,
    FUNCTIONS,
    LIMITS,
    _not_in_language,
)


class Expressions:
    """Mixed into the reader: `expression(ast node)` -> Expr, through `tr` at each node."""

    # --- expressions -------------------------------------------------------------------------

    def expression(self, node):
        count = 0
        for _ in ast.walk(node):
            count += 1
            if count > LIMITS["expression_nodes"]:
                self.fail_node(
                    f"the expression has more than {LIMITS['expression_nodes']:,} parts; "
                    "split it into definitions",
                    node,
                )
        self.depth_cache: dict = {}
        try:
            return self.tr(node, 0)
        except RecursionError:
            # a safety net: the nesting limit keeps the reader well inside Python's default
            # recursion limit, but the caller's own stack (a deep notebook kernel) counts too
            pass
        self.fail_node(
            "the expression is nested too deeply to read here; split it into definitions", node
        )

    def tr(self, node, depth):
        if depth > LIMITS["nesting_depth"]:
            self.fail_node(
                f"the expression is nested more than {LIMITS['nesting_depth']} levels deep; "
                "split it into definitions",
                node,
            )
        try:
            out = self.tr_inner(node, depth + 1)
        except ShapeError as err:
            msg = str(err)
            cls = NotSupportedError if msg.startswith("not supported") else FormulaError
            self.fail_node(msg, node, cls)
        if _depth(out, self.depth_cache) > LIMITS["nesting_depth"] * 2:
            self.fail_node(
                "the definitions nest too deeply: through the names they use this expression "
                f"is more than {LIMITS['nesting_depth'] * 2} levels deep; flatten some of them",
                node,
            )
        return out

    def tr_inner(self, node, depth):
        if isinstance(node, ast.Name):
            return self.name(node)
        if isinstance(node, ast.Constant):
            v = node.value
            if (
                isinstance(v, complex)
                and v.real == 0
                and v.imag == int(v.imag)
                and self.has_complex_symbols
            ):
                from .calls_complex import imaginary_literal

                return imaginary_literal(int(v.imag))
            if isinstance(v, bool) or not isinstance(v, (int, float)):
                what = _LITERAL_NAMES.get(type(v), f"{type(v).__name__} is")
                self.fail_node(_not_in_language(what), node)
            if isinstance(v, float) and not (v == v and abs(v) != float("inf")):
                self.fail_node("the number is not finite", node)
            if isinstance(v, float):
                src = ast.get_source_segment(self.current_source(node), node) or repr(v)
                src = src.replace("_", "")
                m = re.fullmatch(r"([0-9.]*)[eE]([+-]?[0-9]+)", src)
                # the exact value of `1e-999999999` has a billion digits: bound it first
                if (
                    m
                    and (len(m.group(1)) + abs(int(m.group(2)))) * 10 // 3 > LIMITS["constant_bits"]
                ):
                    self.fail_node(
                        "the number is too large or too small to keep exactly (constants are "
                        f"limited to about {LIMITS['constant_bits'] * 3 // 10:,} digits)",
                        node,
                    )
                try:
                    out = E.Const(Fraction(src))
                except (ValueError, ZeroDivisionError):
                    out = E.Const(Fraction(v))
                self.check_constant_size(out, node)
                return out
            out = E.Const(v)
            self.check_constant_size(out, node)
            return out
        if isinstance(node, ast.UnaryOp):
            if isinstance(node.op, ast.USub):
                out = E.neg(self.tr(node.operand, depth))
                self.check_constant_size(out, node)
                return out
            if isinstance(node.op, ast.UAdd):
                return self.tr(node.operand, depth)
            what = "'not'" if isinstance(node.op, ast.Not) else "the operator ~"
            self.fail_node(f"{what} is not part of the formula language", node)
        if isinstance(node, ast.BinOp):
            return self.binop(node, depth)
        if isinstance(node, ast.Attribute):
            a = self.tr(node.value, depth)  # the leftmost problem is reported first
            if node.attr in ("real", "imag"):
                from .calls_complex import real_or_imag

                return real_or_imag(node.attr, a)
            if node.attr != "T":
                if node.attr.startswith("__"):
                    what = f"dunder attributes like .{node.attr} are"
                else:
                    what = f"attribute access .{node.attr} is"
                self.fail_attr(f"{_not_in_language(what)} (only .T, the transpose)", node)
            if a.is_scalar or E.is_vector_shape(a.shape):
                return a  # NumPy: .T of a 1-D array is the array itself
            return E.transpose(a)
        if isinstance(node, ast.Call):
            return self.call(node, depth)
        if isinstance(node, ast.Subscript):
            return subscript(self, node, depth)
        what = _CONSTRUCT_NAMES.get(type(node), f"{type(node).__name__} expressions are")
        self.fail_node(_not_in_language(what), node)

    def current_source(self, node):
        return "\n".join(self.source_lines[self.base - 1 :])

    def name(self, node):
        n = node.id
        if n in self.env:
            return self.env[n]
        if n in self.block.dims:
            return E.SizeOf(E.Dim.of(n))  # a dim in an expression is its size, as in NumPy
        if n == "pi":
            return E.Pi()
        if n in FUNCTIONS:
            self.fail_node(f"{n} is a function; call it, like {n}(A)", node)
        if not n.isascii():
            self.fail_node(
                f"unknown name {n!r}: names are written with ASCII letters, digits and '_'", node
            )
        if n.startswith("__"):
            self.fail_node(f"unknown name {n!r}: dunder names {_not_in_language('are')}", node)
        if hasattr(builtins, n) or n in _GENERATED_MODULE_NAMES or keyword.iskeyword(n):
            self.fail_node(
                f"unknown name {n!r}: Python's own names (builtins, modules) "
                f"{_not_in_language('are')}; only declared symbols and definitions are",
                node,
            )
        known = list(self.env)
        close = difflib.get_close_matches(n, known, n=1)
        hint = f"; did you mean {close[0]}?" if close else ""
        if not known:
            hint = "; declare it first, like `" + n + ": (n, k)`"
        elif not close:
            hint = f"; declare it, like `{n}: (n, k)`, before its first use"
        self.fail_node(f"unknown name {n!r}{hint}", node)

    def binop(self, node, depth):
        op = type(node.op)
        if op in _BINOP_NAMES:
            self.fail_node(
                f"the operator {_BINOP_NAMES[op]} is not part of the formula language", node
            )
        if op in (ast.Add, ast.Sub):
            # flatten left-deep chains without recursion: a + b - c + ...
            items = []
            cur = node
            while isinstance(cur, ast.BinOp) and isinstance(cur.op, (ast.Add, ast.Sub)):
                items.append((isinstance(cur.op, ast.Sub), cur.right))
                cur = cur.left
            terms_nodes = [(False, cur)] + list(reversed(items))
            # the terms are collected and summed once: adding one at a time re-collects the
            # growing sum at every step, quadratic in the number of terms
            terms = []
            widest = None  # the array term with the sum's shape so far (NumPy broadcasting)
            for negate, tnode in terms_nodes:
                t = self.tr(tnode, depth)
                if terms:
                    widest = self.check_add(
                        widest if widest is not None else terms[0], t, tnode, cur, negate
                    )
                elif not t.is_scalar:
                    widest = t
                terms.append(E.neg(t) if negate and terms else t)
            if len(terms) == 1:
                return terms[0]
            acc = E.add(*broadcast_all(terms))
            self.check_constant_size(acc, node)
            return acc
        a = self.tr(node.left, depth)
        b = self.tr(node.right, depth)
        if op is ast.Pow:
            self.check_constant_power(a, b, node)
        out = self.binop_checked(op, a, b, node)
        self.check_constant_size(out, node)
        return out

    def binop_checked(self, op, a, b, node):
        if op in (ast.Mult, ast.Div):
            if not (a.is_scalar or b.is_scalar) and a.shape != b.shape:
                if broadcast_shapes(numpy_shape(a.shape), numpy_shape(b.shape)) is None:
                    what = "multiply entrywise" if op is ast.Mult else "divide entrywise"
                    hint = " (use @ for the matrix product)" if op is ast.Mult else ""
                    self.fail_node(clash_message(what, a, b) + hint, node)
                a, b = broadcast_all([a, b])
            if op is ast.Mult:
                return E.mul(a, b)
            if isinstance(b, E.Const) and b.value == 0:
                self.fail_node("division by zero", node)
            return E.div(a, b)
        if op is ast.Pow:
            if not b.is_scalar:
                self.fail_node(
                    f"the exponent of ** must be a scalar, got a {E.describe(b)} "
                    "(entrywise powers only; use mpow(A, k) for a matrix power)",
                    node.right,
                )
            return E.power(a, b)
        if op is ast.MatMult:
            return self.matmul(a, b, node)
        self.fail_node("this operator is not part of the formula language", node)

    def check_add(self, a, b, node, left_node, negate):
        """The wider of a and b under NumPy's broadcasting, or a caret under b."""
        if b.is_scalar or a.shape == b.shape:
            return a
        if a.is_scalar:
            return b
        got = broadcast_shapes(numpy_shape(a.shape), numpy_shape(b.shape))
        if got is None:
            verb = "subtract" if negate else "add"
            self.fail_node(clash_message(verb, a, b), node)
        return (
            a
            if got == numpy_shape(a.shape)
            else b
            if got == numpy_shape(b.shape)
            else (E.Zero(internal_shape(got)))
        )

    def matmul(self, a, b, node):
        if a.is_scalar or b.is_scalar:
            self.fail_node(
                f"@ needs two arrays, got a {E.describe(a)} and a {E.describe(b)}; "
                "use * for a scalar multiple",
                node,
            )
        va, vb = E.is_vector_shape(a.shape), E.is_vector_shape(b.shape)
        left = E.transpose(a) if va else a
        if left.shape[1] != b.shape[0]:
            ia = left.shape[1]
            ib = b.shape[0]
            self.fail_node(
                f"cannot multiply {E.shape_text(a.shape)} @ {E.shape_text(b.shape)}: "
                f"inner dimensions {ia} and {ib} differ",
                node,
            )
        out = E.matmul(left, b)
        if va and not vb:
            out = E.transpose(out)  # NumPy gives a 1-D result; ours is a column
        return out


def _dag_fold(e: E.Expr, cache: dict, combine) -> int:
    """`combine(node, child values)` over the DAG below `e`, children first, without recursion.

    The cache maps id(node) -> (node, value); holding the node keeps its id from being reused.
    """
    got = cache.get(id(e))
    if got is not None:
        return got[1]
    stack = [(e, False)]
    while stack:
        node, expanded = stack.pop()
        if id(node) in cache:
            continue
        kids = node.children
        if expanded or not kids:
            cache[id(node)] = (node, combine(node, [cache[id(c)][1] for c in kids]))
            continue
        stack.append((node, True))
        stack.extend((c, False) for c in kids if id(c) not in cache)
    return cache[id(e)][1]


def _depth(e: E.Expr, cache: dict) -> int:
    return _dag_fold(e, cache, lambda node, values: 1 + max(values, default=0))
