"""Runtime helpers emitted into generated modules when used (plain NumPy; SciPy only for
Cholesky factors, imported lazily on first use)."""

from __future__ import annotations

from .checks import CHECK_HELPER

HELPERS = {
    "_gw_check": CHECK_HELPER,
    "_gw_unit": """
def _gw_unit(n, i):
    # the unit vector of length n with its 1 at NumPy position i (the adjoint of x[i])
    out = np.zeros(n)
    out[i] = 1.0
    return out
""",
    "_gw_place": """
def _gw_place(g, n, lo, hi, axis):
    # zeros of length n along axis with g at positions lo:hi (the adjoint of slicing)
    g = np.asarray(g)
    axis = axis if g.ndim == 2 else 0
    shape = list(g.shape)
    shape[axis] = n
    out = np.zeros(shape, dtype=np.result_type(g.dtype, float))
    where = [slice(None)] * g.ndim
    where[axis] = slice(lo, hi)
    out[tuple(where)] = g
    return out
""",
    "_gw_finite": """
# a warning for non-finite array results (a number result is always checked): off by default,
# since the test is one BLAS call per output; `derive(..., warn_nonfinite=True)` sets it
_GW_WARN_NONFINITE = False


def _gw_finite(value, what):
    bad = np.size(value) - np.count_nonzero(np.isfinite(value))
    if bad:
        where = "" if np.ndim(value) == 0 else f" in {bad} of {np.size(value)} entries"
        warnings.warn(f"{what} is not finite (inf or nan){where}", RuntimeWarning, stacklevel=3)
    return value
""",
    "_gw_solve": """
def _gw_solve(a, b, label):
    try:
        return np.linalg.solve(a, b)
    except np.linalg.LinAlgError:
        who = label[:-2] if label.endswith(".T") and label[:-2].isidentifier() else label
        raise np.linalg.LinAlgError(
            f"{who} is singular: the formula or its derivative solves with it (inv, solve, "
            "logdet), which needs an invertible matrix"
        ) from None
""",
    "_gw_inv": """
def _gw_inv(a, label):
    try:
        return np.linalg.inv(a)
    except np.linalg.LinAlgError:
        who = label[:-2] if label.endswith(".T") and label[:-2].isidentifier() else label
        raise np.linalg.LinAlgError(
            f"{who} is singular: the formula or its derivative needs its inverse (inv, solve, "
            "det, logdet), which does not exist"
        ) from None
""",
    "_gw_logdet": """
def _gw_logdet(a, label):
    sign, value = np.linalg.slogdet(a)
    if sign == 0:
        who = label[:-2] if label.endswith(".T") and label[:-2].isidentifier() else label
        raise np.linalg.LinAlgError(
            f"{who} is singular (determinant 0): logdet needs an invertible matrix"
        )
    return value
""",
    "_gw_cho": """
def _gw_cho(a, label, declared=True):
    # cho_factor reads one triangle only: an unsymmetric input would give a silently wrong
    # answer; the tolerance is relative to the largest entry and to the precision (common
    # practice)
    tol = max(1e-8, 1e3 * np.finfo(a.dtype).eps) * max(1.0, np.max(np.abs(a), initial=0.0))
    if np.max(np.abs(a - a.T), initial=0.0) > tol:
        if declared == "gram":
            raise ValueError(f"{label} is not symmetric, but it is a Gram matrix Fᵀ M F with M spd")
        if declared:
            raise ValueError(f"{label} is declared spd but is not symmetric")
        raise ValueError(
            f"{label} is not symmetric, but it is built to be spd from the matrices declared "
            "spd: check that they are symmetric"
        )
    singular = np.linalg.LinAlgError(
        f"{label} is singular to working precision: it is a Gram matrix Fᵀ M F with M spd, and F "
        "does not have full column rank; the formula or its derivative solves with it (inv, "
        "solve, logdet)"
    )
    try:
        factor = _gw_cho_factor(a)  # (LAPACK through NumPy's OpenBLAS, or SciPy)
        if declared == "gram" and a.size:
            # psd by construction, so rounding can let a singular one through with a tiny
            # pivot: LAPACK's condition estimate from the factor (O(n^2)) decides; below
            # n * eps no digit of a solve is left (common practice)
            if not _gw_cho_rcond(factor, a) > a.shape[0] * np.finfo(a.dtype).eps:
                raise singular
        return factor
    except np.linalg.LinAlgError as err:
        if declared == "gram":  # psd by construction: only a rank-deficient B fails here
            raise singular from None
        if err is singular:
            raise
        why = "it is declared spd" if declared else "it is built to be spd from spd matrices"
        raise np.linalg.LinAlgError(f"{label} is not positive definite ({why})") from None
""",
    "_gw_lstsq": """
def _gw_lstsq(a, b, label):
    x, _res, rank, _sv = np.linalg.lstsq(a, b, rcond=None)
    if rank < min(a.shape):
        warnings.warn(
            f"{label} does not have full column rank ({rank} of {a.shape[1]}): the stationary "
            "point is not unique; this is the one of least norm",
            RuntimeWarning,
            stacklevel=3,
        )
    return x
""",
    "_gw_adjugate": """
def _gw_adjugate(a):
    \"\"\"adj(A) = det(A) inv(A); through the SVD where A is singular, where it still exists.\"\"\"
    d = np.linalg.det(a)
    if d != 0 and np.isfinite(d):
        try:
            return d * np.linalg.inv(a)
        except np.linalg.LinAlgError:
            pass
    u, s, vt = np.linalg.svd(a)
    others = np.array([np.prod(np.delete(s, i)) for i in range(s.shape[0])])
    return np.linalg.det(u) * np.linalg.det(vt) * ((vt.T * others) @ u.T)
""",
    "_gw_sigmoid": """
def _gw_sigmoid(x):
    return 0.5 * (1.0 + np.tanh(0.5 * x))
""",
    "_gw_logsumexp": """
def _gw_logsumexp(a):
    m = np.max(np.real(a))
    return m + np.log(np.sum(np.exp(a - m)))
""",
    "_gw_softmax": """
def _gw_softmax(x):
    z = np.exp(x - np.max(np.real(x)))
    return z / np.sum(z)
""",
    "_gw_commutation": """
def _gw_commutation(m, n, dtype=float):
    k = np.zeros((m * n, m * n), dtype=dtype)
    for i in range(m):
        for j in range(n):
            k[j + i * n, i + j * m] = 1.0
    return k
""",
    "_gw_kron_contract": """
def _gw_kron_contract(g, other, rows, cols, side):
    \"\"\"The adjoint of one factor of a Kronecker product (g and other are 2-D).\"\"\"
    if side == "left":
        p, q = other.shape
        return np.einsum("ikjl,kl->ij", g.reshape(rows, p, cols, q), other)
    m, n = other.shape
    return np.einsum("ikjl,ij->kl", g.reshape(m, rows, n, cols), other)
""",
}

FUNC_CODE = {
    "exp": "np.exp",
    "log": "np.log",
    "sqrt": "np.sqrt",
    "sin": "np.sin",
    "cos": "np.cos",
    "tanh": "np.tanh",
    "sigmoid": "_gw_sigmoid",
    "softplus": "np.logaddexp(0.0, {})",
}


from .lapack_runtime import LAPACK_HELPERS  # noqa: E402  (texts of the Cholesky helpers)

HELPERS.update(LAPACK_HELPERS)
