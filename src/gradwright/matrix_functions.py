"""Nodes of spectral functions, factorizations and matrix equations, and their linearizations.

The user-facing nodes (eigvalsh, cholesky, expm/logm/sqrtm, the Sylvester and Lyapunov solves)
and the linear maps their differentials are built from (each linear in its last argument).
"""

from __future__ import annotations

from .errors import ShapeError
from .expr import (
    Expr,
    Identity,
    _need_square,
    add,
    describe,
    inverse,
    is_spd,
    is_symmetric,
    kron,
    sub,
    transpose,
)

#: the matrix functions of the language, by their SciPy names
MATRIX_FUNCTIONS = ("expm", "logm", "sqrtm")


def _same_square(a: Expr, e: Expr, what: str):
    if e.shape != a.shape:
        raise ShapeError(f"{what} needs a direction shaped like {describe(a)}, got {describe(e)}")


# --- symmetric eigenvalues ------------------------------------------------------------------------


class Eigvalsh(Expr):
    """eigvalsh(S): the eigenvalues of a symmetric matrix in ascending order (NumPy's order)."""

    __slots__ = ()

    def _infer_shape(self):
        _need_square(self.args[0], "eigvalsh")
        return (self.args[0].shape[0], None)


class EigvalshJvp(Expr):
    """diag(Uᵀ E U) with U the eigenvectors of S (dλᵢ = uᵢᵀ dS uᵢ); linear in E."""

    __slots__ = ()

    def _infer_shape(self):
        s, e = self.args
        _need_square(s, "eigvalsh")
        _same_square(s, e, "the eigenvalue derivative")
        return (s.shape[0], None)


class EigvalshVjp(Expr):
    """U Diag(g) Uᵀ with U the eigenvectors of S: the adjoint of EigvalshJvp; linear in g."""

    __slots__ = ()

    def _infer_shape(self):
        s, g = self.args
        _need_square(s, "eigvalsh")
        if g.shape != (s.shape[0], None):
            raise ShapeError(f"the eigenvalue adjoint needs a ({s.shape[0]},) vector")
        return s.shape

    def known_symmetric(self) -> bool:
        return True


# --- Cholesky factor ----------------------------------------------------------------------------


class Cholesky(Expr):
    """cholesky(S): the lower-triangular L with L Lᵀ = S (NumPy's convention)."""

    __slots__ = ()

    def _infer_shape(self):
        _need_square(self.args[0], "cholesky")
        return self.args[0].shape


class CholeskyJvp(Expr):
    """L Φ(L⁻¹ sym(E) L⁻ᵀ), Φ the lower triangle with half the diagonal; args (L, E)."""

    __slots__ = ()

    def _infer_shape(self):
        chol, e = self.args
        _same_square(chol, e, "the Cholesky derivative")
        return chol.shape


class CholeskyVjp(Expr):
    """sym(L⁻ᵀ Φ(Lᵀ G) L⁻¹): the adjoint of CholeskyJvp (Murray 2016); args (L, G)."""

    __slots__ = ()

    def _infer_shape(self):
        chol, g = self.args
        _same_square(chol, g, "the Cholesky adjoint")
        return chol.shape

    def known_symmetric(self) -> bool:
        return True


class TrilHalf(Expr):
    """Φ(X): the strict lower triangle of X plus half its diagonal (Murray 2016); linear."""

    __slots__ = ()

    def _infer_shape(self):
        _need_square(self.args[0], "tril_half")
        return self.args[0].shape


class EigvalshVjpJvp(Expr):
    """The derivative of U Diag(g) Uᵀ along E for fixed g: U (g^[1] ∘ (Uᵀ E U)) Uᵀ with
    g^[1]ᵢⱼ = (gᵢ - gⱼ)/(λᵢ - λⱼ) (0 where i = j); args (S, g, E), linear in E."""

    __slots__ = ()

    def _infer_shape(self):
        s, g, e = self.args
        _need_square(s, "eigvalsh")
        if g.shape != (s.shape[0], None):
            raise ShapeError(f"the eigenvalue adjoint needs a ({s.shape[0]},) vector")
        _same_square(s, e, "the eigenvalue second derivative")
        return s.shape

    def known_symmetric(self) -> bool:
        return True


# --- matrix functions ---------------------------------------------------------------------------


class MatrixFunction(Expr):
    """expm, logm or sqrtm of a square matrix: MatrixFunction('expm', A)."""

    __slots__ = ()

    def _infer_shape(self):
        name, a = self.args
        if name not in MATRIX_FUNCTIONS:
            raise ShapeError(f"unknown matrix function {name}")
        _need_square(a, name)
        return a.shape

    @property
    def name(self) -> str:
        return self.args[0]

    def known_symmetric(self) -> bool:
        return is_symmetric(self.args[1])

    def known_spd(self) -> bool:
        a = self.args[1]
        return (self.args[0] == "expm" and is_symmetric(a)) or (
            self.args[0] == "sqrtm" and is_spd(a)
        )


class SpectralFrechet(Expr):
    """The Daleckii–Krein form U (f^[1](λ) ∘ (Uᵀ E U)) Uᵀ of a function of a symmetric S.

    args (name, S, E); the Fréchet derivative of f at S in the direction E, linear in E.
    """

    __slots__ = ()

    def _infer_shape(self):
        name, s, e = self.args
        if name not in MATRIX_FUNCTIONS:
            raise ShapeError(f"unknown matrix function {name}")
        _need_square(s, name)
        _same_square(s, e, f"the derivative of {name}")
        return s.shape

    def known_symmetric(self) -> bool:
        return is_symmetric(self.args[1]) and is_symmetric(self.args[2])


class ExpmFrechet(Expr):
    """The Fréchet derivative of expm at a square A in the direction E; args (A, E)."""

    __slots__ = ()

    def _infer_shape(self):
        a, e = self.args
        _need_square(a, "expm")
        _same_square(a, e, "the derivative of expm")
        return a.shape


class ExpmFrechet2(Expr):
    """The second Fréchet derivative of expm at A along E1 and E2; args (A, E1, E2)."""

    __slots__ = ()

    def _infer_shape(self):
        a, e1, e2 = self.args
        _need_square(a, "expm")
        _same_square(a, e1, "the second derivative of expm")
        _same_square(a, e2, "the second derivative of expm")
        return a.shape


class LogmFrechet(Expr):
    """The Fréchet derivative of the principal logm at a square A along E; args (A, E)."""

    __slots__ = ()

    def _infer_shape(self):
        a, e = self.args
        _need_square(a, "logm")
        _same_square(a, e, "the derivative of logm")
        return a.shape


# --- matrix equations ---------------------------------------------------------------------------


def _matrix_rhs(q: Expr, what: str):
    if not (q.shape[0] is not None and q.shape[1] is not None):
        raise ShapeError(f"{what} needs a matrix right-hand side, got a {describe(q)}")


class SolveSylvester(Expr):
    """X with A X + X B = Q (scipy.linalg.solve_sylvester); linear in Q."""

    __slots__ = ()

    def _infer_shape(self):
        a, b, q = self.args
        _need_square(a, "solve_sylvester")
        _need_square(b, "solve_sylvester")
        _matrix_rhs(q, "solve_sylvester")
        if q.shape != (a.shape[0], b.shape[0]):
            raise ShapeError(
                f"solve_sylvester(A, B, Q) needs Q of shape ({a.shape[0]}, {b.shape[0]}) for a "
                f"{describe(a)} and a {describe(b)}, got a {describe(q)}"
            )
        return q.shape

    def kronecker_operator(self) -> Expr:
        """vec X = (I ⊗ A + Bᵀ ⊗ I)⁻¹ vec Q (Henderson and Searle, 1981)."""
        a, b, _q = self.args
        return inverse(add(kron(Identity(b.shape[0]), a), kron(transpose(b), Identity(a.shape[0]))))


def _lyapunov_shape(a: Expr, q: Expr, name: str):
    """A square A and a right-hand side Q shaped like it."""
    _need_square(a, name)
    _matrix_rhs(q, name)
    if q.shape != a.shape:
        raise ShapeError(
            f"{name}(A, Q) needs Q shaped like A, got a {describe(a)} and a {describe(q)}"
        )
    return q.shape


class SolveContinuousLyapunov(Expr):
    """X with A X + X Aᵀ = Q (scipy.linalg.solve_continuous_lyapunov); linear in Q."""

    __slots__ = ()

    def _infer_shape(self):
        return _lyapunov_shape(*self.args, "solve_continuous_lyapunov")

    def known_symmetric(self) -> bool:
        return is_symmetric(self.args[1])

    def kronecker_operator(self) -> Expr:
        """vec X = (I ⊗ A + A ⊗ I)⁻¹ vec Q."""
        a = self.args[0]
        eye = Identity(a.shape[0])
        return inverse(add(kron(eye, a), kron(a, eye)))


class SolveDiscreteLyapunov(Expr):
    """X with A X Aᵀ - X + Q = 0 (scipy.linalg.solve_discrete_lyapunov); linear in Q."""

    __slots__ = ()

    def _infer_shape(self):
        return _lyapunov_shape(*self.args, "solve_discrete_lyapunov")

    def known_symmetric(self) -> bool:
        return is_symmetric(self.args[1])

    def kronecker_operator(self) -> Expr:
        """vec X = (I - A ⊗ A)⁻¹ vec Q."""
        a = self.args[0]
        return inverse(sub(Identity(a.shape[0] * a.shape[0]), kron(a, a)))


NODES = (
    Eigvalsh, EigvalshJvp, EigvalshVjp, EigvalshVjpJvp, Cholesky, CholeskyJvp, CholeskyVjp,
    TrilHalf, MatrixFunction, SpectralFrechet, ExpmFrechet, ExpmFrechet2, LogmFrechet,
    SolveSylvester, SolveContinuousLyapunov, SolveDiscreteLyapunov,
)  # fmt: skip

__all__ = [c.__name__ for c in NODES] + ["MATRIX_FUNCTIONS", "NODES"]
