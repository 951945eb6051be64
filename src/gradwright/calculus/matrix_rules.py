"""Differential rules and adjoints of spectral functions, factorizations and matrix equations.

Each rule names the published result it uses. The linear maps (JVP nodes) have adjoints that are
nodes of the same family, so gradients need no Kronecker system.
"""

from __future__ import annotations

from .. import expr as E
from .. import matrix_functions as M
from ..errors import NotSupportedError
from .adjoint import _nonlinear, adjoint_rule
from .rules import rule


def _second_order(what: str):
    raise NotSupportedError(f"not supported yet: second derivatives through {what}")


def _linear_in_last(x, d, what: str, build):
    """d of a node linear in its last argument whose other arguments must stay constant."""
    *fixed, e = x.args
    for f in fixed:
        if isinstance(f, E.Expr) and not E.is_zero(d(f)):
            _second_order(what)
    de = d(e)
    if E.is_zero(de):
        return E.zero_like(x.shape)
    return build(*fixed, de)


# --- symmetric eigenvalues ------------------------------------------------------------------------


@rule(M.Eigvalsh, "eigenvalue rule dλᵢ = uᵢᵀ dS uᵢ (Magnus 1985)")
def _eigvalsh(x, d):
    s = x.args[0]
    ds = d(s)
    if E.is_zero(ds):
        return E.zero_like(x.shape)
    return M.EigvalshJvp(s, ds)


@rule(M.EigvalshJvp, "the eigenvalue derivative is linear in dS")
def _eigvalsh_jvp(x, d):
    return _linear_in_last(x, d, "eigvalsh (eigenvector derivatives)", M.EigvalshJvp)


@rule(M.EigvalshVjp, "the eigenvalue adjoint is linear")
def _eigvalsh_vjp(x, d):
    return _linear_in_last(x, d, "eigvalsh (eigenvector derivatives)", M.EigvalshVjp)


@adjoint_rule(M.EigvalshJvp)
def _adj_eigvalsh_jvp(node, g):
    s, e = node.args
    if s.has_differential:
        _nonlinear(node)
    return [(e, M.EigvalshVjp(s, g))]


@adjoint_rule(M.EigvalshVjp)
def _adj_eigvalsh_vjp(node, g):
    s, v = node.args
    if s.has_differential:
        _nonlinear(node)
    return [(v, M.EigvalshJvp(s, g))]


# --- Cholesky factor ----------------------------------------------------------------------------


@rule(M.Cholesky, "Cholesky rule dL = L Φ(L⁻¹ dS L⁻ᵀ) (Murray 2016)")
def _cholesky(x, d):
    ds = d(x.args[0])
    if E.is_zero(ds):
        return E.zero_like(x.shape)
    return M.CholeskyJvp(x, ds)


@rule(M.CholeskyJvp, "the Cholesky derivative is linear in dS")
def _cholesky_jvp(x, d):
    return _linear_in_last(x, d, "cholesky", M.CholeskyJvp)


@rule(M.CholeskyVjp, "the Cholesky adjoint is linear")
def _cholesky_vjp(x, d):
    return _linear_in_last(x, d, "cholesky", M.CholeskyVjp)


@adjoint_rule(M.CholeskyJvp)
def _adj_cholesky_jvp(node, g):
    chol, e = node.args
    if chol.has_differential:
        _nonlinear(node)
    return [(e, M.CholeskyVjp(chol, g))]


@adjoint_rule(M.CholeskyVjp)
def _adj_cholesky_vjp(node, g):
    chol, v = node.args
    if chol.has_differential:
        _nonlinear(node)
    return [(v, M.CholeskyJvp(chol, g))]


# --- matrix functions ---------------------------------------------------------------------------

_RULE_NAMES = {
    "symmetric": "Daleckii–Krein rule U (f^[1](λ) ∘ (Uᵀ dS U)) Uᵀ (Bhatia 1997, ch. V)",
    "expm": "Fréchet derivative of expm (Al-Mohy and Higham 2009)",
    "sqrtm": "square-root rule X dX + dX X = dA (Higham 2008)",
    "logm": "Fréchet derivative of logm (Higham 2008, ch. 11)",
}


def _matrix_function_rule_name(x) -> str:
    name, a = x.args
    return _RULE_NAMES["symmetric" if E.is_symmetric(a) else name]


@rule(M.MatrixFunction, _matrix_function_rule_name)
def _matrix_function(x, d):
    name, a = x.args
    da = d(a)
    if E.is_zero(da):
        return E.zero_like(x.shape)
    if E.is_symmetric(a):
        return spectral_frechet(name, a, da)
    if name == "expm":
        return M.ExpmFrechet(a, da)
    if name == "sqrtm":
        # X X = A, so X dX + dX X = dA: a Sylvester equation with both coefficients X
        return M.SolveSylvester(x, x, da)
    return M.LogmFrechet(a, da)


@rule(M.SpectralFrechet, "the Daleckii–Krein form is linear in dS")
def _spectral_frechet(x, d):
    return _linear_in_last(x, d, x.args[0], M.SpectralFrechet)


@rule(M.ExpmFrechet, "the Fréchet derivative is linear in dA")
def _expm_frechet(x, d):
    return _linear_in_last(x, d, "expm", M.ExpmFrechet)


def _identity_multiple(g: E.Expr):
    """c for g = c I (c a scalar expression), else None."""
    if type(g) is E.Identity:
        return E.ONE
    if type(g) is E.Mul and len(g.array_factors) == 1 and type(g.array_factors[0]) is E.Identity:
        return E.mul(*g.scalar_factors)
    return None


def _derivative_at(name: str, a: E.Expr, x: E.Expr) -> E.Expr:
    """f'(A) for f(A) = x: L_f(A, c I) = c f'(A), since I commutes with A."""
    if name == "expm":
        return x
    if name == "logm":
        return E.inverse(a)
    return E.mul(E.Const(E.Fraction(1, 2)), E.inverse(x))


def spectral_frechet(name: str, s: E.Expr, e: E.Expr) -> E.Expr:
    """L_f(S, E) by Daleckii–Krein, written as c f'(S) when E = c I (gradients of tr f(S))."""
    c = _identity_multiple(e)
    if c is not None:
        return E.mul(c, _derivative_at(name, s, M.MatrixFunction(name, s)))
    coef, rest = E.split_coef(e)
    if rest == s:  # E commutes with S: L_f(S, c S) = c S f'(S)
        return E.mul(E.Const(coef), E.matmul(s, _derivative_at(name, s, M.MatrixFunction(name, s))))
    return M.SpectralFrechet(name, s, e)


@adjoint_rule(M.SpectralFrechet)
def _adj_spectral_frechet(node, g):
    # f^[1](λ) is symmetric and U orthogonal, so the map is self-adjoint
    name, s, e = node.args
    if s.has_differential:
        _nonlinear(node)
    return [(e, spectral_frechet(name, s, g))]


@adjoint_rule(M.ExpmFrechet)
def _adj_expm_frechet(node, g):
    # the power series of exp has real coefficients: L(A, ·)* = L(Aᵀ, ·) (Higham 2008, §3.1)
    a, e = node.args
    if a.has_differential:
        _nonlinear(node)
    c = _identity_multiple(g)
    if c is not None:
        return [(e, E.mul(c, M.MatrixFunction("expm", E.transpose(a))))]
    return [(e, M.ExpmFrechet(E.transpose(a), g))]


@rule(M.LogmFrechet, "the Fréchet derivative is linear in dA")
def _logm_frechet(x, d):
    return _linear_in_last(x, d, "logm", M.LogmFrechet)


@adjoint_rule(M.LogmFrechet)
def _adj_logm_frechet(node, g):
    # the integral form ∫ (t(A - I) + I)⁻¹ E (t(A - I) + I)⁻¹ dt gives L(A, ·)* = L(Aᵀ, ·)
    a, e = node.args
    if a.has_differential:
        _nonlinear(node)
    c = _identity_multiple(g)
    if c is not None:
        return [(e, E.mul(c, E.inverse(E.transpose(a))))]
    return [(e, M.LogmFrechet(E.transpose(a), g))]


# --- matrix equations ---------------------------------------------------------------------------


@rule(M.SolveSylvester, "implicit differentiation of A X + X B = Q")
def _solve_sylvester(x, d):
    a, b, q = x.args
    rhs = E.sub(E.sub(d(q), E.matmul(d(a), x)), E.matmul(x, d(b)))
    if E.is_zero(rhs):
        return E.zero_like(x.shape)
    return M.SolveSylvester(a, b, rhs)


@rule(M.SolveContinuousLyapunov, "implicit differentiation of A X + X Aᵀ = Q")
def _solve_continuous_lyapunov(x, d):
    a, q = x.args
    da = d(a)
    rhs = E.sub(E.sub(d(q), E.matmul(da, x)), E.matmul(x, E.transpose(da)))
    if E.is_zero(rhs):
        return E.zero_like(x.shape)
    return M.SolveContinuousLyapunov(a, rhs)


@rule(M.SolveDiscreteLyapunov, "implicit differentiation of A X Aᵀ - X + Q = 0")
def _solve_discrete_lyapunov(x, d):
    a, q = x.args
    da = d(a)
    rhs = E.add(d(q), E.matmul(da, x, E.transpose(a)), E.matmul(a, x, E.transpose(da)))
    if E.is_zero(rhs):
        return E.zero_like(x.shape)
    return M.SolveDiscreteLyapunov(a, rhs)


def _rhs_only(node):
    if any(c.has_differential for c in node.args[:-1]):
        _nonlinear(node)


@adjoint_rule(M.SolveSylvester)
def _adj_solve_sylvester(node, g):
    # T(X) = A X + X B has the adjoint T*(Y) = Aᵀ Y + Y Bᵀ
    _rhs_only(node)
    a, b, q = node.args
    return [(q, M.SolveSylvester(E.transpose(a), E.transpose(b), g))]


@adjoint_rule(M.SolveContinuousLyapunov)
def _adj_solve_continuous_lyapunov(node, g):
    _rhs_only(node)
    a, q = node.args
    return [(q, M.SolveContinuousLyapunov(E.transpose(a), g))]


@adjoint_rule(M.SolveDiscreteLyapunov)
def _adj_solve_discrete_lyapunov(node, g):
    # T(X) = X - A X Aᵀ has the adjoint T*(Y) = Y - Aᵀ Y A
    _rhs_only(node)
    a, q = node.args
    return [(q, M.SolveDiscreteLyapunov(E.transpose(a), g))]
