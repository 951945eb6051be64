"""One line per NumPy construct of the language: what NumPy computes, what gradwright derives.

Shown by `%%derive?` (appended to the magic's help) and mirrored in the README's formula
language section; tests/test_language_help.py checks that every line's example parses.
"""

from __future__ import annotations

#: (example as written, what NumPy/SciPy computes, what gradwright derives)
NUMPY_CONSTRUCTS: tuple[tuple[str, str, str], ...] = (
    ("sum(A, axis=0), sum(A, axis=-1, keepdims=True)",
     "the sum over an axis; (n, k) gives (k,) over axis 0, (n, 1) with keepdims",
     "linear, 1ᵀA or A1; the adjoint repeats the cotangent along the summed axis"),
    ("mean(A), mean(A, axis=1)",
     "the average of all entries or along an axis",
     "the sum divided by the number of entries (shown as n, n k)"),
    ("max(A, axis=1), min(A, axis=0, keepdims=True), max(A)",
     "the largest (smallest) entry of each row, column or of all entries",
     "the entries attaining it, each weighted 1/(number of ties), as JAX; shown as "
     "max_weights(A, axis=1)"),
    ("norm(A, axis=1)",
     "np.linalg.norm of each row (axis=1) or column (axis=0)",
     "A divided by its row norms; nan at a zero row, as JAX"),
    ("logsumexp(Z, axis=1, keepdims=True)",
     "scipy.special.logsumexp over the axis",
     "weights softmax(Z, axis=1); value, gradient and HVP computed max-shifted"),
    ("softmax(Z, axis=1), log_softmax(Z, axis=0)",
     "scipy.special.softmax / log_softmax; a matrix needs axis= (axis=None: all entries)",
     "S ∘ (dZ − the row sums of S ∘ dZ, repeated); computed max-shifted"),
    ("abs(x), sign(x)",
     "the absolute value; -1, 0 or 1",
     "sign(x), 0 at x = 0 (the smallest subgradient; JAX gives 1 there); sign has derivative 0"),
    ("maximum(Z, 0), minimum(A, B)",
     "the entrywise larger (smaller) value; either argument may be a scalar",
     "heaviside(A - B, 0.5): a tie shares the derivative equally, as JAX"),
    ("cosh(x), sinh(x), arctan(x), log1p(x), expm1(x)",
     "NumPy's entrywise functions",
     "sinh, cosh, 1/(1 + x²), 1/(1 + x), exp"),
    ("square(x), reciprocal(x)",
     "x**2 and 1/x entrywise",
     "read as x**2 and x**-1"),
    ("erf(x)",
     "scipy.special.erf (probit models)",
     "2 exp(-x²)/√π"),
    ("gammaln(x), digamma(x)",
     "scipy.special.gammaln, digamma",
     "digamma(x), then polygamma(1, x), up to polygamma(3, x)"),
    ("log(exp(Z) @ ones(k)), log(sum(exp(x))), log(1 + exp(x)), log(sigmoid(x))",
     "the same values, which overflow to inf at logits of a few hundred",
     "read as logsumexp(Z, axis=1), logsumexp(x), softplus(x), -softplus(-x): finite at ±3000"),
    ("heaviside(x, 0.5), max_weights(Z, axis=1), polygamma(1, x)",
     "NumPy's/SciPy's step and polygamma; the max tie weights",
     "appear in printed derivatives and parse back"),
)  # fmt: skip


def numpy_constructs_help() -> str:
    """The constructs as plain text, one entry per construct (for `%%derive?`).

    >>> numpy_constructs_help().splitlines()[0]
    'NumPy constructs (written -- NumPy computes -- gradwright derives):'
    """
    lines = ["NumPy constructs (written -- NumPy computes -- gradwright derives):"]
    for written, numpy_does, derives in NUMPY_CONSTRUCTS:
        lines.append(f"  {written} -- {numpy_does} -- {derives}")
    return "\n".join(lines)
