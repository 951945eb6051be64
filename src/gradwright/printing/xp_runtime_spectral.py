"""The runtime's spectral functions and factorizations of symmetric matrices, the reductions
over an axis and the special functions; a piece of the runtime (see xp_runtime.py), joined
after it at export time."""

import math


class _GwSpectral:
    """Mixed into `_GwXp`: uses its `ns`, `library`, `concrete`, `solve` and `cholesky`."""

    def gw_tril_half(self, x):
        return self._phi(x)

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

    # from one decomposition (w, u) shared by a function (printing/shared_eigh.py)
    def gw_eigvalsh_jvp_of(self, wu, e, label):
        return self.ns.sum(wu[1] * ((0.5 * (e + e.T)) @ wu[1]), axis=0)

    def gw_eigvalsh_vjp_of(self, wu, g, label):
        return (wu[1] * g) @ wu[1].T

    def gw_eigvalsh_vjp_jvp_of(self, *args):
        self.unavailable("eigvalsh_vjp_jvp")  # as without the shared decomposition

    def gw_matrix_function_of(self, name, *args):
        self.unavailable(name)

    def gw_spectral_frechet_of(self, name, *args):
        self.unavailable(f"the derivative of {name}")

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

    def gw_softmax_axis_into(self, a, axis):
        return self.gw_softmax_axis(a, axis)

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
