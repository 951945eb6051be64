"""Spectral functions, factorizations and matrix equations, with NumPy's and SciPy's names.

eigvalsh, cholesky (numpy.linalg); expm, logm, sqrtm, solve_sylvester,
solve_continuous_lyapunov, solve_discrete_lyapunov (scipy.linalg), with their conventions.
"""

from __future__ import annotations

from .. import expr as E
from .. import matrix_functions as M
from .registry import register


def _square(reader, node, a: E.Expr, name: str) -> None:
    E._need_square(a, name)  # a ShapeError gets its caret from the reader


def _symmetric(reader, node, a: E.Expr, name: str, why: str) -> None:
    _square(reader, node, a, name)
    if not E.is_symmetric(a):
        reader.fail_node(
            f"{name} needs a matrix known to be symmetric ({why}); declare it `symmetric` or "
            f"`spd`, or build it symmetric (like X.T @ X)",
            node.args[0],
        )


@register("eigvalsh", 1, 1)
def _eigvalsh(reader, node, args, keywords):
    (s,) = args
    _symmetric(reader, node, s, "eigvalsh", "NumPy's eigvalsh reads one triangle only")
    return M.Eigvalsh(s)


@register("cholesky", 1, 1)
def _cholesky(reader, node, args, keywords):
    (s,) = args
    _symmetric(reader, node, s, "cholesky", "NumPy's cholesky reads one triangle only")
    return M.Cholesky(s)


@register("expm", 1, 1)
def _expm(reader, node, args, keywords):
    (a,) = args
    _square(reader, node, a, "expm")
    return M.MatrixFunction("expm", a)


@register("sqrtm", 1, 1)
def _sqrtm(reader, node, args, keywords):
    (a,) = args
    _square(reader, node, a, "sqrtm")
    return M.MatrixFunction("sqrtm", a)


@register("logm", 1, 1)
def _logm(reader, node, args, keywords):
    (a,) = args
    _square(reader, node, a, "logm")
    return M.MatrixFunction("logm", a)


@register("solve_sylvester", 3, 3)
def _solve_sylvester(reader, node, args, keywords):
    return M.SolveSylvester(*args)


@register("solve_continuous_lyapunov", 2, 2)
def _solve_continuous_lyapunov(reader, node, args, keywords):
    return M.SolveContinuousLyapunov(*args)


@register("solve_discrete_lyapunov", 2, 2)
def _solve_discrete_lyapunov(reader, node, args, keywords):
    return M.SolveDiscreteLyapunov(*args)


# --- the linear maps gradients are written with, so that every printed gradient reads back -------


@register("eigvalsh_jvp", 2, 2)
def _eigvalsh_jvp(reader, node, args, keywords):
    s, e = args
    _symmetric(reader, node, s, "eigvalsh_jvp", "it uses the eigenvectors of a symmetric matrix")
    return M.EigvalshJvp(s, e)


@register("eigvalsh_vjp", 2, 2)
def _eigvalsh_vjp(reader, node, args, keywords):
    s, g = args
    _symmetric(reader, node, s, "eigvalsh_vjp", "it uses the eigenvectors of a symmetric matrix")
    return M.EigvalshVjp(s, g)


@register("cholesky_jvp", 2, 2)
def _cholesky_jvp(reader, node, args, keywords):
    _square(reader, node, args[0], "cholesky_jvp")
    return M.CholeskyJvp(*args)


@register("cholesky_vjp", 2, 2)
def _cholesky_vjp(reader, node, args, keywords):
    _square(reader, node, args[0], "cholesky_vjp")
    return M.CholeskyVjp(*args)


def _frechet(name: str):
    def build(reader, node, args, keywords):
        a, e = args
        _square(reader, node, a, f"{name}_frechet")
        if E.is_symmetric(a):
            return M.SpectralFrechet(name, a, e)
        if name == "expm":
            return M.ExpmFrechet(a, e)
        if name == "logm":
            return M.LogmFrechet(a, e)
        x = M.MatrixFunction("sqrtm", a)
        return M.SolveSylvester(x, x, e)  # X L + L X = E (Higham 2008, §6.1)

    return build


for _name in M.MATRIX_FUNCTIONS:
    register(f"{_name}_frechet", 2, 2)(_frechet(_name))
