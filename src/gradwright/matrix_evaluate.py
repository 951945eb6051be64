"""Reference evaluation of the spectral, factorization and matrix-equation nodes.

Deliberately computed another way than the generated code: Fréchet derivatives from the
block-triangular identity f([[A, E], [0, A]]) = [[f(A), L_f(A, E)], [0, f(A)]] (N. J. Higham,
Functions of Matrices, 2008, Theorem 3.6 / eq. (3.16), from memory), matrix equations through
their Kronecker systems, the Cholesky maps with explicit inverses.
"""

from __future__ import annotations

import numpy as np

from . import matrix_functions as M
from .evaluate import _Evaluator


def _sym(a):
    return 0.5 * (a + a.T)


def _phi(a):
    return np.tril(a, -1) + 0.5 * np.diag(np.diagonal(a))


def _matrix_function(name: str, a: np.ndarray) -> np.ndarray:
    import scipy.linalg

    out = getattr(scipy.linalg, name)(a)
    if np.iscomplexobj(out) and np.max(np.abs(out.imag), initial=0.0) <= 1e-9 * max(
        1.0, np.max(np.abs(out))
    ):
        out = out.real
    return out


def _frechet(name: str, a: np.ndarray, e: np.ndarray) -> np.ndarray:
    n = a.shape[0]
    block = np.block([[a, e], [np.zeros_like(a), a]])
    return _matrix_function(name, block)[:n, n:]


def _eigvalsh(self, e):
    return np.linalg.eigvalsh(self.ev(e.args[0])).reshape(-1, 1)


def _eigvalsh_jvp(self, e):
    _w, u = np.linalg.eigh(self.ev(e.args[0]))
    return np.diag(u.T @ _sym(self.ev(e.args[1])) @ u).reshape(-1, 1)


def _eigvalsh_vjp(self, e):
    _w, u = np.linalg.eigh(self.ev(e.args[0]))
    return u @ np.diag(self.ev(e.args[1])[:, 0]) @ u.T


def _cholesky(self, e):
    return np.linalg.cholesky(self.ev(e.args[0]))


def _cholesky_jvp(self, e):
    el = self.ev(e.args[0])
    inv = np.linalg.inv(el)
    return el @ _phi(inv @ _sym(self.ev(e.args[1])) @ inv.T)


def _cholesky_vjp(self, e):
    el = self.ev(e.args[0])
    inv = np.linalg.inv(el)
    return _sym(inv.T @ _phi(el.T @ self.ev(e.args[1])) @ inv)


def _matrix_function_node(self, e):
    return _matrix_function(e.args[0], self.ev(e.args[1]))


def _spectral_frechet(self, e):
    name, s, d = e.args
    return _frechet(name, self.ev(s), self.ev(d))


def _expm_frechet(self, e):
    return _frechet("expm", self.ev(e.args[0]), self.ev(e.args[1]))


def _logm_frechet(self, e):
    """∫₀¹ (t(A - I) + I)⁻¹ E (t(A - I) + I)⁻¹ dt (Higham 2008, eq. (11.10), from memory),
    by 40-point Gauss–Legendre quadrature."""
    a, d = self.ev(e.args[0]), self.ev(e.args[1])
    nodes, weights = np.polynomial.legendre.leggauss(40)
    eye = np.eye(a.shape[0])
    out = np.zeros_like(a, dtype=float)
    for t, w in zip(0.5 * (nodes + 1), 0.5 * weights):
        r = np.linalg.inv(t * (a - eye) + eye)
        out = out + w * (r @ d @ r)
    return out


def _kron_solve(op: np.ndarray, q: np.ndarray) -> np.ndarray:
    x = np.linalg.solve(op, q.reshape(-1, order="F"))
    return x.reshape(q.shape, order="F")


def _solve_sylvester(self, e):
    a, b, q = (self.ev(x) for x in e.args)
    # vec(A X + X B) = (I kron A + B^T kron I) vec(X) (Henderson and Searle, 1981)
    op = np.kron(np.eye(b.shape[0]), a) + np.kron(b.T, np.eye(a.shape[0]))
    return _kron_solve(op, q)


def _solve_continuous_lyapunov(self, e):
    a, q = (self.ev(x) for x in e.args)
    eye = np.eye(a.shape[0])
    return _kron_solve(np.kron(eye, a) + np.kron(a, eye), q)


def _solve_discrete_lyapunov(self, e):
    a, q = (self.ev(x) for x in e.args)
    # X - A X A^T = Q: (I - A kron A) vec(X) = vec(Q)
    return _kron_solve(np.eye(a.size) - np.kron(a, a), q)


for _cls, _fn in {
    M.Eigvalsh: _eigvalsh,
    M.EigvalshJvp: _eigvalsh_jvp,
    M.EigvalshVjp: _eigvalsh_vjp,
    M.Cholesky: _cholesky,
    M.CholeskyJvp: _cholesky_jvp,
    M.CholeskyVjp: _cholesky_vjp,
    M.MatrixFunction: _matrix_function_node,
    M.SpectralFrechet: _spectral_frechet,
    M.ExpmFrechet: _expm_frechet,
    M.LogmFrechet: _logm_frechet,
    M.SolveSylvester: _solve_sylvester,
    M.SolveContinuousLyapunov: _solve_continuous_lyapunov,
    M.SolveDiscreteLyapunov: _solve_discrete_lyapunov,
}.items():
    setattr(_Evaluator, f"_{_cls.__name__}", _fn)
