"""Derivations of blocks with complex symbols (Wirtinger calculus); real blocks never come here.

Gradient convention for a real-valued target f of a complex variable Z (stated on every result
line): G = ∂f/∂Re Z + i ∂f/∂Im Z = 2 ∂f/∂Z̄, so that df = Re tr(Gᴴ dZ) and G is the direction
of steepest ascent under the inner product Re tr(Aᴴ B).
"""

from __future__ import annotations

import functools

from . import expr as E
from .calculus import kronecker_form
from .calculus import wirtinger as W
from .complex_nodes import Conj, Real, is_complex_symbol, is_hermitian_symbol
from .derivation import MAX_STEPS, Derivation, Step, SymbolInfo
from .errors import FormulaError, NotSupportedError
from .printing import symbol_latex
from .simplify import simplify

#: said wherever a gradient of a complex variable is shown
CONVENTION = (
    "gradient G = ∂f/∂Re Z + i ∂f/∂Im Z = 2 ∂f/∂conj(Z), so that df = Re tr(Gᴴ dZ) "
    "(steepest ascent under Re tr(Aᴴ B))"
)

_WORD_ORDER = ("complex", "hermitian", "hpd", "square", "invertible")


def is_complex_block(block) -> bool:
    """True when any declared symbol is complex (complex, hermitian or hpd)."""
    return any(is_complex_symbol(s) for s in block.declarations.values())


class ComplexDerivation(Derivation):
    """A derivation over complex symbols: Wirtinger derivatives, the gradient 2 ∂f/∂Z̄.

    >>> from gradwright import derive
    >>> d = derive("H: (m, n) complex\\nx: (n,) complex\\ny: (m,) complex\\n"
    ...            "f = norm(y - H @ x)**2", wrt="x")
    >>> from gradwright.printing import text
    >>> text(d.gradient())
    '-2 * (conj(H).T @ (y - H @ x))'
    """

    #: the check panel reads this: directions real and imaginary, no complex step
    is_complex = True

    def __init__(self, block, wrt, sizes=None):
        super().__init__(block, wrt, sizes)
        W.check_supported(self.expr)

    # --- description -----------------------------------------------------------------------------

    @functools.cached_property
    def symbols(self) -> dict:
        out = dict(super().symbols)
        for name, sym in self.block.declarations.items():
            info = out[name]
            words = tuple(w for w in _WORD_ORDER if w in sym.structure)
            if "hpd" in words or "hermitian" in words:
                words = tuple(w for w in words if w not in ("complex", "square", "invertible"))
            if "hpd" in words:
                words = tuple(w for w in words if w != "hermitian")
            out[name] = SymbolInfo(name, info.shape, words or info.structure, info.role)
        return out

    def field(self, name: str) -> str:
        """'complex' or 'real' for a declared or defined symbol."""
        if name in self.block.declarations:
            sym = self.block.declarations[name]
            return "complex" if is_complex_symbol(sym) else "real"
        body = self.block.definitions[name]
        return "real" if W.is_real(body) else "complex"

    def shape_table(self) -> list[dict]:
        rows = super().shape_table()
        for row in rows:
            row["field"] = self.field(row["symbol"])
        return rows

    @functools.cached_property
    def target_is_real(self) -> bool:
        """True when the structure proves the target real-valued."""
        return W.is_real(self.expr)

    @property
    def supports_complex_step(self) -> bool:
        return False  # the complex step needs a real function of real inputs

    # --- the calculus ----------------------------------------------------------------------------

    def _differential(self, vars_: tuple) -> E.Expr:
        memo = self.__dict__.setdefault("_cmemo", {})
        if vars_ not in memo:
            memo[vars_] = W.normalize(simplify(W.differential(self.expr, frozenset(vars_))))
        return memo[vars_]

    def _require_real_target(self):
        if not self.is_scalar:
            raise FormulaError(
                f"the target {self.target} is a {E.describe(self.expr)}, not a scalar: use "
                "wirtinger_derivatives(), jvp_function() or vjp_function()"
            )
        if not self.target_is_real:
            raise FormulaError(
                f"the target {self.target} is complex-valued (or not provably real): a gradient "
                "needs a real target. Write real(...), abs(...)**2 or norm(...)**2, or use "
                "wirtinger_derivatives() for the two Wirtinger derivatives"
            )

    def _raw_gradient(self, var: str, seed_is_cotangent: bool = False) -> E.Expr:
        memo = self.__dict__.setdefault("_cgrad", {})
        key = (var, seed_is_cotangent)
        if key not in memo:
            sym = self._vars[var]
            lin = self._differential((var,))
            if seed_is_cotangent:
                memo[key] = simplify(self._vjp_expr(lin, sym))
            else:
                self._require_real_target()
                memo[key] = W.normalize(simplify(W.real_gradient(lin, sym)))
        return memo[key]

    def _vjp_expr(self, lin: E.Expr, sym: E.Symbol) -> E.Expr:
        """The adjoint of dF = L(dZ) under the real inner product Re tr(Aᴴ B): conj(A) + B
        for a complex Z, where (A, B) are the bilinear parts against conj(cotangent)."""
        cot = E.Differential(E.Symbol("_cotangent", self.expr.shape, frozenset({"complex"})))
        a, b = W.wirtinger_parts(lin, sym, W.conj(cot))
        if not is_complex_symbol(sym):
            return Real(a)
        if is_hermitian_symbol(sym):
            return W.normalize(W.herm_part(W.conj(a)))
        return W.normalize(E.add(W.conj(a), b))

    def _gradient(self, var: str) -> E.Expr:
        return self._raw_gradient(var)

    def wirtinger_derivatives(self, var: str | None = None) -> tuple[E.Expr, E.Expr]:
        """(∂f/∂Z, ∂f/∂conj(Z)) of a scalar target, each arranged like Z, in the pairing
        df = tr((∂f/∂Z)ᵀ dZ) + tr((∂f/∂conj Z)ᵀ conj(dZ)). A holomorphic f has a zero
        second part; a real f has the second equal to the conjugate of the first."""
        v = self._check_var(var)
        if not self.is_scalar:
            raise FormulaError(
                f"the target {self.target} is a {E.describe(self.expr)}: use "
                "wirtinger_jacobians() for an array target"
            )
        a, b = W.wirtinger_parts(self._differential((v,)), self._vars[v], E.ONE)
        return simplify(a), simplify(b)

    def wirtinger_jacobians(self, var: str | None = None) -> tuple[E.Expr, E.Expr]:
        """(J, K) with vec(dF) = J vec(dZ) + K vec(conj dZ), in Kronecker form; a holomorphic
        map has K = 0."""
        v = self._check_var(var)
        sym = self._vars[v]
        lin = self._differential((v,))
        stand_in = W.conj_stand_in(sym)
        split = E.substitute(lin, {Conj(E.Differential(sym)): E.Differential(stand_in)})
        j = simplify(kronecker_form(split, sym))
        k = simplify(kronecker_form(split, stand_in))
        return j, k

    def jacobian(self, var: str | None = None) -> E.Expr:
        j, k = self.wirtinger_jacobians(var)
        if not E.is_zero(k) and type(k) is not E.Zero:
            raise NotSupportedError(
                "not supported yet: one Jacobian for a map that is not holomorphic; use "
                "wirtinger_jacobians() for the parts along dZ and conj(dZ)"
            )
        return j

    def _hvp_expr(self, var: str) -> E.Expr:
        memo = self.__dict__.setdefault("_chvp", {})
        if var not in memo:
            g = self._gradient(var)
            memo[var] = W.normalize(simplify(W.differential(g, frozenset([var]))))
        return memo[var]

    def stationary_point(self, var: str | None = None):
        from .calculus.wirtinger_stationary import stationary_point

        return stationary_point(self, self._check_var(var))

    # --- steps -----------------------------------------------------------------------------------

    @functools.cached_property
    def steps(self) -> list[Step]:
        wrt = frozenset(self.variables)
        lhs = r"\mathrm{d}" + symbol_latex(self.target)
        steps = [Step("differential", E.D(E.Named(self.target, self.expr)), "", lhs)]
        current = E.D(self.expr) if self.expr.symbols & wrt else E.zero_like(self.expr.shape)
        steps.append(Step("differential", current, "write d in front", lhs))
        guard = 0
        while _pending(current) and guard < MAX_STEPS:
            names: list[str] = []
            while True:
                current, rules, substantive = W.expand_once(current, wrt)
                names += [r for r in rules if r not in names]
                if substantive or not _pending(current):
                    break
            guard += 1
            steps.append(Step("differential", current, "; ".join(names), lhs))
        simple = W.normalize(simplify(current))
        if simple != current:
            steps.append(Step("differential", simple, "collect terms", lhs))
        if not self.is_scalar:
            return steps
        parts = []
        for v in self.variables:
            sym = self._vars[v]
            a, b = W.wirtinger_parts(self._differential((v,)), sym, E.ONE)
            parts.append(_pairing(simplify(a), E.Differential(sym)))
            if is_complex_symbol(sym) and not is_hermitian_symbol(sym):
                parts.append(_pairing(simplify(b), Conj(E.Differential(sym))))
        split = E.add(*parts)
        if split != steps[-1].expr:
            steps.append(
                Step(
                    "differential",
                    split,
                    "separate the parts along the differential and along its conjugate: their "
                    "coefficients are the Wirtinger derivatives",
                    lhs,
                )
            )
        if not self.target_is_real:
            return steps
        form = E.add(*(_re_pairing(self._gradient(v), self._vars[v]) for v in self.variables))
        why = (
            "the target is real, so the two parts are conjugates of each other: the "
            "differential is twice the real part of one of them"
        )
        if any(is_hermitian_symbol(self._vars[v]) for v in self.variables):
            why += " (a Hermitian variable has a Hermitian differential)"
        steps.append(Step("differential", form, why, lhs))
        for v in self.variables:
            sym = self._vars[v]
            if not is_complex_symbol(sym):
                why, head = "read off the gradient (a real variable)", _partial(self.target, v)
            elif is_hermitian_symbol(sym):
                why = (
                    f"Hermitian part, since {v} is Hermitian: the G with df = Re tr(Gᴴ d{v}) "
                    f"for every Hermitian d{v}"
                )
                head = rf"\nabla_{{{symbol_latex(v)}}} {symbol_latex(self.target)}"
            else:
                why = (
                    "read off the gradient: steepest ascent under the real inner product, "
                    "as the left-hand side says"
                )
                head = _grad_head(self.target, v)
            steps.append(Step("gradient", self._gradient(v), why, head, v))
        return steps

    def text_steps(self) -> str:
        out = []
        for step in self.steps[1:]:
            if step.kind == "gradient":
                sym = self._vars[step.var]
                lhs = (
                    f"∇{step.var} {self.target}"
                    if is_hermitian_symbol(sym)
                    else f"∂{self.target}/∂Re {step.var} + i ∂{self.target}/∂Im {step.var} "
                    f"= 2 ∂{self.target}/∂conj({step.var})"
                    if is_complex_symbol(sym)
                    else f"∂{self.target}/∂{step.var}"
                )
            else:
                lhs = f"d{self.target}"
            out.append(f"{lhs} = {step.text()}" + (f"    [{step.rule}]" if step.rule else ""))
        return "\n".join(out)

    # --- generated code --------------------------------------------------------------------------

    # the hooks of the shared builder of generated functions (function_specs.py)
    _code_dense = False  # dense Jacobians and Hessians: refused below

    @property
    def _code_has_gradients(self) -> bool:
        return self.is_scalar and self.target_is_real

    def _code_value(self) -> E.Expr:
        if self.is_scalar and self.target_is_real and W.has_complex(self.expr):
            return Real(self.expr)  # exactly real: drop the rounding-level imaginary part
        return self.expr

    def _code_vjp(self, v: str) -> E.Expr:
        return self._raw_gradient(v, True)

    def _code_doc(self, kind: str, v: str | None) -> str:
        t = self.target
        if kind == "gradient":
            return f"The gradient of {t} with respect to {v} (shaped like {v}); " + (
                CONVENTION.replace("Z", v) if is_complex_symbol(self._vars[v]) else "real."
            )
        if kind == "value_and_gradient":
            return f"The value of {t} and its gradient."
        if kind == "jvp":
            return f"d{t} along the direction d{v} (complex; conj(d{v}) is implied)."
        if kind == "vjp":
            return (
                f"The vector-Jacobian product under Re tr(Aᴴ B) with a cotangent shaped "
                f"like {t} (result shaped like {v})."
            )
        return (
            f"The Hessian of {t} over the real and imaginary parts of {v}, applied to a "
            "direction V (packed as Re + i Im, like the gradient)."
        )

    def jacobian_function(self, var: str | None = None):
        raise NotSupportedError(
            "not supported yet: dense Jacobians of complex blocks; use jvp_function() along "
            "real and imaginary directions"
        )

    def hessian_function(self, var: str | None = None):
        raise NotSupportedError(
            "not supported yet: dense Hessians of complex blocks; use hvp_function()"
        )


def _pending(e: E.Expr) -> bool:
    return any(type(n) is E.D for n in E.walk(e))


def _pairing(g: E.Expr, dx: E.Expr) -> E.Expr:
    """tr(Gᵀ dX) (bilinear) for matrices, gᵀ dx for vectors, g dx for scalars."""
    if dx.is_scalar:
        return E.mul(g, dx)
    if E.is_col(dx.shape):
        return E.matmul(E.transpose(g), dx)
    return E.trace(E.matmul(E.transpose(g), dx))


def _re_pairing(g: E.Expr, sym: E.Symbol) -> E.Expr:
    """Re tr(Gᴴ dX); for a real variable the plain pairing (G is real)."""
    dx = E.Differential(sym)
    if not is_complex_symbol(sym):
        return _pairing(g, dx)
    return Real(W.inner(g, dx))


def _partial(target: str, var: str) -> str:
    return rf"\frac{{\partial {symbol_latex(target)}}}{{\partial {symbol_latex(var)}}}"


def _grad_head(target: str, var: str) -> str:
    t, v = symbol_latex(target), symbol_latex(var)
    return (
        rf"\frac{{\partial {t}}}{{\partial \operatorname{{Re}} {v}}} + \mathrm{{i}}\,"
        rf"\frac{{\partial {t}}}{{\partial \operatorname{{Im}} {v}}} = "
        rf"2\frac{{\partial {t}}}{{\partial \overline{{{v}}}}}"
    )
