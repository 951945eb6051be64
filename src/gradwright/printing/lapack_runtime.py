"""Cholesky routines for generated modules without importing SciPy (helper texts).

NumPy has no triangular solve, and importing `scipy.linalg` for one costs 150–200 ms in a fresh
process. NumPy's PyPI wheels bundle OpenBLAS with its LAPACKE interface (symbols
`scipy_LAPACKE_<t>potrf64_` and so on, 64-bit integers): `_gw_lapack` looks them up once
through ctypes and the Cholesky helpers call them; where the library or a symbol is missing
(NumPy built on MKL or Accelerate, another wheel layout) every helper uses SciPy as before.

Column-major LAPACK is called on C-ordered buffers: the C view of a column-major lower factor L
is U = Lᵀ (conjugated for complex matrices, handled below), so a factor is `(c, False)` with
A = Uᴴ U in the upper triangle of c, exactly what `scipy.linalg.cho_factor(a)` returns, and
the helpers accept either. Shapes, dtypes and contiguity are checked before any call into C.
"""

from __future__ import annotations

LAPACK_HELPERS = {
    "_gw_lapack": '''
_GW_LAPACK = []  # [table or None] after the first look-up


def _gw_lapack():
    """{(routine, dtype char): ctypes function} from NumPy's own OpenBLAS, or None."""
    if _GW_LAPACK:
        return _GW_LAPACK[0]
    table = None
    try:
        import ctypes
        import glob
        import os

        root = os.path.dirname(os.path.dirname(np.__file__))
        found = []
        for where in (os.path.join(root, "numpy.libs"), os.path.join(np.__path__[0], ".dylibs")):
            found += sorted(glob.glob(os.path.join(where, "libscipy_openblas64_*")))
        blas = str(np.show_config(mode="dicts").get("Build Dependencies", {}).get("blas"))
        if found and "scipy-openblas" in blas and "USE64BITINT" in blas:
            lib = ctypes.CDLL(found[0])
            c_int, c_char, i64, ptr = ctypes.c_int, ctypes.c_char, ctypes.c_int64, ctypes.c_void_p
            table = {}
            for t, kind, real in (
                ("s", "f", ctypes.c_float),
                ("d", "d", ctypes.c_double),
                ("c", "F", ctypes.c_float),
                ("z", "D", ctypes.c_double),
            ):
                sig = {
                    "potrf": [c_int, c_char, i64, ptr, i64],
                    "potrs": [c_int, c_char, i64, i64, ptr, i64, ptr, i64],
                    "potri": [c_int, c_char, i64, ptr, i64],
                    "trtri": [c_int, c_char, c_char, i64, ptr, i64],
                    "trtrs": [c_int, c_char, c_char, c_char, i64, i64, ptr, i64, ptr, i64],
                    "pocon": [c_int, c_char, i64, ptr, i64, real, ptr],
                }
                for name, args in sig.items():
                    fn = getattr(lib, f"scipy_LAPACKE_{t}{name}64_")
                    fn.argtypes, fn.restype = args, i64
                    table[(name, kind)] = fn
    except Exception:  # no such library or symbol: SciPy serves
        table = None
    _GW_LAPACK.append(table)
    return table


def _gw_lapack_ready(a, kind=None):
    """The routines when a is a square matrix of a LAPACK dtype (float32/64, complex64/128)."""
    table = _gw_lapack()
    if table is None or a.ndim != 2 or a.shape[0] != a.shape[1]:
        return None
    if (kind or a.dtype.char) not in "fdFD":
        return None
    return table


def _gw_cho_factor(a):
    """(c, False), A = U^H U with U in the upper triangle of c (scipy's cho_factor layout)."""
    table = _gw_lapack_ready(a)
    if table is None:
        from scipy.linalg import cho_factor

        return cho_factor(a, check_finite=False)
    c = np.array(a, order="C", copy=True)
    n = c.shape[0]
    if n:
        info = table[("potrf", c.dtype.char)](102, b"L", n, c.ctypes.data, n)
        if info != 0:
            raise np.linalg.LinAlgError(f"{info}-th leading minor is not positive definite")
    return c, False


def _gw_cho_rcond(factor, a):
    """LAPACK's estimate of 1 / cond_1(A) from the factor (O(n^2))."""
    c = factor[0]
    anorm = float(np.max(np.sum(np.abs(a), axis=0)))
    ready = _gw_lapack_factor(factor, c[:, :0])
    if ready is None:
        from scipy.linalg.lapack import get_lapack_funcs

        (pocon,) = get_lapack_funcs(("pocon",), (c,))
        return pocon(c, anorm, uplo="L" if factor[1] else "U")[0]
    table, c, _ = ready
    rcond = np.zeros(1, dtype=np.finfo(c.dtype).dtype)
    n = c.shape[0]
    info = table[("pocon", c.dtype.char)](102, b"L", n, c.ctypes.data, n, anorm, rcond.ctypes.data)
    if info != 0:
        raise ValueError(f"LAPACK pocon: illegal argument {-info}")
    return rcond[0]


def _gw_lapack_factor(factor, b):
    """(routines, c, b as the common dtype) when LAPACK can take this factor and b, else None."""
    c, lower = factor
    if lower or not isinstance(c, np.ndarray) or not c.flags.c_contiguous:
        return None
    b = np.asarray(b)
    kind = np.result_type(c.dtype, b.dtype).char
    table = _gw_lapack_ready(c, kind)
    if table is None or b.ndim not in (1, 2) or b.shape[0] != c.shape[0]:
        return None
    if c.dtype.char != kind:
        c = c.astype(kind)
    return table, c, b.astype(kind, copy=False)

''',
    "_gw_cho_solve": """
def _gw_cho_solve(factor, b):
    ready = _gw_lapack_factor(factor, b)
    if ready is None:
        from scipy.linalg import cho_solve

        return cho_solve(factor, b, check_finite=False)
    table, c, b = ready
    n = c.shape[0]
    x = np.array(b.conj() if b.dtype.kind == "c" else b, order="F", copy=True)
    k = 1 if x.ndim == 1 else x.shape[1]
    if n and k:
        # the buffer is L with conj(A) = L L^H: solve conj(A) conj(x) = conj(b)
        info = table[("potrs", c.dtype.char)](102, b"L", n, k, c.ctypes.data, n, x.ctypes.data, n)
        if info != 0:
            raise ValueError(f"LAPACK potrs: illegal argument {-info}")
    return x.conj() if x.dtype.kind == "c" else x
""",
    "_gw_cho_inv": """
def _gw_cho_inv(factor):
    # A^-1 = U^-1 U^-H from the factor (LAPACK potri: 2n^3/3 flops, not n solves' 2n^3)
    c = factor[0]
    ready = _gw_lapack_factor(factor, c[:, :0])
    if ready is None:
        from scipy.linalg.lapack import get_lapack_funcs

        (potri,) = get_lapack_funcs(("potri",), (c,))
        inv, info = potri(c, lower=factor[1])
        lower = factor[1]
    else:
        table, c, _ = ready
        inv, n, lower = np.array(c, order="C", copy=True), c.shape[0], False
        info = table[("potri", c.dtype.char)](102, b"L", n, inv.ctypes.data, n) if n else 0
    if info != 0:  # (a zero pivot cannot come out of a successful Cholesky factorization)
        raise np.linalg.LinAlgError("the Cholesky factor is singular")
    half = np.tril(inv, -1) if lower else np.triu(inv, 1)
    return (np.tril(inv) if lower else np.triu(inv)) + half.conj().T
""",
    "_gw_cho_inv_trace": """
def _gw_cho_inv_trace(factor):
    # tr(A^-1) = |U^-1|_F^2 for A = U^H U: one triangular inverse, not n solves
    c = factor[0]
    ready = _gw_lapack_factor(factor, c[:, :0])
    if ready is None:
        from scipy.linalg.lapack import get_lapack_funcs

        (trtri,) = get_lapack_funcs(("trtri",), (c,))
        inv, info = trtri(c, lower=factor[1])
        lower = factor[1]
    else:
        table, c, _ = ready
        inv, n, lower = np.array(c, order="C", copy=True), c.shape[0], False
        info = table[("trtri", c.dtype.char)](102, b"L", b"N", n, inv.ctypes.data, n) if n else 0
    if info != 0:  # (a zero pivot cannot come out of a successful Cholesky factorization)
        raise np.linalg.LinAlgError("the Cholesky factor is singular")
    inv = np.tril(inv) if lower else np.triu(inv)
    return np.vdot(inv, inv).real
""",
    "_gw_cho_whiten": """
def _gw_cho_whiten(factor, b):
    # U^-H b for A = U^H U: data whitened by the factor (one triangular solve)
    ready = _gw_lapack_factor(factor, b)
    if ready is None:
        from scipy.linalg import solve_triangular

        c, lower = factor
        return solve_triangular(c, b, lower=lower, trans="N" if lower else "C", check_finite=False)
    table, c, b = ready
    n = c.shape[0]
    x = np.array(b.conj() if b.dtype.kind == "c" else b, order="F", copy=True)
    k = 1 if x.ndim == 1 else x.shape[1]
    if n and k:
        # the buffer is L with U = L^T: U^-H b = conj(L^-1 conj(b))
        fn = table[("trtrs", c.dtype.char)]
        info = fn(102, b"L", b"N", b"N", n, k, c.ctypes.data, n, x.ctypes.data, n)
        if info != 0:
            raise np.linalg.LinAlgError("the Cholesky factor is singular")
    return x.conj() if x.dtype.kind == "c" else x
""",
    "_gw_cho_colour": """
def _gw_cho_colour(factor, b):
    # U b for A = U^H U (a triangular product)
    c, lower = factor
    return (np.tril(c).conj().T if lower else np.triu(c)) @ b
""",
}
