"""Runtime helpers emitted into generated modules when used (plain NumPy; SciPy only for
Cholesky factors, imported lazily on first use)."""

from __future__ import annotations

HELPERS = {
    "_gw_check": '''
class _GwDims(dict):
    """Dim sizes bound by the arguments; a size no argument fixes is a clear error."""

    def __missing__(self, key):
        raise ValueError(
            f"the size of dim {key} is not known from the arrays passed (none of them has "
            f"{key} as a dim of its own)"
        )


# set only while the finite-difference check evaluates the value function at a complex step
_GW_COMPLEX_STEP = []


def _gw_check(specs):
    """Validate the arguments; returns the arrays and the dims they bind."""
    dims, owner, out, products = _GwDims(), {}, [], []
    for name, value, spec, *field in specs:
        if isinstance(value, (str, bytes)) or value is None:
            raise TypeError(f"{name} must be a numeric array, got {type(value).__name__}")
        try:
            a = np.asarray(value)
        except Exception as err:
            raise TypeError(
                f"{name} must be a numeric array; NumPy cannot read it ({err})"
            ) from None
        if a.dtype.kind not in "biufc":
            got = f"dtype {a.dtype}" if isinstance(value, np.ndarray) else type(value).__name__
            raise TypeError(f"{name} must be a numeric array, got {got}")
        if a.dtype.kind == "c" and not _GW_COMPLEX_STEP and not field:
            if " " in name:  # a direction or cotangent, not a declared symbol
                raise TypeError(
                    f"{name} is a complex array, but the block is real: pass a real array"
                )
            shown = "(" + ", ".join(map(str, spec)) + ("," if len(spec) == 1 else "") + ")"
            raise TypeError(
                f"{name} is a complex array, but {name} is declared real: the derivative of a "
                f"real formula is wrong for complex input. Declare it `{name}: {shown} complex` "
                f"or pass a real array (for example {name}.real)"
            )
        if a.dtype.kind in "bi":
            a = a.astype(float)
        if a.ndim != len(spec):
            want = ("a scalar", "a vector", "a matrix")[len(spec)]
            shown = "(" + ", ".join(map(str, spec)) + ("," if len(spec) == 1 else "") + ")"
            axes = "1 axis" if a.ndim == 1 else f"{a.ndim} axes"
            raise ValueError(f"{name} should be {want} {shown} but has {axes}, shape {a.shape}")
        for axis, (d, n) in enumerate(zip(spec, a.shape)):
            word = ("rows", "columns")[axis] if len(spec) == 2 else "entries"
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
    return out, dims
''',
    "_gw_finite": """
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
def _gw_cho(a, label):
    # cho_factor reads one triangle only: an unsymmetric input would give a silently wrong
    # answer; the tolerance is relative to the largest entry (common practice)
    if np.max(np.abs(a - a.T), initial=0.0) > 1e-8 * max(1.0, np.max(np.abs(a), initial=0.0)):
        raise ValueError(f"{label} is declared spd but is not symmetric")
    try:
        return cho_factor(a)
    except np.linalg.LinAlgError:
        raise np.linalg.LinAlgError(
            f"{label} is not positive definite (it is declared spd)"
        ) from None
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
def _gw_commutation(m, n):
    k = np.zeros((m * n, m * n))
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
