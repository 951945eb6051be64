"""Runtime helpers that generated code calls for spectral functions, factorizations and matrix
equations: source text emitted into the generated module when used (NumPy; SciPy imported there
on first use).
"""

from __future__ import annotations

_SYMMETRIC_CHECK = """
def _gw_symmetric(a, label, what):
    # NumPy's eigh and cholesky read one triangle only: an unsymmetric input would give a silently
    # wrong answer; the tolerance is relative to the largest entry (common practice)
    if np.max(np.abs(a - a.T), initial=0.0) > 1e-8 * max(1.0, np.max(np.abs(a), initial=0.0)):
        raise ValueError(f"{label} is not symmetric, but {what} needs a symmetric matrix")
    return a
"""

_EIGH = """
def _gw_eigh(a, label, what):
    w, u = np.linalg.eigh(_gw_symmetric(a, label, what))
    return w, u


def _gw_close_pairs(w):
    \"\"\"Index pairs of adjacent eigenvalues equal to about half the working precision.\"\"\"
    # sqrt(eps) relative to the spectrum's scale marks "numerically repeated" (common practice)
    tol = 1.5e-8 * max(1.0, np.max(np.abs(w), initial=0.0))
    return [(i, i + 1) for i in range(w.shape[0] - 1) if w[i + 1] - w[i] <= tol]
"""

HELPERS = {
    "_gw_symmetric": _SYMMETRIC_CHECK,
    "_gw_eigh": _EIGH,
    "_gw_eigvalsh": """
def _gw_eigvalsh(a, label):
    return np.linalg.eigvalsh(_gw_symmetric(a, label, "eigvalsh"))
""",
    "_gw_eigvalsh_jvp": """
def _gw_eigvalsh_jvp(a, e, label):
    \"\"\"d eigvalsh(S)[i] = u_i^T dS u_i (Magnus 1985), for simple eigenvalues.\"\"\"
    w, u = _gw_eigh(a, label, "eigvalsh")
    pairs = _gw_close_pairs(w)
    if pairs:
        i, j = pairs[0]
        warnings.warn(
            f"eigenvalues {i} and {j} of {label} are numerically repeated ({w[i]:.6g}): the "
            "derivative of an individual eigenvalue does not exist there",
            RuntimeWarning,
            stacklevel=3,
        )
    return np.sum(u * ((0.5 * (e + e.T)) @ u), axis=0)
""",
    "_gw_eigvalsh_vjp": """
def _gw_eigvalsh_vjp(a, g, label):
    \"\"\"U Diag(g) U^T: the gradient of a function of eigvalsh(S) with weights g.\"\"\"
    w, u = _gw_eigh(a, label, "eigvalsh")
    # at a repeated eigenvalue the gradient exists only when the target weighs the repeated
    # eigenvalues alike (as sums and spectral functions do)
    scale = max(1.0, np.max(np.abs(g), initial=0.0))
    for i, j in _gw_close_pairs(w):
        if abs(g[i] - g[j]) > 1e-6 * scale:
            warnings.warn(
                f"eigenvalues {i} and {j} of {label} are numerically repeated ({w[i]:.6g}) and "
                "the target weighs them differently: its derivative does not exist there",
                RuntimeWarning,
                stacklevel=3,
            )
            break
    return (u * g) @ u.T
""",
    "_gw_cholesky": """
def _gw_cholesky(a, label):
    try:
        return np.linalg.cholesky(_gw_symmetric(a, label, "cholesky"))
    except np.linalg.LinAlgError:
        raise np.linalg.LinAlgError(
            f"{label} is not positive definite: cholesky needs an spd matrix"
        ) from None
""",
    "_gw_cholesky_jvp": """
def _gw_cholesky_jvp(l, e):
    \"\"\"dL = L Phi(L^-1 dS L^-T), Phi: lower triangle, half the diagonal (Murray 2016).\"\"\"
    from scipy.linalg import solve_triangular

    es = 0.5 * (e + e.T)
    p = solve_triangular(l, solve_triangular(l, es, lower=True).T, lower=True)
    return l @ (np.tril(p, -1) + 0.5 * np.diag(np.diagonal(p)))
""",
    "_gw_cholesky_vjp": """
def _gw_cholesky_vjp(l, g):
    \"\"\"sym(L^-T Phi(L^T G) L^-1): the reverse mode of the Cholesky factor (Murray 2016).\"\"\"
    from scipy.linalg import solve_triangular

    p = l.T @ g
    p = np.tril(p, -1) + 0.5 * np.diag(np.diagonal(p))
    y = solve_triangular(l, p, lower=True, trans="T")
    m = solve_triangular(l, y.T, lower=True, trans="T").T
    return 0.5 * (m + m.T)
""",
    "_gw_matrix_function": """
def _gw_matrix_function(name, a, label, symmetric):
    if symmetric:
        w, u = _gw_eigh(a, label, name)
        if name == "expm":
            return (u * np.exp(w)) @ u.T
        if w[0] <= 0 and (name == "logm" or w[0] < 0):
            raise ValueError(
                f"{label} is not positive definite (smallest eigenvalue {w[0]:.6g}): {name} of "
                "it is not a real matrix"
            )
        return (u * (np.log(w) if name == "logm" else np.sqrt(w))) @ u.T
    import scipy.linalg

    out = getattr(scipy.linalg, name)(a)
    if np.iscomplexobj(out):
        if np.max(np.abs(out.imag), initial=0.0) > 1e-10 * max(1.0, np.max(np.abs(out))):
            raise ValueError(
                f"{name} of {label} is not a real matrix (it has eigenvalues on the negative "
                "real axis)"
            )
        out = out.real
    return out
""",
    "_gw_spectral_frechet": """
def _gw_ratio_near_zero(x, f, series):
    small = np.abs(x) < 1e-4
    safe = np.where(small, 0.5, x)
    return np.where(small, series(x), f(safe) / safe)


def _gw_spectral_frechet(name, a, e, label):
    \"\"\"U (f^[1](lambda) o (U^T E U)) U^T (Daleckii and Krein; Bhatia 1997, ch. V).\"\"\"
    w, u = _gw_eigh(a, label, name)
    li, lj = w[:, None], w[None, :]
    # first divided differences, written so that close eigenvalues lose no digits
    if name == "expm":
        half = 0.5 * (li - lj)
        sinhc = _gw_ratio_near_zero(half, np.sinh, lambda x: 1.0 + x * x / 6.0)
        f1 = np.exp(0.5 * (li + lj)) * sinhc
    elif w[0] <= 0:
        raise ValueError(
            f"{label} is not positive definite (smallest eigenvalue {w[0]:.6g}): the "
            f"derivative of {name} needs positive eigenvalues"
        )
    elif name == "logm":
        s = li + lj
        z = (li - lj) / s
        f1 = (2.0 / s) * _gw_ratio_near_zero(z, np.arctanh, lambda x: 1.0 + x * x / 3.0)
    else:
        r = np.sqrt(w)
        f1 = 1.0 / (r[:, None] + r[None, :])
    return u @ (f1 * (u.T @ e @ u)) @ u.T
""",
    "_gw_expm_frechet": """
def _gw_expm_frechet(a, e):
    \"\"\"The Frechet derivative of expm at A along E (Al-Mohy and Higham 2009).\"\"\"
    from scipy.linalg import expm_frechet

    return expm_frechet(a, e, compute_expm=False)
""",
    "_gw_logm_frechet": """
def _gw_logm_frechet(a, e):
    \"\"\"The Frechet derivative of the principal logm at A along E: the upper-right block of
    logm([[A, E], [0, A]]) (Higham, Functions of Matrices, 2008, eq. (3.16)).\"\"\"
    from scipy.linalg import logm

    n = a.shape[0]
    out = logm(np.block([[a, e], [np.zeros_like(a), a]]))[:n, n:]
    if np.iscomplexobj(out):
        out = out.real  # a real A with a real logm has a real derivative
    return out
""",
    "_gw_solve_sylvester": """
def _gw_solve_sylvester(a, b, q):
    from scipy.linalg import solve_sylvester

    return solve_sylvester(a, b, q)
""",
    "_gw_solve_continuous_lyapunov": """
def _gw_solve_continuous_lyapunov(a, q):
    from scipy.linalg import solve_continuous_lyapunov

    return solve_continuous_lyapunov(a, q)
""",
    "_gw_solve_discrete_lyapunov": """
def _gw_solve_discrete_lyapunov(a, q):
    from scipy.linalg import solve_discrete_lyapunov

    return solve_discrete_lyapunov(a, q)
""",
}

#: helpers each helper calls (emitted with it)
DEPENDS = {
    "_gw_eigh": ("_gw_symmetric",),
    "_gw_eigvalsh": ("_gw_symmetric",),
    "_gw_eigvalsh_jvp": ("_gw_eigh", "_gw_symmetric"),
    "_gw_eigvalsh_vjp": ("_gw_eigh", "_gw_symmetric"),
    "_gw_cholesky": ("_gw_symmetric",),
    "_gw_matrix_function": ("_gw_eigh", "_gw_symmetric"),
    "_gw_spectral_frechet": ("_gw_eigh", "_gw_symmetric"),
}
