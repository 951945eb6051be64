"""One line per construct of the formula language: what NumPy does, what gradwright derives.

Shown by `%%derive?` and mirrored in the README's formula-language section. A family of
functions adds its own lines to CONSTRUCTS.
"""

from __future__ import annotations

#: (written, what NumPy computes, what gradwright derives)
CONSTRUCTS: list[tuple[str, str, str]] = [
    (
        "X @ W + b   (b: (h,), X @ W: (n, h))",
        "adds b to every row (a vector lines up with the last axis)",
        "the broadcast is 1ₙ bᵀ; the gradient wrt b sums over the rows, 1ₙᵀ G",
    ),
    (
        "A + c, A * r, A / r   (c: (n, 1), r: (1, h))",
        "broadcasts unit axes: c across the columns, r down the rows",
        "c 1ₕᵀ and 1ₙ r; gradients sum over the broadcast axis",
    ),
    (
        "x[:, None], x[None, :]",
        "a vector as an (n, 1) column / (1, n) row matrix",
        "the outer product of x with a length-1 ones vector; linear",
    ),
    (
        "x[0], x[-2:], x[a:b], X[i, j], X[:, j], X[i], X[a:b, c:d], X[:n]",
        "constant indexing and slicing; a single index drops its axis (X[:, j] is 1-D); "
        "positions are integer literals or dims; no steps; x[1:] only on axes of fixed length",
        "linear; the gradient puts G in place inside zeros (eye(n)[a:b].T @ G)",
    ),
    (
        "n / 2 * log(2 * pi), sqrt(e), eye(n*n), zeros(n, 2*k)",
        "a dim used in a formula is its size; pi is π",
        "constants known at call time (no other named constant: e is a symbol name)",
    ),
    (
        "unvec(g, r, c), kron_contract_left(G, B), kron_contract_right(G, A)",
        "(not NumPy) the forms printed results use: column-major unvec, adjoints of kron",
        "linear; present so that every printed result pastes back",
    ),
]

#: names the language keeps for itself: its functions, the constant pi, and the names the
#: generated module imports; `T` and `d` are ordinary names
RESERVED_NOTE = (
    "Reserved names: every function name, pi, and np, numpy, scipy, warnings, cho_factor, "
    "cho_solve (the generated module's imports). T and d are ordinary symbol names."
)


def language_help() -> str:
    """The constructs as plain text, for `%%derive?`."""
    lines = ["", "Formula language (NumPy's meaning; beyond @ .T + - * / ** and the functions):"]
    for written, numpy, derived in CONSTRUCTS:
        lines.append(f"  {written}")
        lines.append(f"      NumPy: {numpy}")
        lines.append(f"      derived: {derived}")
    lines.append(RESERVED_NOTE)
    return "\n".join(lines) + "\n"
