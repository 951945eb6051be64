"""The runtime's namespace object `_GwXp`: the NumPy names of the generated code computed
with one library's arrays; a piece of the runtime (see xp_runtime.py), joined after it at
export time."""

import math
import warnings

from .xp_runtime import _GW_STANDARD, _gw_kind, _gw_library
from .xp_runtime_linalg import _GwLinalg
from .xp_runtime_spectral import _GwSpectral


class _GwXp(_GwLinalg, _GwSpectral):
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

    def gw_sigmoid(self, x):
        return 0.5 * (1.0 + self.ns.tanh(0.5 * x))

    def gw_logsumexp(self, a):
        m = self.ns.max(self.ns.real(a) if _gw_kind(self.ns, a) == "c" else a)
        return m + self.ns.log(self.ns.sum(self.ns.exp(a - m)))

    def gw_softmax(self, x):
        z = self.ns.exp(x - self.ns.max(x))
        return z / self.ns.sum(z)
