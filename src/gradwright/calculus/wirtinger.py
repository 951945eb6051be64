"""Wirtinger (CR) calculus for complex blocks: conjugation pushed to the leaves, dZ and conj(dZ)
as independent differential leaves, rules that hold for complex arguments, and the read-off.

A differential of a complex block is bilinear-linear in two leaves per complex variable Z: dZ
and conj(dZ). The real rules table holds for complex arguments wherever the operation is
holomorphic (products, inverse, solve, det, trace, kron, exp, ...), since those rules are
polynomial identities; the non-holomorphic operations (conj, real, imag, abs, norm, logdet as
log|det|) get rules of their own here. For a real-valued f,

    df = tr(Aᵀ dZ) + tr(Bᵀ conj(dZ)),   A = ∂f/∂Z,  B = ∂f/∂conj(Z) = conj(A),
    df = Re tr(Gᴴ dZ)  with  G = 2 B = ∂f/∂Re Z + i ∂f/∂Im Z,

and G is the gradient reported (steepest ascent under the inner product Re tr(Aᴴ B)).
"""

from __future__ import annotations

from fractions import Fraction

from .. import expr as E
from ..complex_nodes import (
    Abs,
    Conj,
    Imag,
    ImagUnit,
    Real,
    is_complex_symbol,
    is_hermitian_symbol,
)
from ..errors import NotSupportedError
from .adjoint import adjoint
from .rules import RULES, Rule, rule

I_UNIT = ImagUnit()
HALF = E.Const(Fraction(1, 2))

#: entrywise functions real on the real axis and analytic off their branch cut: f(z̄) = conj f(z)
HOLOMORPHIC_FUNCS = frozenset({"exp", "log", "sqrt", "sin", "cos", "tanh"})

#: the prefix of the stand-in symbol whose differential is conj(dZ) during the read-off
CONJ_PREFIX = "_conj_"


# ---------------------------------------------------------------------------------------------
# what is complex, what is provably real
# ---------------------------------------------------------------------------------------------


def has_complex(e: E.Expr) -> bool:
    """True when e may take complex values (a complex symbol or the unit i occurs in it)."""
    for node in E.walk(e):
        t = type(node)
        if t is ImagUnit or (t is E.Symbol and is_complex_symbol(node)):
            return True
    return False


def ctranspose(e: E.Expr) -> E.Expr:
    """The conjugate transpose eᴴ."""
    return E.transpose(conj(e))


def is_hermitian(e: E.Expr) -> bool:
    """True when e is known to be Hermitian (a real symmetric matrix counts)."""
    if not E.is_matrix_shape(e.shape) or e.shape[0] != e.shape[1]:
        return False
    if not has_complex(e):
        return E.is_symmetric(e)
    t = type(e)
    if t is E.Symbol:
        return is_hermitian_symbol(e)
    if t is E.Named:
        return is_hermitian(e.body)
    if t is E.Inverse:
        return is_hermitian(e.args[0])
    if t is E.Add:
        return all(is_hermitian(a) or a.is_scalar and is_real(a) for a in e.args)
    if t is E.Mul:
        return all(is_real(f) for f in e.scalar_factors) and all(
            is_hermitian(f) for f in e.array_factors
        )
    if t is E.MatMul:
        fs = e.args
        n = len(fs)
        for i in range(n // 2):
            if fs[i] != ctranspose(fs[n - 1 - i]):
                return False
        return n % 2 == 0 or is_hermitian(fs[n // 2])
    if t is E.Transpose:
        return is_hermitian(e.args[0])
    return False


def is_hpd(e: E.Expr) -> bool:
    """True when e is known to be Hermitian positive definite."""
    t = type(e)
    if t is E.Symbol:
        return "hpd" in e.structure or ("spd" in e.structure)
    if t in (E.Inverse, E.Named, E.Transpose):
        return is_hpd(e.children[-1])
    if t is E.Identity:
        return True
    return False


def _canonical_scalar(e: E.Expr) -> str:
    """A key equal for equal scalars up to transposing a scalar chain or a trace's argument."""
    from ..simplify import simplify  # solve(A, b) as inv(A) @ b, so chains line up

    c, rest = E.split_coef(simplify(e))
    if rest is None:
        return f"{c}"
    keys = [rest.key()]
    if type(rest) is E.MatMul and rest.is_scalar:  # E.transpose keeps a scalar as it is
        keys.append(E.matmul(*(E.transpose(f) for f in reversed(rest.args))).key())
    if type(rest) is E.Trace:  # tr(ABC) = tr(BCA) = tr(CᵀBᵀAᵀ)
        a = rest.args[0]
        fs = list(a.args) if type(a) is E.MatMul else [a]
        for chain in (fs, [E.transpose(f) for f in reversed(fs)]):
            for k in range(len(chain)):
                turned = chain[k:] + chain[:k]
                keys.append(E.Trace(E.matmul(*turned) if len(turned) > 1 else turned[0]).key())
    return f"{c}*{min(keys)}"


def is_real(e: E.Expr) -> bool:
    """True when the structure proves that e is real-valued (entrywise)."""
    if not has_complex(e):
        return True
    t = type(e)
    if t in (Real, Imag, Abs, E.Norm, E.LogDet):
        return True
    if t is E.Named:
        return is_real(e.body)
    if t in (E.Add, E.Mul) and all(is_real(a) for a in e.args):
        return True
    if t in (E.Sum, E.Transpose, E.Vec, E.Diag) and is_real(e.args[0]):
        return True
    if t is E.Power and type(e.args[1]) is E.Const and e.args[1].value.denominator == 1:
        return is_real(e.args[0])
    if t is E.Func and e.name in ("exp", "sin", "cos", "tanh") and is_real(e.arg):
        return True
    if t in (E.Trace, E.Det) and is_hermitian(e.args[0]):
        return True
    if t is E.Diag and is_hermitian(e.args[0]):
        return True
    if not e.is_scalar:
        return False
    # a scalar is real when conjugation maps its terms onto themselves
    terms = e.args if t is E.Add else (e,)
    try:
        mirrored = sorted(_canonical_scalar(conj(x)) for x in terms)
    except NotSupportedError:
        return False
    return sorted(_canonical_scalar(x) for x in terms) == mirrored


# ---------------------------------------------------------------------------------------------
# conjugation, kept at the leaves
# ---------------------------------------------------------------------------------------------

_LINEAR_THROUGH = (
    E.Add, E.Mul, E.MatMul, E.Transpose, E.Trace, E.Sum, E.Vec, E.Unvec, E.Diag, E.Diagm,
    E.Kron, E.Solve, E.Inverse, E.Det, E.MatPow, E.KronContract, E.Index,
)  # fmt: skip


def conj(e: E.Expr, _memo: dict | None = None) -> E.Expr:
    """The complex conjugate of e, pushed down to the complex leaves.

    conj(Z) stays a node for a complex symbol Z, becomes Zᵀ for a Hermitian one, and real
    subexpressions are their own conjugate.
    """
    if _memo is None:
        _memo = {}
    hit = _memo.get(id(e))
    if hit is not None:
        return hit[1]
    out = _conj(e, _memo)
    _memo[id(e)] = (e, out)
    return out


def _conj(e: E.Expr, memo: dict) -> E.Expr:
    t = type(e)
    if t is Conj:
        return e.args[0]
    if t is E.D:
        return Conj(e)  # a pending differential, worked out (and conjugated) in a later step
    if t is E.Differential:
        sym = e.symbol
        if not is_complex_symbol(sym):
            return e
        return E.transpose(e) if is_hermitian_symbol(sym) else Conj(e)
    if not has_complex(e):
        return e
    if t is E.Symbol:
        return E.transpose(e) if is_hermitian_symbol(e) else Conj(e)
    if t is ImagUnit:
        return E.neg(e)
    if t in (Real, Imag, Abs, E.Norm, E.LogDet):
        return e
    if t is E.Named:
        return Conj(e)  # the definition keeps its name: conj(R)
    if t is E.Func:
        if e.name not in HOLOMORPHIC_FUNCS:
            raise NotSupportedError(f"not supported yet: {e.name} of a complex argument")
        return E.Func(e.name, conj(e.arg, memo))
    if t is E.Power:
        return E.power(conj(e.args[0], memo), conj(e.args[1], memo))
    if t in _LINEAR_THROUGH:
        return E.rebuild_smart(e, [conj(c, memo) for c in e.children])
    raise NotSupportedError(f"not supported yet: the conjugate of {type(e).__name__}")


def _fold_unit_power(e: E.Expr) -> E.Expr:
    """i**k for an integer k as ±1 or ±i."""
    k = e.args[1].value
    if k.denominator != 1:
        return e
    return (E.ONE, I_UNIT, E.Const(-1), E.neg(I_UNIT))[int(k) % 4]


def normalize(e: E.Expr) -> E.Expr:
    """Push every conj(...) to the leaves and fold powers of i."""
    memo: dict = {}

    def go(x: E.Expr) -> E.Expr:
        hit = memo.get(id(x))
        if hit is not None:
            return hit[1]
        if type(x) is E.Named or not x.children:
            out = x
        else:
            new = [go(c) for c in x.children]
            out = x if all(a is b for a, b in zip(new, x.children)) else E.rebuild_smart(x, new)
            if type(out) is Conj and type(out.args[0]) is not E.Named:
                out = conj(out.args[0])
            elif type(out) is E.Power and type(out.args[0]) is ImagUnit:
                if type(out.args[1]) is E.Const:
                    out = _fold_unit_power(out)
        memo[id(x)] = (x, out)
        return out

    return go(e)


# ---------------------------------------------------------------------------------------------
# rules of the non-holomorphic operations (used by real blocks too: conj of a real is itself)
# ---------------------------------------------------------------------------------------------

RULES[ImagUnit] = Rule("constants have zero differential", True, lambda x, d: E.ZERO)


@rule(Conj, "the differential of a conjugate is the conjugate of the differential", structural=True)
def _conj_rule(x, d):
    return conj(d(x.args[0]))


@rule(Real, "real part: half the differential plus its conjugate")
def _real_rule(x, d):
    da = d(x.args[0])
    return E.mul(HALF, E.add(da, conj(da)))


@rule(Imag, "imaginary part: the differential minus its conjugate, over 2i")
def _imag_rule(x, d):
    da = d(x.args[0])
    return E.mul(E.Const(Fraction(-1, 2)), I_UNIT, E.sub(da, conj(da)))


@rule(Abs, "modulus rule")
def _abs_rule(x, d):
    a = x.args[0]
    da = d(a)
    if E.is_zero(da):
        return E.zero_like(x.shape)
    both = E.add(E.mul(conj(a), da), E.mul(a, conj(da)))
    return E.mul(HALF, E.power(x, E.Const(-1)), both)


def inner(a: E.Expr, b: E.Expr) -> E.Expr:
    """<a, b> = sum(conj(a) * b): aᴴ b for vectors, tr(aᴴ b) for matrices."""
    if E.is_col(a.shape):
        return E.matmul(E.transpose(conj(a)), b)
    if E.is_matrix_shape(a.shape):
        return E.trace(E.matmul(E.transpose(conj(a)), b))
    return E.summation(E.mul(conj(a), b))


def _complex_norm(x, d):
    a = x.args[0]
    da = d(a)
    if E.is_zero(da):
        return E.ZERO
    t = inner(a, da)
    return E.mul(HALF, E.power(x, E.Const(-1)), E.add(t, conj(t)))


def _complex_logdet(x, d):
    a = x.args[0]
    t = E.trace(E.matmul(E.inverse(a), d(a)))
    if is_hermitian(a):
        return t  # log det is analytic near a Hermitian matrix and real on it
    return E.mul(HALF, E.add(t, conj(t)))


#: rules that replace the real ones when the argument may be complex
COMPLEX_RULES: dict = {
    E.Norm: Rule("norm rule for complex arrays", False, _complex_norm),
    E.LogDet: Rule("log-determinant rule for the log of the modulus", False, _complex_logdet),
}


def rule_for(x: E.Expr) -> Rule:
    r = COMPLEX_RULES.get(type(x))
    if r is not None and has_complex(x.args[0]):
        if type(x) is E.LogDet and is_hermitian(x.args[0]):
            return Rule("log-determinant rule", False, _complex_logdet)
        return r
    r = RULES.get(type(x))
    if r is None:
        raise NotSupportedError(f"not supported yet: the differential of {type(x).__name__}")
    return r


#: the operations worked out for complex arguments; anything else met with a complex argument
#: is refused before anything is derived
COMPLEX_OK = frozenset(
    {
        E.Symbol, E.Differential, E.Const, E.Identity, E.Ones, E.Zero, E.Add, E.Mul, E.MatMul,
        E.Transpose, E.Power, E.Func, E.Trace, E.Det, E.LogDet, E.Inverse, E.Solve, E.Kron,
        E.Vec, E.Unvec, E.Diag, E.Diagm, E.Sum, E.Norm, E.MatPow, E.Named, E.Index,
        Conj, Real, Imag, Abs, ImagUnit,
    }
)  # fmt: skip

_NAMES = {E.LogSumExp: "logsumexp", E.Softmax: "softmax"}


def check_supported(e: E.Expr) -> None:
    """Refuse, before anything is derived, the operations not worked out for complex values."""
    for node in E.walk(e):
        if not has_complex(node):
            continue
        t = type(node)
        what = None
        if t is E.Func and node.name not in HOLOMORPHIC_FUNCS:
            what = f"{node.name} of a complex argument"
        elif t is E.Power and has_complex(node.args[1]):
            what = "a complex exponent"
        elif t not in COMPLEX_OK:
            name = _NAMES.get(t, getattr(node, "name", None) or t.__name__)
            what = f"{name} of a complex argument"
        if what is not None:
            raise NotSupportedError(f"not supported yet: {what}")


# ---------------------------------------------------------------------------------------------
# driving the rules
# ---------------------------------------------------------------------------------------------


def differential(e: E.Expr, wrt) -> E.Expr:
    """The differential of e, linear in the leaves dZ and conj(dZ) of the variables in wrt.

    >>> from gradwright.language import parse_block
    >>> b = parse_block("z: (n,) complex\\nf = norm(z)**2")
    >>> from gradwright.printing import text
    >>> text(differential(b.expr, {"z"}))
    'conj(z) @ d(z) + z @ conj(d(z))'
    """
    wrt = frozenset(wrt)
    memo: dict = {}

    def d(x: E.Expr) -> E.Expr:
        if type(x) is E.Differential or not (x.symbols & wrt):
            return E.zero_like(x.shape)
        if type(x) is E.Symbol:
            return E.Differential(x)
        hit = memo.get(x)
        if hit is not None:
            return hit
        out = rule_for(x).apply(x, d)
        memo[x] = out
        return out

    return normalize(d(e))


def _pending(x: E.Expr, wrt: frozenset, pending) -> E.Expr:
    """d(x) still to be worked out; d(conj(Z)) of a variable is written conj(dZ) at once."""
    if type(x) is Conj and type(x.args[0]) is E.Symbol:
        return conj(pending(x.args[0], wrt))
    if type(x) is E.Transpose and type(x.args[0]) is Conj and type(x.args[0].args[0]) is E.Symbol:
        return E.transpose(conj(pending(x.args[0].args[0], wrt)))
    return pending(x, wrt)


def expand_once(e: E.Expr, wrt: frozenset) -> tuple[E.Expr, list[str], bool]:
    """Work out every pending d(...) by one rule, for the displayed steps."""
    from .rules import pending

    mapping = {}
    names: list[str] = []
    substantive = False
    for node in E.walk(e):
        if type(node) is E.D and node not in mapping:
            inner_ = node.args[0]
            r = rule_for(inner_)
            mapping[node] = r.apply(inner_, lambda c: _pending(c, wrt, pending))
            name = r.name
            if type(inner_) is E.Named:
                name = f"definition of {inner_.name}"
            if type(inner_) is E.Func:
                name = f"chain rule for {inner_.name}"
            structural = r.structural
            if type(inner_) is E.Mul and sum(1 for f in inner_.args if f.symbols & wrt) == 1:
                name, structural = "constant multiple", True
            substantive = substantive or not structural
            if name not in names:
                names.append(name)
    return normalize(E.substitute(e, mapping)), names, substantive


# ---------------------------------------------------------------------------------------------
# the read-off
# ---------------------------------------------------------------------------------------------


def conj_stand_in(sym: E.Symbol) -> E.Symbol:
    return E.Symbol(CONJ_PREFIX + sym.name, sym.shape, frozenset())


def wirtinger_parts(linear: E.Expr, sym: E.Symbol, seed: E.Expr) -> tuple[E.Expr, E.Expr]:
    """(A, B) with <seed, linear> = tr(Aᵀ dZ) + tr(Bᵀ conj(dZ)) in the bilinear pairing.

    For a scalar target and seed 1, A = ∂f/∂Z and B = ∂f/∂conj(Z) (Wirtinger derivatives,
    arranged like Z). A Hermitian variable has no conj(dZ) leaf (it is dZᵀ): B is zero.
    """
    stand_in = E.Differential(conj_stand_in(sym))
    mapping = {Conj(E.Differential(sym)): stand_in}
    for node in E.walk(linear):
        if type(node) is Conj and type(node.args[0]) is E.Differential:
            if node.args[0].symbol != sym:
                mapping[node] = E.zero_like(node.shape)
    lin = E.substitute(linear, mapping)
    out = adjoint(lin, seed)
    a = out.get(sym.name, E.zero_like(sym.shape))
    b = out.get(stand_in.symbol.name, E.zero_like(sym.shape))
    return normalize(a), normalize(b)


def herm_part(g: E.Expr) -> E.Expr:
    """(G + Gᴴ) / 2: the gradient in the space of Hermitian matrices."""
    if is_hermitian(g):
        return g
    return E.mul(HALF, E.add(g, ctranspose(g)))


def real_gradient(linear: E.Expr, sym: E.Symbol) -> E.Expr:
    """The gradient of a real-valued f whose differential is `linear`, in the convention
    G = ∂f/∂Re Z + i ∂f/∂Im Z = 2 ∂f/∂conj(Z) (Hermitian Z: the Hermitian part of it; real Z:
    the ordinary gradient)."""
    a, b = wirtinger_parts(linear, sym, E.ONE)
    if not is_complex_symbol(sym):
        return a if is_real(a) else Real(a)
    if is_hermitian_symbol(sym):
        return normalize(herm_part(conj(a)))
    return normalize(E.mul(E.Const(2), b))
