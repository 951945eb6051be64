"""The runtime's linear algebra on small square matrices: solves, inverses, determinants
and Cholesky factors, with the errors a singular or non-spd matrix gets; a piece of the runtime
(see xp_runtime.py), joined after it at export time."""

import math

from .xp_runtime import _gw_who


class _GwLinalg:
    """Mixed into `_GwXp`: uses its `ns`, `native`, `library`, `dtype` and `concrete`."""

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

    def _singular(self, err, message):
        if "singular" in str(err).lower() or "LinAlgError" in type(err).__name__:
            try:
                return type(err)(message)
            except Exception:
                return ValueError(message)
        return None

    def _guarded(self, fn, args, message):
        """fn(*args), a singular matrix's error said in the formula's words."""
        try:
            return fn(*args)
        except Exception as err:
            bad = self._singular(err, message)
            if bad is None:
                raise
            raise bad from None

    def gw_solve(self, a, b, label):
        return self._guarded(
            self.solve,
            (a, b),
            f"{_gw_who(label)} is singular: the formula or its derivative solves with it "
            "(inv, solve, logdet), which needs an invertible matrix",
        )

    def gw_inv(self, a, label):
        return self._guarded(
            self.inv,
            (a,),
            f"{_gw_who(label)} is singular: the formula or its derivative needs its inverse "
            "(inv, solve, det, logdet), which does not exist",
        )

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
        if declared == "gram":  # psd by construction: only a rank-deficient F fails
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

    def gw_adjugate(self, a):
        """adj(A) = det(A) inv(A); where A is singular only NumPy's SVD path defines it here."""
        d = self.det(a)
        if self.concrete(d) and float(d) == 0:
            self.unavailable("the adjugate of a singular matrix")
        return d * self.inv(a)

    def gw_cho_solve(self, factor, b):
        return self.cho_solve(factor, b)

    # the in-place arithmetic of the NumPy code (printing/inplace.py), computed as written:
    # JAX arrays are immutable and other libraries' temporaries are theirs to manage
    def gw_imul(self, x, y):
        return x * y

    def gw_iadd(self, x, y):
        return x + y

    def gw_isub(self, x, y):
        return x - y

    def gw_idiv(self, x, y):
        return x / y

    def gw_rsub(self, y, x):
        return y - x

    def gw_rdiv(self, y, x):
        return y / x

    def gw_apply(self, f, x):
        return f(x)

    def gw_cho_inv(self, factor):
        """A⁻¹ from the factor, through n solves (plain NumPy uses LAPACK's potri)."""
        return self.cho_solve(factor, self.eye(factor[0].shape[0]))

    def gw_cho_inv_trace(self, factor):
        """tr(A⁻¹) from the factor, through n solves (plain NumPy uses a triangular inverse)."""
        return self.trace(self.cho_solve(factor, self.eye(factor[0].shape[0])))
