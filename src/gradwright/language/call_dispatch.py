"""Function calls: keyword and arity checks, dispatch to the registered families, and the
core functions (trace, inv, solve, kron, mpow, eye, ...); a part of the reader."""

from __future__ import annotations

import ast
import builtins
import difflib

from .. import expr as E
from ..errors import NotSupportedError
from . import stable_forms
from .expressions import _dag_fold
from .registry import CALLS
from .vocabulary import (
    _COMPLEX_FUNCTIONS,
    _CONSTRUCT_NAMES,
    _GENERATED_MODULE_NAMES,
    FUNCTIONS,
    LIMITS,
    _not_in_language,
)


class Calls:
    """Mixed into the reader: `call(ast.Call, depth)` -> Expr."""

    def call(self, node, depth):
        if not isinstance(node.func, ast.Name):
            if isinstance(node.func, ast.Attribute):
                owner = node.func.value
                if isinstance(owner, ast.Name) and owner.id in ("np", "numpy", "scipy"):
                    self.fail_node(
                        f"write {node.func.attr}(...) without the {owner.id}. prefix: the "
                        "formula language has its own functions (trace, inv, exp, ...)",
                        node.func,
                    )
                if node.func.attr == "conj" and not node.args and not node.keywords:
                    from .calls_complex import conjugate

                    return conjugate(self.tr(owner, depth))
                self.tr(owner, depth)  # the leftmost problem is reported first
                self.fail_attr(
                    f"method calls like .{node.func.attr}(...) {_not_in_language('are')}; "
                    "write functions like trace(A)",
                    node.func,
                )
            if type(node.func) in _CONSTRUCT_NAMES:
                self.fail_node(_not_in_language(_CONSTRUCT_NAMES[type(node.func)]), node.func)
            self.fail_node("only named functions can be called, like trace(A)", node.func)
        fname = node.func.id
        if fname.startswith("__"):
            self.fail_node(
                f"unknown function {fname!r}: dunder names {_not_in_language('are')}", node.func
            )
        spec = CALLS.get(fname)
        accepted = spec.keywords if spec is not None else ()
        bad_keywords = [kw for kw in node.keywords if kw.arg not in accepted]
        if bad_keywords:
            kw = bad_keywords[0]
            if accepted:
                shown = f"{kw.arg}=" if kw.arg else "**"
                self.fail_node(
                    f"{fname} takes the keyword argument{'s' if len(accepted) > 1 else ''} "
                    f"{', '.join(a + '=' for a in accepted)} only, not {shown}",
                    kw if hasattr(kw, "lineno") else kw.value,
                )
            shown = f"{kw.arg}=" if kw.arg else "**"
            self.fail_node(
                f"keyword arguments like {shown}... {_not_in_language('are')} "
                f"({fname} takes its arguments by position)",
                kw if hasattr(kw, "lineno") else kw.value,
            )
        for a in node.args:
            if isinstance(a, ast.Starred):
                self.fail_node("starred arguments are not part of the formula language", a)
        if fname == "d" and self.allow_d and "d" not in self.env:
            if len(node.args) != 1 or not isinstance(node.args[0], ast.Name):
                self.fail_node("d(...) takes one declared symbol, like d(X)", node)
            sym = self.env.get(node.args[0].id)
            if not isinstance(sym, E.Symbol):
                self.fail_node("d(...) takes a declared symbol, like d(X)", node.args[0])
            return E.Differential(sym)
        if fname not in FUNCTIONS:
            if fname in self.env:
                self.fail_node(f"{fname} is a symbol, not a function", node.func)
            close = difflib.get_close_matches(fname, list(FUNCTIONS), n=1)
            if close and close[0] in _COMPLEX_FUNCTIONS and hasattr(builtins, fname):
                close = []  # eval is no misspelt real: Python's builtins get their own message
            hint = f"; did you mean {close[0]}?" if close else ""
            if hasattr(builtins, fname) or fname in _GENERATED_MODULE_NAMES:
                hint = (
                    f": Python's builtins {_not_in_language('are')}, only its own functions "
                    "(trace, det, inv, solve, exp, ...)"
                )
            self.fail_node(f"unknown function {fname!r}{hint}", node.func)
        lo, hi = FUNCTIONS[fname]
        n = len(node.args)
        if not lo <= n <= hi:
            want = str(lo) if lo == hi else f"{lo} or {hi}" if hi == lo + 1 else f"{lo} to {hi}"
            self.fail_node(f"{fname} takes {want} argument{'s' if hi > 1 else ''}, got {n}", node)
        if spec is not None:
            args = node.args if spec.raw else [self.tr(a, depth) for a in node.args]
            return spec.builder(self, node, args, {kw.arg: kw.value for kw in node.keywords})
        if fname in ("eye", "ones", "zeros", "commutation"):
            dims = [self.dim_arg(a) for a in node.args]
            if fname == "eye":
                return E.Identity(dims[0])
            if fname == "commutation":
                return E.Commutation(dims[0], dims[1])
            shape = (dims[0], dims[1] if len(dims) > 1 else None)
            return E.Ones(shape) if fname == "ones" else E.Zero(shape)
        if fname == "mpow":
            base = self.tr(node.args[0], depth)
            k = node.args[1]
            if (
                not (
                    isinstance(k, ast.Constant)
                    and isinstance(k.value, int)
                    and not isinstance(k.value, bool)
                )
                or k.value < 0
            ):
                self.fail_node("mpow(A, k) needs k to be a non-negative integer literal", k)
            if k.value > LIMITS["matrix_power"]:
                self.fail_node(
                    f"mpow(A, k): k larger than {LIMITS['matrix_power']} is not supported yet",
                    k,
                    NotSupportedError,
                )
            E.MatPow(base, k.value)  # shape check
            inner = _power_degree(base, self.power_cache)
            if inner * k.value > LIMITS["matrix_power"]:
                # the differential of mpow(B, k) has k terms, each holding dB: nested powers
                # multiply, and mpow(mpow(A, 64), 64) would be 4,096 terms of A-chains
                self.fail_node(
                    f"not supported yet: this is a matrix power of degree {inner * k.value:,} "
                    f"through nested mpow (at most {LIMITS['matrix_power']})",
                    node,
                    NotSupportedError,
                )
            if k.value == 0:
                return E.Identity(base.shape[0])
            if k.value == 1:
                return base
            return E.MatPow(base, k.value)
        args = [self.tr(a, depth) for a in node.args]
        a = args[0]
        if fname in E.ELEMENTWISE:
            return stable_forms.entrywise(fname, a)
        if fname == "trace":
            E.Trace(a)
            return E.trace(a)
        if fname == "det":
            return E.Det(a)
        if fname == "logdet":
            return E.LogDet(a)
        if fname == "inv":
            E.Inverse(a)
            return E.inverse(a)
        if fname == "solve":
            E.Solve(a, args[1])
            return E.solve(a, args[1])
        if fname == "kron":
            b = args[1]
            if a.is_scalar or b.is_scalar:
                self.fail_node("kron needs two arrays; use * for a scalar multiple", node)
            if E.is_vector_shape(a.shape) != E.is_vector_shape(b.shape):
                self.fail_node(
                    f"not supported yet: kron of a {E.describe(a)} and a {E.describe(b)} "
                    "(use two matrices or two vectors)",
                    node,
                    NotSupportedError,
                )
            return E.kron(a, b)
        if fname == "vec":
            if a.is_scalar:
                self.fail_node("vec needs an array, got a scalar", node)
            return E.vec(a)
        if fname == "diag":
            if E.is_vector_shape(a.shape):
                self.fail_node(
                    "diag takes a square matrix and gives its diagonal; use diagm(x) for the "
                    "diagonal matrix of a vector",
                    node,
                )
            E.Diag(a)
            return E.diag(a)
        if fname == "diagm":
            E.Diagm(a)
            return E.diagm(a)
        if fname == "outer":
            b = args[1]
            if not (E.is_vector_shape(a.shape) and E.is_vector_shape(b.shape)):
                self.fail_node(
                    f"outer needs two vectors, got a {E.describe(a)} and a {E.describe(b)}",
                    node,
                )
            return E.matmul(a, E.transpose(b))
        raise AssertionError(fname)  # pragma: no cover

    def dim_arg(self, node):
        if (
            isinstance(node, ast.Constant)
            and isinstance(node.value, int)
            and not isinstance(node.value, bool)
        ):
            if node.value <= 0:
                self.fail_node(f"dims must be positive, got {node.value}", node)
            if node.value.bit_length() > 62:
                self.fail_node("the dim is too large", node)
            return E.Dim.of(node.value)
        if isinstance(node, ast.Name):
            if node.id in self.block.dims:
                return E.Dim.of(node.id)
            if node.id in self.env:
                self.fail_node(
                    f"{node.id} is a symbol; eye/ones/zeros take dims (names used in shapes) "
                    "or integers",
                    node,
                )
            self.fail_node(f"unknown dim {node.id!r}: it is not used in any declared shape", node)
        if isinstance(node, ast.BinOp) and isinstance(node.op, ast.Mult):
            return self.dim_arg(node.left) * self.dim_arg(node.right)  # eye(n*n), ones(m*n)
        self.fail_node("a dim is a name used in a declared shape, or a positive integer", node)


def _power_degree(e: E.Expr, cache: dict) -> int:
    """The largest product of mpow exponents along a path of `e` (through definitions)."""

    def combine(node, values):
        d = max(values, default=1)
        if type(node) is E.MatPow and isinstance(node.args[1], int):
            d *= node.args[1]
        return d

    return _dag_fold(e, cache, combine)
