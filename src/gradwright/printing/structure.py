"""Structure the code generator infers: which matrices are symmetric positive (semi)definite.

A matrix known to be spd is factored once per call by Cholesky, and every solve, inverse
product and log-determinant with it comes from that factor. The rules are the standard
closure properties (R. A. Horn and C. R. Johnson, *Matrix Analysis*, 2nd ed., 2013, §7.1,
Observations 7.1.3 and 7.1.8, from memory): a sum of psd matrices is psd and is pd as soon
as one term is pd; a positive multiple keeps the class; B A Bᵀ is psd for psd A (and pd for pd
A and invertible B); the inverse and the transpose of a pd matrix are pd; a Kronecker product
of pd (psd) matrices is pd (psd).

>>> from gradwright import derive
>>> d = derive("H: (m, n)\\nP: (n, n) spd\\nR: (m, m) spd\\nS = H @ P @ H.T + R\\nf = logdet(S)")
>>> known_spd(d.expr.args[0].args[0])
True
"""

from __future__ import annotations

from .. import expr as E


def positive_scalar(e: E.Expr) -> bool:
    """A scalar known to be > 0."""
    if not e.is_scalar:
        return False
    t = type(e)
    if t is E.Const:
        return e.value > 0
    if t is E.Symbol:
        return "positive" in e.structure or "spd" in e.structure
    if t is E.Named:
        return positive_scalar(e.body)
    if t is E.Func:
        return e.name == "exp" or (e.name in ("sqrt", "sigmoid") and positive_scalar(e.arg))
    if t is E.Power:
        base, k = e.args
        return positive_scalar(base) or (
            type(k) is E.Const and k.value.denominator == 1 and k.value.numerator % 2 == 0
            and _nonzero_scalar(base)
        )  # fmt: skip
    if t is E.Mul:
        return all(positive_scalar(f) for f in e.args)
    if t is E.Add:
        return all(positive_scalar(f) for f in e.args)
    return False


def _nonzero_scalar(e: E.Expr) -> bool:
    return positive_scalar(e)


def _square(e: E.Expr) -> bool:
    return E.is_matrix_shape(e.shape) and e.shape[0] == e.shape[1]


def _palindrome(fs) -> tuple | None:
    """B1 .. Bk M Bkᵀ .. B1ᵀ: returns (outer factors, middle or None), else None."""
    n = len(fs)
    for i in range(n // 2):
        if fs[i] != E.transpose(fs[n - 1 - i]):
            return None
    return fs[: n // 2], (fs[n // 2] if n % 2 else None)


def known_psd(e: E.Expr) -> bool:
    """True when e is known to be symmetric positive semidefinite."""
    if not _square(e):
        return False
    if known_spd(e):
        return True
    t = type(e)
    if t in (E.Named, E.Transpose):
        return known_psd(e.children[-1])
    if t is E.Add:
        return all(known_psd(a) for a in e.args)
    if t is E.Mul:
        arrays = e.array_factors
        return (
            len(arrays) == 1
            and all(positive_scalar(s) for s in e.scalar_factors)
            and (known_psd(arrays[0]))
        )
    if t is E.Kron:
        return known_psd(e.args[0]) and known_psd(e.args[1])
    if t is E.MatMul:
        split = _palindrome(e.args)
        return split is not None and (split[1] is None or known_psd(split[1]))
    return False


def known_spd(e: E.Expr) -> bool:
    """True when e is known to be symmetric positive definite."""
    if not _square(e):
        return False
    if E.is_spd(e):
        return True
    t = type(e)
    if t in (E.Named, E.Transpose, E.Inverse):
        return known_spd(e.children[-1])
    if t is E.Add:
        return all(known_psd(a) for a in e.args) and any(known_spd(a) for a in e.args)
    if t is E.Mul:
        arrays = e.array_factors
        return (
            len(arrays) == 1
            and all(positive_scalar(s) for s in e.scalar_factors)
            and (known_spd(arrays[0]))
        )
    if t is E.Kron:
        return known_spd(e.args[0]) and known_spd(e.args[1])
    if t is E.MatMul:
        split = _palindrome(e.args)
        if split is None or (split[1] is not None and not known_spd(split[1])):
            return False
        return all(
            _square(b) and type(b) is E.Symbol and b.structure & {"invertible", "orthogonal"}
            for b in split[0]
        )
    return False


def known_gram(e: E.Expr) -> bool:
    """True for Bᵀ M B with M known spd (or absent: BᵀB), B any matrix: psd always, and pd
    exactly when B has full column rank; solve(M, B) counts as M⁻¹ B.

    Factored by Cholesky like an spd matrix; a failed factorization then means B lacks full
    column rank (Bᵀ M B is singular) and is reported so, never guessed around.

    >>> from gradwright import derive
    >>> d = derive("X: (n, p)\\nV: (n, n) spd\\nB = X.T @ solve(V, X)\\nf = logdet(B)", wrt="X")
    >>> known_gram(d.expr.args[0])
    True
    """
    while type(e) is E.Named:
        e = e.body
    if not _square(e) or type(e) not in (E.MatMul, E.Solve):
        return False
    from .gls import factors

    fs = factors(e)
    split = _palindrome(fs) if len(fs) > 1 else None
    if split is None:
        return False
    middle = split[1]
    return middle is None or known_spd(middle)


def cholesky_ok(e: E.Expr) -> bool:
    """Factored by Cholesky in generated code: known spd, or a Gram matrix (known_gram)."""
    return known_spd(e) or (type(e) is E.Transpose and known_gram(e.args[0]) or known_gram(e))
