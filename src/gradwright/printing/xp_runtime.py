"""Runtime of array-API generated code: a namespace object, made per call from the arguments,
that answers the NumPy names the printer writes with the arguments' own library.

The text of this file is copied into every array-API module gradwright writes (so that such a
module can be vendored without gradwright): it imports nothing from gradwright, needs only
`array-api-compat` and the array library itself, and keeps its names `_gw`-prefixed.
"""

import math
import warnings

import array_api_compat as _gw_compat

# a module exported for one library names it here ("torch", "jax", ...); None dispatches on the
# arguments
_GW_BACKEND = None

# set only while the finite-difference check evaluates the value function at a complex step
_GW_COMPLEX_STEP = []

#: entrywise and reducing functions of the standard that the generated code calls by name
_GW_STANDARD = frozenset(
    "exp log sqrt sin cos tanh sinh cosh abs sign real imag conj isfinite log1p expm1 square "
    "maximum minimum where mean min prod sum max matmul broadcast_to".split()
)


class _GwDims(dict):
    """Dim sizes bound by the arguments; a size no argument fixes is a clear error."""

    def __missing__(self, key):
        raise ValueError(
            f"the size of dim {key} is not known from the arrays passed (none of them has "
            f"{key} as a dim of its own)"
        )


def _gw_library(value):
    """The library an array belongs to ("numpy", "torch", ...); None for numbers and lists."""
    c = _gw_compat
    if c.is_numpy_array(value):
        return "numpy"
    if c.is_torch_array(value):
        return "torch"
    if c.is_jax_array(value):
        return "jax"
    if c.is_cupy_array(value):
        return "cupy"
    if c.is_dask_array(value):
        return "dask"
    if c.is_array_api_obj(value):
        return "array_api"
    return None


def _gw_namespace_for(library, lead):
    """(standard namespace, the library's own module or None) for arrays of `library`."""
    if library == "numpy":
        import numpy

        return _gw_compat.array_namespace(numpy.empty(0)), numpy
    if library == "torch":
        import torch

        return _gw_compat.array_namespace(torch.empty(0)), torch
    if library == "jax":
        import jax.numpy as jnp

        return jnp, jnp
    if library == "cupy":
        import cupy

        return _gw_compat.array_namespace(cupy.empty(0)), cupy
    if library == "dask":
        import dask.array as da

        return _gw_compat.array_namespace(da.empty(0)), da
    return _gw_compat.array_namespace(lead), None


def _gw_numpy_of(value, name):
    """A number, list or NumPy array read by NumPy (the one library every input may come in)."""
    import numpy

    if isinstance(value, (str, bytes)) or value is None:
        raise TypeError(f"{name} must be a numeric array, got {type(value).__name__}")
    try:
        a = numpy.asarray(value)
    except Exception as err:
        raise TypeError(f"{name} must be a numeric array; NumPy cannot read it ({err})") from None
    if a.dtype.kind not in "biufc":
        raise TypeError(f"{name} must be a numeric array, got dtype {a.dtype}")
    return a


def _gw_kind(xp, a):
    """'c' complex, 'f' real floating, 'i' integer or boolean."""
    if xp.isdtype(a.dtype, "complex floating"):
        return "c"
    if xp.isdtype(a.dtype, "real floating"):
        return "f"
    return "i"


def _gw_check(specs):
    """Validate the arguments; returns the arrays (all of one library), the dims they bind and
    the namespace object the function computes with."""
    library, lead, lead_name = "numpy", None, None
    for name, value, _spec in specs:
        k = _gw_library(value)
        if k in (None, "numpy"):
            continue
        if lead is None:
            library, lead, lead_name = k, value, name
        elif k != library:
            raise TypeError(
                f"{name} is a {k} array but {lead_name} is a {library} array: pass arrays of one "
                "library (NumPy arrays and Python numbers may join arrays of any library)"
            )
    if _GW_BACKEND is not None and _GW_BACKEND != "array_api" and library != _GW_BACKEND:
        if lead is not None:
            raise TypeError(
                f"{lead_name} is a {library} array, but this module was written for "
                f"{_GW_BACKEND} arrays"
            )
        library = _GW_BACKEND
    ns, native = _gw_namespace_for(library, lead)
    device = _gw_compat.device(lead) if lead is not None else None
    where = {} if library == "dask" or device is None else {"device": device}
    # arrays of the library as they come; NumPy arrays moved to it; numbers (Python numbers and
    # 0-d NumPy values) adopt the common floating dtype of the arrays, so float32 stays float32
    arrays, floats = [], []
    for name, value, _spec in specs:
        k = _gw_library(value)
        if k == library:
            a = value
        else:
            a = _gw_numpy_of(value, name)
            if a.ndim == 0 or k is None and a.dtype.kind in "biu":
                arrays.append(a)
                continue
            a = ns.asarray(a, **where)
        if _gw_kind(ns, a) != "i":
            floats.append(a.dtype)
        arrays.append(a)
    dtype = ns.result_type(*floats) if floats else ns.float64
    xp = _GwXp(library, ns, native, dtype, device)
    dims, owner, out, products = _GwDims(), {}, [], []
    dims.dtype = dtype  # the dtype of constants the code builds (eye, ones, zeros)
    for a, (name, _v, spec) in zip(arrays, specs):
        if _gw_library(a) != library:  # a number or a list of integers
            a = ns.asarray(a, dtype=dtype if a.dtype.kind != "c" else None, **where)
        kind = _gw_kind(ns, a)
        if kind == "c" and not _GW_COMPLEX_STEP:
            if " " in name:  # a direction or cotangent, not a declared symbol
                raise TypeError(
                    f"{name} is a complex array, but the block is real: pass a real array"
                )
            raise TypeError(
                f"{name} is a complex array, but {name} is declared real: the derivative of a "
                f"real formula is wrong for complex input; pass a real array"
            )
        if kind == "i":
            a = ns.astype(a, dtype)
        if a.ndim != len(spec):
            want = ("a scalar", "a vector", "a matrix")[len(spec)]
            shown = "(" + ", ".join(map(str, spec)) + ("," if len(spec) == 1 else "") + ")"
            axes = "1 axis" if a.ndim == 1 else f"{a.ndim} axes"
            raise ValueError(
                f"{name} should be {want} {shown} but has {axes}, shape {tuple(a.shape)}"
            )
        for axis, (d, n) in enumerate(zip(spec, a.shape)):
            word = ("rows", "columns")[axis] if len(spec) == 2 else "entries"
            if n is None or (isinstance(n, float) and math.isnan(n)):
                raise ValueError(
                    f"{name} has an unknown number of {word} (a Dask array of unknown chunk "
                    "sizes): call .compute_chunk_sizes() on it, or to_dask_array(lengths=True)"
                )
            n = int(n)
            if isinstance(d, int):
                if n != d:
                    raise ValueError(f"{name} has {n} {word} but its declaration says {d}")
            elif "*" in d:
                products.append((name, word, d, n))
            elif d in dims:
                if dims[d] != n:
                    other, other_word = owner[d]
                    raise ValueError(
                        f"{name} has {n} {word} but {other} has {d} = {dims[d]}"
                        + (f" {other_word}" if other_word != word else "")
                    )
            else:
                dims[d], owner[d] = n, (name, word)
        out.append(a)
    for _ in range(len(products)):  # after every plain dim is bound; a lone unknown is inferred
        pending = []
        for name, word, d, n in products:
            want, unknown = 1, []
            for part in d.split("*"):
                if part.isdigit() or part in dims:
                    want *= int(part) if part.isdigit() else dims[part]
                else:
                    unknown.append(part)
            if not unknown:
                if n != want:
                    raise ValueError(f"{name} has {n} {word} but {d} = {want}")
            elif len(unknown) == 1 and n % want == 0:
                dims[unknown[0]], owner[unknown[0]] = n // want, (name, word)
            else:
                pending.append((name, word, d, n))
        if len(pending) == len(products):
            break  # what stays unknown is reported where a size is needed
        products = pending
    return out, dims, xp


def _gw_who(label):
    return label[:-2] if label.endswith(".T") and label[:-2].isidentifier() else label


class _GwXp:
    """The NumPy names of the generated code, computed with one library's arrays.

    `linalg` is the object itself, so that `xp.linalg.solve` and `xp.solve` are one method.
    """

    def __init__(self, library, ns, native, dtype, device):
        self.library = library
        self.ns = ns  # the standard namespace (array-api-compat)
        self.native = native  # the library's own module, for what the standard lacks
        self.dtype = dtype
        self.device = device

    @property
    def linalg(self):
        return self

    def __getattr__(self, name):
        if name.startswith("__"):
            raise AttributeError(name)
        if name in _GW_STANDARD and hasattr(self.ns, name):
            fn = getattr(self.ns, name)

            def call(*args, **kwargs):
                # a Python number (sqrt(pi), a constant) as an array: PyTorch takes no floats
                args = [self._arr(a) if isinstance(a, (int, float)) else a for a in args]
                return fn(*args, **kwargs)

            return call
        places = (self.native, getattr(self.native, "linalg", None), self._scipy_linalg())
        found = [getattr(p, name) for p in places if p is not None and hasattr(p, name)]
        if not found:
            self.unavailable(name)
        fn = found[0]
        if not callable(fn):
            return fn  # a constant (pi, inf)

        def native(*args, **kwargs):
            # a float argument as an array (heaviside(x, 0.5)); integers stay, they are orders,
            # counts and axes there
            args = [self._arr(a) if type(a) is float else a for a in args]
            return fn(*args, **kwargs)

        return native

    def _scipy_linalg(self):
        """Where the library keeps SciPy's linear algebra (solve_sylvester, expm, ...)."""
        try:
            if self.library == "numpy":
                import scipy.linalg

                return scipy.linalg
            if self.library == "jax":
                import jax.scipy.linalg

                return jax.scipy.linalg
            if self.library == "cupy":
                import cupyx.scipy.linalg

                return cupyx.scipy.linalg
        except ImportError:
            pass
        return None  # PyTorch and Dask have no such module: the operation is not available

    def unavailable(self, operation):
        if operation.startswith("gw_"):  # a NumPy helper of the generated code
            operation = operation[3:]
        raise NotImplementedError(
            f"{operation} is not available for {self.library} arrays in gradwright's generated "
            "code; pass NumPy arrays for this formula"
        )

    # --- where the work runs ----------------------------------------------------------------

    @property
    def lazy(self):
        """Dask builds a graph; nothing can be inspected before .compute()."""
        return self.library == "dask"

    def concrete(self, a):
        """True when the entries of `a` can be read now (not a Dask graph, not a JAX trace)."""
        if self.library == "dask":
            return False
        if self.library == "jax":
            import jax

            return not isinstance(a, jax.core.Tracer)
        return True

    # --- construction -----------------------------------------------------------------------

    def _make(self, fn, *args, dtype=None):
        dtype = self.dtype if dtype is None else dtype
        if self.library == "dask":
            return fn(*args, dtype=dtype)
        return fn(*args, dtype=dtype, device=self.device)

    def asarray(self, a, dtype=None):
        if _gw_library(a) == self.library:
            return a if dtype is None else self.ns.astype(a, dtype)
        if dtype is None and isinstance(a, (int, float)):
            dtype = self.dtype  # a constant result (0, 1.0) in the arguments' dtype
        if self.library == "dask":
            return self.ns.asarray(a, dtype=dtype)
        return self.ns.asarray(a, dtype=dtype, device=self.device)

    def result(self, a):
        """A returned value as an array of the library (a formula's constant result too)."""
        return a if _gw_library(a) == self.library else self.asarray(a, dtype=self.dtype)

    def _arr(self, a):
        return a if _gw_library(a) == self.library else self.asarray(a, dtype=self.dtype)

    def eye(self, n, dtype=None):
        return self._make(self.ns.eye, n, dtype=dtype)

    def ones(self, shape, dtype=None):
        return self._make(self.ns.ones, shape, dtype=dtype)

    def zeros(self, shape, dtype=None):
        return self._make(self.ns.zeros, shape, dtype=dtype)

    # --- shapes -------------------------------------------------------------------------------

    def reshape(self, a, shape):
        return self.ns.reshape(self._arr(a), (shape,) if isinstance(shape, int) else tuple(shape))

    def reshape_f(self, a, shape):
        """NumPy's reshape(a, shape, order="F") from C-order reshapes and transposes."""
        a = self._arr(a)
        shape = (shape,) if isinstance(shape, int) else tuple(shape)
        if a.ndim > 1:
            a = self.ns.permute_dims(a, tuple(range(a.ndim))[::-1])
        out = self.ns.reshape(a, shape[::-1])
        if out.ndim > 1:
            out = self.ns.permute_dims(out, tuple(range(out.ndim))[::-1])
        return out

    # --- products and reductions --------------------------------------------------------------

    def sum(self, a, axis=None, keepdims=False):
        return self.ns.sum(self._arr(a), axis=axis, keepdims=keepdims)

    def max(self, a, axis=None, keepdims=False):
        return self.ns.max(self._arr(a), axis=axis, keepdims=keepdims)

    def einsum(self, subscripts, *operands):
        if self.native is not None and hasattr(self.native, "einsum"):
            return self.native.einsum(subscripts, *operands)
        ns = self.ns
        if subscripts in ("ij,ij->", "i,i->"):
            a, b = operands
            return ns.sum(a * b)
        if subscripts == "ij,ji->":
            a, b = operands
            return ns.sum(a * b.T)
        if subscripts == "ij,ji->i":
            a, b = operands
            return ns.sum(a * b.T, axis=1)
        if subscripts == "ikjl,kl->ij":
            g, b = operands
            return ns.sum(g * b[None, :, None, :], axis=(1, 3))
        if subscripts == "ikjl,ij->kl":
            g, b = operands
            return ns.sum(g * b[:, None, :, None], axis=(0, 2))
        self.unavailable(f"einsum({subscripts!r})")

    def trace(self, a):
        if self.native is not None and hasattr(self.native, "trace"):
            return self.native.trace(a)
        return self.ns.sum(self.diagonal(a))

    def diagonal(self, a):
        if self.native is not None and hasattr(self.native, "diagonal"):
            return self.native.diagonal(a)
        return self.ns.linalg.diagonal(a)

    def diag(self, v):
        """The diagonal matrix of a vector (the only use the printer makes of np.diag)."""
        if self.native is not None and hasattr(self.native, "diag"):
            return self.native.diag(v)
        return self.eye(v.shape[0]) * v[None, :]

    def outer(self, a, b):
        return self._arr(a)[:, None] * self._arr(b)[None, :]

    def kron(self, a, b):
        if self.native is not None and hasattr(self.native, "kron"):
            return self.native.kron(a, b)
        if a.ndim == 1:
            return self.ns.reshape(a[:, None] * b[None, :], (-1,))
        (m, n), (p, q) = a.shape, b.shape
        return self.ns.reshape(a[:, None, :, None] * b[None, :, None, :], (m * p, n * q))

    def logaddexp(self, a, b):
        return self.ns.logaddexp(self._arr(a), self._arr(b))

    def norm(self, a):
        a = self._arr(a)
        return self.ns.sqrt(self.ns.sum(self.ns.abs(a) ** 2))

    def matrix_power(self, a, k):
        if self.library != "dask" and hasattr(self.ns.linalg, "matrix_power"):
            return self.ns.linalg.matrix_power(a, k)
        out = self.eye(a.shape[0])
        for _ in range(k):
            out = out @ a
        return out

    # --- linear algebra on small square matrices ----------------------------------------------
    # Dask: every square matrix of a formula is small (p x p, k x k); its kernels run in one
    # task on the whole matrix with NumPy/SciPy, while the right-hand sides keep their chunks.

    def _dask_small(self, fn, a, shape):
        import dask
        import dask.array as da

        return da.from_delayed(dask.delayed(fn)(a.rechunk(-1)), shape=shape, dtype=self.dtype)

    def _dask_solve(self, fn, a, b):
        import dask.array as da

        a = a.rechunk(-1)
        if b.ndim == 1:
            return da.blockwise(fn, "i", a, "ik", b.rechunk(-1), "k", dtype=self.dtype)
        b = b.rechunk({0: -1})
        return da.blockwise(fn, "ij", a, "ik", b, "kj", dtype=self.dtype, concatenate=True)

    def solve(self, a, b):
        if self.library == "dask":
            import numpy

            return self._dask_solve(numpy.linalg.solve, a, b)
        if self.library == "torch" and b.ndim == 1:
            return self.native.linalg.solve(a, b[:, None])[:, 0]
        return self.ns.linalg.solve(a, b)

    def inv(self, a):
        if self.library == "dask":
            import numpy

            return a.rechunk(-1).map_blocks(numpy.linalg.inv, dtype=self.dtype)
        return self.ns.linalg.inv(a)

    def det(self, a):
        if self.library == "dask":
            import numpy

            return self._dask_small(numpy.linalg.det, a, ())
        return self.ns.linalg.det(a)

    def slogdet(self, a):
        if self.library == "dask":
            import numpy

            sign = self._dask_small(lambda m: numpy.linalg.slogdet(m)[0], a, ())
            return sign, self._dask_small(lambda m: numpy.linalg.slogdet(m)[1], a, ())
        return tuple(self.ns.linalg.slogdet(a))

    def cholesky(self, a):
        if self.library == "dask":
            import numpy

            return a.rechunk(-1).map_blocks(numpy.linalg.cholesky, dtype=self.dtype)
        return self.ns.linalg.cholesky(a)

    def cho_solve(self, factor, b):
        """Solve with a factor from gw_cho: (lower Cholesky factor L, True, the matrix)."""
        low, _lower, a = factor
        lib = self.library
        if lib == "numpy":
            from scipy.linalg import cho_solve

            return cho_solve((low, True), b)
        if lib == "torch":
            col = b[:, None] if b.ndim == 1 else b
            out = self.native.cholesky_solve(col, low)
            return out[:, 0] if b.ndim == 1 else out
        if lib == "jax":
            from jax.scipy.linalg import cho_solve

            return cho_solve((low, True), b)
        if lib == "dask":
            from scipy.linalg import cho_solve

            def solve(m, rhs):
                return cho_solve((m, True), rhs)

            return self._dask_solve(solve, low, b)
        if lib == "cupy":
            from cupyx.scipy.linalg import solve_triangular

            y = solve_triangular(low, b, lower=True)
            return solve_triangular(low.T, y, lower=False)
        return self.ns.linalg.solve(a, b)

    # --- the generated code's helpers, one method each ----------------------------------------

    def gw_unit(self, n, i):
        """The unit vector of length n with its 1 at NumPy position i (no in-place writes)."""
        return self.ns.astype(self.ns.arange(n) == i % n, self.dtype)

    def gw_place(self, g, n, lo, hi, axis):
        """Zeros of length n along axis with g at positions lo:hi, by concatenation."""
        g = self._arr(g)
        axis = axis if g.ndim == 2 else 0
        lo, hi, _ = slice(lo, hi).indices(n)
        shape = list(g.shape)
        parts = []
        for width in (lo, n - hi):
            shape[axis] = width
            parts.append(self.zeros(tuple(shape)))
        return self.ns.concat([parts[0], g, parts[1]], axis=axis)

    def gw_finite(self, value, what):
        if _gw_library(value) != self.library or not self.concrete(value):
            return value  # a constant, a graph or a trace (whose entries exist only later)
        size = math.prod(value.shape)
        bad = size - int(self.ns.sum(self.ns.astype(self.ns.isfinite(value), self.ns.int64)))
        if bad:
            where = "" if value.ndim == 0 else f" in {bad} of {size} entries"
            warnings.warn(f"{what} is not finite (inf or nan){where}", RuntimeWarning, stacklevel=3)
        return value

    def _singular(self, err, message):
        if "singular" in str(err).lower() or "LinAlgError" in type(err).__name__:
            try:
                return type(err)(message)
            except Exception:
                return ValueError(message)
        return None

    def gw_solve(self, a, b, label):
        try:
            return self.solve(a, b)
        except Exception as err:
            bad = self._singular(
                err,
                f"{_gw_who(label)} is singular: the formula or its derivative solves with it "
                "(inv, solve, logdet), which needs an invertible matrix",
            )
            if bad is None:
                raise
            raise bad from None

    def gw_inv(self, a, label):
        try:
            return self.inv(a)
        except Exception as err:
            bad = self._singular(
                err,
                f"{_gw_who(label)} is singular: the formula or its derivative needs its inverse "
                "(inv, solve, det, logdet), which does not exist",
            )
            if bad is None:
                raise
            raise bad from None

    def gw_logdet(self, a, label):
        sign, value = self.slogdet(a)
        if self.concrete(sign) and float(sign) == 0:
            raise ValueError(
                f"{_gw_who(label)} is singular (determinant 0): logdet needs an invertible matrix"
            )
        return value

    def gw_cho(self, a, label, declared=True):
        """(lower Cholesky factor, True, a): the factor's diagonal is entry [0]'s diagonal."""
        if self.concrete(a) and math.prod(a.shape):
            # the factorization reads one triangle only: an unsymmetric input would give a
            # silently wrong answer; the tolerance is relative to the largest entry and to the
            # precision (common practice)
            ns = self.ns
            eps = float(ns.finfo(a.dtype).eps)
            tol = max(1e-8, 1e3 * eps) * max(1.0, float(ns.max(ns.abs(a))))
            if float(ns.max(ns.abs(a - a.T))) > tol:
                if declared == "gram":
                    raise ValueError(
                        f"{label} is not symmetric, but it is a Gram matrix Fᵀ M F with M spd"
                    )
                if declared:
                    raise ValueError(f"{label} is declared spd but is not symmetric")
                raise ValueError(
                    f"{label} is not symmetric, but it is built to be spd from the matrices "
                    "declared spd: check that they are symmetric"
                )
        why = "it is declared spd" if declared else "it is built to be spd from spd matrices"
        if declared == "gram":  # psd by construction: only a rank-deficient B fails
            why = "a Gram matrix Fᵀ M F with M spd: F does not have full column rank"
        try:
            low = self.cholesky(a)
        except Exception as err:
            raise ValueError(f"{label} is not positive definite ({why})") from err
        if self.concrete(low) and not bool(self.ns.all(self.ns.isfinite(low))):
            raise ValueError(f"{label} is not positive definite ({why})")
        if declared == "gram" and self.concrete(low) and math.prod(low.shape):
            # psd by construction: rounding can let a singular one through with a tiny pivot;
            # cond >= (max pivot / min pivot)^2 (common practice)
            d = self.ns.abs(self.diagonal(low))
            lo, hi = float(self.ns.min(d)), float(self.ns.max(d))
            if lo**2 <= low.shape[0] * float(self.ns.finfo(low.dtype).eps) * hi**2:
                raise ValueError(f"{label} is singular to working precision ({why})")
        return (low, True, a)

    def gw_tril_half(self, x):
        return self._phi(x)

    def gw_adjugate(self, a):
        """adj(A) = det(A) inv(A); where A is singular only NumPy's SVD path defines it here."""
        d = self.det(a)
        if self.concrete(d) and float(d) == 0:
            self.unavailable("the adjugate of a singular matrix")
        return d * self.inv(a)

    def gw_sigmoid(self, x):
        return 0.5 * (1.0 + self.ns.tanh(0.5 * x))

    def gw_logsumexp(self, a):
        m = self.ns.max(self.ns.real(a) if _gw_kind(self.ns, a) == "c" else a)
        return m + self.ns.log(self.ns.sum(self.ns.exp(a - m)))

    def gw_softmax(self, x):
        z = self.ns.exp(x - self.ns.max(x))
        return z / self.ns.sum(z)

    def gw_cho_solve(self, factor, b):
        return self.cho_solve(factor, b)

    def gw_cho_inv(self, factor):
        """A⁻¹ from the factor, through n solves (plain NumPy uses LAPACK's potri)."""
        return self.cho_solve(factor, self.eye(factor[0].shape[0]))

    def gw_cho_inv_trace(self, factor):
        """tr(A⁻¹) from the factor, through n solves (plain NumPy uses a triangular inverse)."""
        return self.trace(self.cho_solve(factor, self.eye(factor[0].shape[0])))

    # --- spectral functions and factorizations of symmetric matrices (PyTorch, JAX, CuPy) ----
    # the same formulas as the NumPy helpers; expm, sqrtm, logm and the matrix equations have
    # no counterpart here and are refused by name

    def _no_dask(self, operation):
        if self.library == "dask":
            self.unavailable(operation)

    def gw_matrix_function(self, name, *args):
        self.unavailable(name)

    def gw_spectral_frechet(self, name, *args):
        self.unavailable(f"the derivative of {name}")

    def gw_symmetric(self, a, label, what):
        if self.concrete(a) and math.prod(a.shape):
            ns = self.ns
            scale = max(1.0, float(ns.max(ns.abs(a))))
            if float(ns.max(ns.abs(a - a.T))) > 1e-8 * scale:
                raise ValueError(f"{label} is not symmetric, but {what} needs a symmetric matrix")
        return a

    def gw_eigh(self, a, label, what):
        self._no_dask(what)
        w, u = self.ns.linalg.eigh(self.gw_symmetric(a, label, what))
        return w, u

    def gw_eigvalsh(self, a, label):
        self._no_dask("eigvalsh")
        return self.ns.linalg.eigvalsh(self.gw_symmetric(a, label, "eigvalsh"))

    def gw_eigvalsh_jvp(self, a, e, label):
        """d eigvalsh(S)[i] = u_i^T dS u_i (Magnus 1985), for simple eigenvalues."""
        _w, u = self.gw_eigh(a, label, "eigvalsh")
        return self.ns.sum(u * ((0.5 * (e + e.T)) @ u), axis=0)

    def gw_eigvalsh_vjp(self, a, g, label):
        """U Diag(g) U^T: the gradient of a function of eigvalsh(S) with weights g."""
        _w, u = self.gw_eigh(a, label, "eigvalsh")
        return (u * g) @ u.T

    def gw_cholesky(self, a, label):
        self._no_dask("cholesky")
        low = self.cholesky(self.gw_symmetric(a, label, "cholesky"))
        if self.concrete(low) and not bool(self.ns.all(self.ns.isfinite(low))):
            raise ValueError(f"{label} is not positive definite: cholesky needs an spd matrix")
        return low

    def _phi(self, p):
        """The lower triangle with half the diagonal."""
        return self.ns.tril(p, k=-1) + 0.5 * self.diag(self.diagonal(p))

    def gw_cholesky_jvp(self, low, e):
        """dL = L Phi(L^-1 dS L^-T) (Murray 2016); triangular solves as general solves."""
        es = 0.5 * (e + e.T)
        p = self.solve(low, self.solve(low, es).T)
        return low @ self._phi(p)

    def gw_cholesky_vjp(self, low, g):
        """sym(L^-T Phi(L^T G) L^-1): the reverse mode of the Cholesky factor (Murray 2016)."""
        p = self._phi(low.T @ g)
        y = self.solve(low.T, p)
        m = self.solve(low.T, y.T).T
        return 0.5 * (m + m.T)

    def gw_commutation(self, m, n, dtype=None):
        import numpy

        k = numpy.zeros((m * n, m * n))
        for i in range(m):
            for j in range(n):
                k[j + i * n, i + j * m] = 1.0
        return self.asarray(k, dtype=self.dtype)

    def gw_kron_contract(self, g, other, rows, cols, side):
        """The adjoint of one factor of a Kronecker product (g and other are 2-D)."""
        if side == "left":
            p, q = other.shape
            return self.einsum("ikjl,kl->ij", self.reshape(g, (rows, p, cols, q)), other)
        m, n = other.shape
        return self.einsum("ikjl,ij->kl", self.reshape(g, (m, rows, n, cols)), other)

    # --- reductions over an axis and special functions (language/calls_reductions.py, ...) ---
    # the same max-shifted formulas as the NumPy helpers in printing/axis_printing.py

    def gw_logsumexp_axis(self, a, axis, keepdims):
        ns = self.ns
        m = ns.max(a, axis=axis, keepdims=True)
        m = ns.where(ns.isfinite(m), m, ns.zeros_like(m))
        out = m + ns.log(ns.sum(ns.exp(a - m), axis=axis, keepdims=True))
        if keepdims:
            return out
        return ns.reshape(out, ()) if axis is None else ns.squeeze(out, axis=axis)

    def gw_softmax_axis(self, a, axis):
        ns = self.ns
        z = ns.exp(a - ns.max(a, axis=axis, keepdims=True))
        return z / ns.sum(z, axis=axis, keepdims=True)

    def gw_log_softmax_axis(self, a, axis):
        ns = self.ns
        shifted = a - ns.max(a, axis=axis, keepdims=True)
        return shifted - ns.log(ns.sum(ns.exp(shifted), axis=axis, keepdims=True))

    def gw_tie_weights(self, a, axis, op):
        ns = self.ns
        best = (ns.max if op == "max" else ns.min)(a, axis=axis, keepdims=True)
        hits = ns.astype(a == best, a.dtype)
        return hits / ns.sum(hits, axis=axis, keepdims=True)

    def _special(self, name, x, *order):
        """scipy.special's function in the arguments' library (torch.special, jax.scipy)."""
        if self.library == "numpy":
            import scipy.special as place
        elif self.library == "torch":
            import torch.special as place
        elif self.library == "jax":
            import jax.scipy.special as place
        elif self.library == "cupy":
            import cupyx.scipy.special as place
        else:
            self.unavailable(name)
        fn = getattr(place, name, None)
        if fn is None:
            self.unavailable(name)
        return fn(*order, x)

    def gw_erf(self, x):
        return self._special("erf", x)

    def gw_gammaln(self, x):
        return self._special("gammaln", x)

    def gw_digamma(self, x):
        return self._special("digamma", x)

    def gw_trigamma(self, x):
        return self._special("polygamma", x, 1)

    def gw_tetragamma(self, x):
        return self._special("polygamma", x, 2)

    def gw_pentagamma(self, x):
        return self._special("polygamma", x, 3)
