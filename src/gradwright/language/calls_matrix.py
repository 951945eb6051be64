"""Spectral functions, factorizations and matrix equations, with NumPy's and SciPy's names.

eigvalsh, cholesky (numpy.linalg); expm, logm, sqrtm, solve_sylvester,
solve_continuous_lyapunov, solve_discrete_lyapunov (scipy.linalg), with their conventions.
"""

from __future__ import annotations

from .. import expr as E
from .. import matrix_functions as M
from ..errors import NotSupportedError
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
    if not E.is_symmetric(a):
        reader.fail_node(
            "not supported yet: logm of a matrix not known to be symmetric (its derivative is "
            "implemented for symmetric positive definite arguments; declare it `spd`)",
            node.args[0],
            NotSupportedError,
        )
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
