"""The blocks of the reference suites, with hand-written JAX references (reference library: JAX).

Shared by test_reference_gradients.py, test_reference_jacobians.py and test_steps.py, so that
every block whose derivative is checked against JAX also has its displayed steps checked.
Each reference takes every declared symbol by keyword (unused ones land in `**_`).
"""

from __future__ import annotations

from dataclasses import dataclass, field

from checks import jax, jnp, over_shapes

sig = jax.nn.sigmoid
softplus = jax.nn.softplus
lse = jax.scipy.special.logsumexp


def slogdet(a):
    return jnp.linalg.slogdet(a)[1]


def fnorm(a):
    return jnp.sqrt(jnp.sum(a * a))


def vecF(a):
    return jnp.ravel(a, order="F")


@dataclass(frozen=True)
class Case:
    id: str
    block: str
    wrt: tuple
    ref: object = field(compare=False)
    hessian: bool = True  # compare hvp/hessian too (scalar targets)
    xfail: str = ""  # a known engine bug (see ENGINE_BUGS.md): the case is expected to fail


def _c(id_, block, wrt, ref, hessian=True, xfail=""):
    if isinstance(wrt, str):
        wrt = tuple(wrt.split())
    return Case(id_, block, wrt, ref, hessian, xfail)


def bug_reason(case, kind="reference"):
    """The known engine bug that makes `case` fail in a check of this kind, or ''."""
    if kind == "reference":
        return case.xfail
    if kind in ("steps-equal", "readoff"):  # also fails wherever steps cannot be built at all
        return KNOWN_BUGS.get((case.id, kind)) or KNOWN_BUGS.get((case.id, "steps"), "")
    return KNOWN_BUGS.get((case.id, kind), "")


def params(cases, kind="reference"):
    """pytest params, with known engine bugs marked xfail(strict=True)."""
    import pytest

    out = []
    for c in cases:
        reason = bug_reason(c, kind)
        marks = (pytest.mark.xfail(strict=True, reason=f"engine bug: {reason}"),) if reason else ()
        out.append(pytest.param(c, id=c.id, marks=marks))
    return out


G: list[Case] = []

# --- entrywise functions, sums, scalar multiples: over scalar, vector and matrix variables -------

_ENTRYWISE = [
    ("exp", "X: {shape}\nf = sum(exp(X))", lambda X, **_: jnp.sum(jnp.exp(X))),
    ("log", "X: {shape} positive\nf = sum(log(X))", lambda X, **_: jnp.sum(jnp.log(X))),
    ("sqrt", "X: {shape} positive\nf = sum(sqrt(X))", lambda X, **_: jnp.sum(jnp.sqrt(X))),
    ("sin", "X: {shape}\nf = sum(sin(X))", lambda X, **_: jnp.sum(jnp.sin(X))),
    ("cos", "X: {shape}\nf = sum(cos(X) * X)", lambda X, **_: jnp.sum(jnp.cos(X) * X)),
    ("tanh", "X: {shape}\nf = sum(tanh(X))", lambda X, **_: jnp.sum(jnp.tanh(X))),
    ("sigmoid", "X: {shape}\nf = sum(sigmoid(X))", lambda X, **_: jnp.sum(sig(X))),
    ("softplus", "X: {shape}\nf = sum(softplus(X))", lambda X, **_: jnp.sum(softplus(X))),
    (
        "sum-difference-scalar-multiple",
        "X: {shape}\nY: {shape}\nf = sum(3 * X - Y * X / 2 - 0.5 * X * X) + 1",
        lambda X, Y, **_: jnp.sum(3 * X - Y * X / 2 - 0.5 * X * X) + 1,
    ),
    (
        "hadamard",
        "X: {shape}\nY: {shape}\nf = sum(X * Y * X)",
        lambda X, Y, **_: jnp.sum(X * Y * X),
    ),
    (
        "hadamard-division",
        "X: {shape}\nY: {shape} positive\nf = sum(X / Y)",
        lambda X, Y, **_: jnp.sum(X / Y),
    ),
    ("scalar-over-array", "X: {shape} positive\nf = sum(2 / X)", lambda X, **_: jnp.sum(2 / X)),
    ("power-int", "X: {shape}\nf = sum(X ** 3)", lambda X, **_: jnp.sum(X**3)),
    ("power-frac", "X: {shape} positive\nf = sum(X ** 2.5)", lambda X, **_: jnp.sum(X**2.5)),
    (
        "power-symbol",
        "X: {shape} positive\nc: ()\nf = sum(X ** c)",
        lambda X, c, **_: jnp.sum(X**c),
    ),
    ("sum-squared", "X: {shape}\nf = sum(X) * sum(X)", lambda X, **_: jnp.sum(X) ** 2),
]
for name, template, ref in _ENTRYWISE:
    for kind, block in over_shapes(template):
        G.append(_c(f"{name}-{kind}", block, "X", ref))
# the second argument of the entrywise binary operations, and the scalar exponent
for kind, block in over_shapes(_ENTRYWISE[10][1]):
    G.append(_c(f"hadamard-division-denominator-{kind}", block, "Y", _ENTRYWISE[10][2]))
for kind, block in over_shapes(_ENTRYWISE[14][1]):
    G.append(_c(f"power-symbol-exponent-{kind}", block, "X c", _ENTRYWISE[14][2]))
for kind, block in over_shapes("X: {shape}\nc: ()\nf = sum((X - c) ** 2) * c"):
    G.append(
        _c(f"scalar-broadcast-{kind}", block, "c X", lambda X, c, **_: jnp.sum((X - c) ** 2) * c)
    )
for kind, block in over_shapes("X: {shape}\nc: ()\nf = sum(X + c) + sum(1 - X * c)", ("vector", "matrix")):  # fmt: skip
    G.append(
        _c(
            f"sum-of-broadcast-{kind}",
            block,
            "c X",
            lambda X, c, **_: jnp.sum(X + c) + jnp.sum(1 - X * c),
        )
    )

# --- norms and log-sum-exp over vectors and matrices --------------------------------------------
for kind, block in over_shapes("X: {shape}\nf = norm(X)", ("vector", "matrix")):
    G.append(_c(f"norm-{kind}", block, "X", lambda X, **_: fnorm(X)))
for kind, block in over_shapes("X: {shape}\nf = logsumexp(X)", ("vector", "matrix")):
    G.append(_c(f"logsumexp-{kind}", block, "X", lambda X, **_: lse(X)))
for kind, block in over_shapes("X: {shape}\nY: {shape}\nf = norm(X - Y) ** 2 + logsumexp(Y * X)", ("vector", "matrix")):  # fmt: skip
    G.append(
        _c(
            f"norm-logsumexp-two-vars-{kind}",
            block,
            "X Y",
            lambda X, Y, **_: fnorm(X - Y) ** 2 + lse(Y * X),
        )
    )

# --- matrix products in the four 1-D / 2-D combinations, transpose, trace -----------------------
M = "A: (n, k)\nB: (k, p)\nC: (p, n)\nx: (k,)\ny: (n,)\nz: (k,)\n"
G += [
    _c("matmul-2d-2d", M + "f = trace(C @ A @ B)", "A B", lambda A, B, C, **_: jnp.trace(C @ A @ B)),
    _c("matmul-2d-1d", M + "f = sum(tanh(A @ x))", "A x", lambda A, x, **_: jnp.sum(jnp.tanh(A @ x))),
    _c("matmul-1d-2d", M + "f = sum((y @ A) ** 2)", "y A", lambda y, A, **_: jnp.sum((y @ A) ** 2)),
    _c("matmul-1d-1d", M + "f = (x @ z) ** 2 + x @ x", "x z", lambda x, z, **_: (x @ z) ** 2 + x @ x),
    _c("quadratic-form", M + "f = y @ A @ x", "y x A", lambda y, A, x, **_: y @ A @ x),
    _c("transpose", M + "f = sum(A.T @ C.T)", "A C", lambda A, C, **_: jnp.sum(A.T @ C.T)),
    _c("trace", "X: (n, n)\nA: (n, n)\nf = trace(X) + trace(A @ X.T)", "X", lambda X, A, **_: jnp.trace(X) + jnp.trace(A @ X.T)),
    _c("trace-gram", "X: (n, k)\nf = trace(X.T @ X)", "X", lambda X, **_: jnp.trace(X.T @ X)),
]  # fmt: skip

# --- inverse, solve, det, logdet ------------------------------------------------------------------
SQ = "X: (n, n) invertible\nA: (n, n)\nB: (n, k)\nb: (n,)\n"
G += [
    _c("inv", SQ + "f = sum(inv(X))", "X", lambda X, **_: jnp.sum(jnp.linalg.inv(X))),
    _c("inv-trace", SQ + "f = trace(inv(X) @ A)", "X A", lambda X, A, **_: jnp.trace(jnp.linalg.inv(X) @ A)),
    _c("solve-matrix", SQ + "f = sum(solve(X, B) ** 2)", "X B", lambda X, B, **_: jnp.sum(jnp.linalg.solve(X, B) ** 2)),
    _c("solve-vector", SQ + "f = b @ solve(X, b)", "X b", lambda X, b, **_: b @ jnp.linalg.solve(X, b)),
    _c("det", SQ + "f = det(X)", "X", lambda X, **_: jnp.linalg.det(X)),
    _c("det-product", SQ + "f = det(A @ X) + det(X) ** 2", "X", lambda X, A, **_: jnp.linalg.det(A @ X) + jnp.linalg.det(X) ** 2),
    _c("logdet", SQ + "f = logdet(X)", "X", lambda X, **_: slogdet(X)),
    _c("logdet-gram", "X: (m, n)\nf = logdet(X.T @ X)", "X", lambda X, **_: slogdet(X.T @ X)),
]  # fmt: skip

# --- kron, vec, diag, diagm, softmax, mpow, outer --------------------------------------------------
G += [
    _c("kron-matrix", "A: (m, n)\nX: (p, q)\nC: (m*p, n*q)\nf = sum(kron(A, X) * C)", "A X", lambda A, X, C, **_: jnp.sum(jnp.kron(A, X) * C)),
    _c("kron-vector", "x: (n,)\ny: (k,)\nz: (n*k,)\nf = kron(x, y) @ z", "x y", lambda x, y, z, **_: jnp.kron(x, y) @ z),
    _c("kron-trace", "A: (n, n)\nX: (k, k)\nf = trace(kron(A, X))", "X", lambda A, X, **_: jnp.trace(jnp.kron(A, X))),
    _c("vec", "X: (n, k)\nA: (n, k)\nf = vec(X) @ vec(A) + sum(vec(X) ** 3)", "X", lambda X, A, **_: vecF(X) @ vecF(A) + jnp.sum(vecF(X) ** 3)),
    _c("diag", "X: (n, n)\nv: (n,)\nf = sum(diag(X) ** 2) + diag(X) @ v", "X", lambda X, v, **_: jnp.sum(jnp.diag(X) ** 2) + jnp.diag(X) @ v),
    _c("diagm", "x: (n,)\nA: (n, n)\nf = trace(diagm(x) @ A) + sum(diagm(x) @ A @ diagm(x))", "x", lambda x, A, **_: jnp.trace(jnp.diag(x) @ A) + jnp.sum(jnp.diag(x) @ A @ jnp.diag(x))),
    _c("softmax", "x: (n,)\ny: (n,)\nf = y @ softmax(x) + sum(softmax(x) ** 2)", "x", lambda x, y, **_: y @ jax.nn.softmax(x) + jnp.sum(jax.nn.softmax(x) ** 2)),
    _c("mpow", "X: (n, n)\nA: (n, n)\nf = trace(mpow(X, 3)) + sum(mpow(X, 2) * A)", "X", lambda X, A, **_: jnp.trace(jnp.linalg.matrix_power(X, 3)) + jnp.sum(jnp.linalg.matrix_power(X, 2) * A)),
    _c("outer", "x: (n,)\ny: (k,)\nA: (k, n)\nf = sum(outer(x, y) ** 2) + trace(outer(x, y) @ A)", "x y", lambda x, y, A, **_: jnp.sum(jnp.outer(x, y) ** 2) + jnp.trace(jnp.outer(x, y) @ A)),
]  # fmt: skip

# --- constants in formulas, definitions, several variables ----------------------------------------
G += [
    _c("eye", "X: (n, n)\nf = sum((X + 2 * eye(n)) ** 2) + trace(eye(n) @ X)", "X", lambda X, **_: jnp.sum((X + 2 * jnp.eye(X.shape[0])) ** 2) + jnp.trace(X)),
    _c("ones", "X: (n, k)\nf = ones(n) @ X @ ones(k) + sum(X * ones(n, k) * X)", "X", lambda X, **_: jnp.sum(X) + jnp.sum(X * X)),
    _c("zeros", "X: (n, k)\nf = sum((X - zeros(n, k)) * X) + sum(zeros(k) + 1)", "X", lambda X, **_: jnp.sum(X * X) + X.shape[1]),
    _c("definitions", "X: (n, p)\nW: (p, k)\nY: (n, k)\nR = X @ W - Y\nf = sum(R ** 2)", "W", lambda X, W, Y, **_: jnp.sum((X @ W - Y) ** 2)),
    _c("factorization", "P: (m, n)\nU: (m, r)\nV: (n, r)\nmu: ()\nR = P - U @ V.T\nf = sum(R ** 2) + mu * (sum(U ** 2) + sum(V ** 2))", "U V mu", lambda P, U, V, mu, **_: jnp.sum((P - U @ V.T) ** 2) + mu * (jnp.sum(U**2) + jnp.sum(V**2))),
    _c("robot-arm-loss", "W1: (h, d)\nW2: (o, h)\nx: (d,)\nt: (o,)\nz = tanh(W1 @ x)\nf = sum((W2 @ z - t) ** 2)", "W1 W2", lambda W1, W2, x, t, **_: jnp.sum((W2 @ jnp.tanh(W1 @ x) - t) ** 2)),
    _c("ridge", "X: (n, p)\nw: (p,)\ny: (n,)\nlam: ()\nf = sum((X @ w - y) ** 2) + lam * sum(w ** 2)", "w lam", lambda X, w, y, lam, **_: jnp.sum((X @ w - y) ** 2) + lam * jnp.sum(w**2)),
    _c("logistic", "X: (n, p)\nw: (p,)\ny: (n,)\nf = sum(softplus(X @ w)) - y @ (X @ w)", "w", lambda X, w, y, **_: jnp.sum(softplus(X @ w)) - y @ (X @ w)),
]  # fmt: skip

# --- structured variables: symmetric, spd, diagonal (compare with the projected reference) --------
G += [
    _c("symmetric-quadratic", "S: (n, n) symmetric\nx: (n,)\nA: (n, n)\nf = x @ S @ x + trace(S @ A @ S)", "S", lambda S, x, A, **_: x @ S @ x + jnp.trace(S @ A @ S)),
    _c("spd-gaussian", "S: (n, n) spd\nZ: (m, n)\nc: ()\nf = c * logdet(S) + trace(solve(S, Z.T @ Z))", "S c", lambda S, Z, c, **_: c * slogdet(S) + jnp.trace(jnp.linalg.solve(S, Z.T @ Z))),
    _c("spd-inverse", "S: (n, n) spd\nA: (n, n)\nf = trace(inv(S) @ A) + det(S)", "S", lambda S, A, **_: jnp.trace(jnp.linalg.inv(S) @ A) + jnp.linalg.det(S)),
    _c("diagonal-trace", "D: (n, n) diagonal\nA: (n, n)\nf = trace(D @ A) + sum((A @ D) ** 2)", "D", lambda D, A, **_: jnp.trace(D @ A) + jnp.sum((A @ D) ** 2)),
    _c("diagonal-logdet", "D: (n, n) diagonal\nA: (n, n)\nf = logdet(D) + sum(D * A)", "D", lambda D, A, **_: slogdet(D) + jnp.sum(D * A)),
]  # fmt: skip

# --- vector transposes, negation, symbol over array, trivial matrix powers ----------------------
G += [
    _c("vector-transpose", "x: (n,)\nA: (n, n)\nf = x.T @ A @ x + sum((x.T @ A) ** 2)", "x A", lambda x, A, **_: x @ A @ x + jnp.sum((x @ A) ** 2)),
    _c("negation", "X: (n, k)\nY: (n, k)\nf = sum(-X * Y) - sum(-(X ** 2))", "X", lambda X, Y, **_: jnp.sum(-X * Y) + jnp.sum(X**2)),
    _c("symbol-over-array", "X: (n, k) positive\nc: ()\nf = sum(c / X)", "c X", lambda X, c, **_: jnp.sum(c / X)),
    _c("mpow-0-1", "X: (n, n)\nA: (n, n)\nf = trace(mpow(X, 1) @ A) + trace(mpow(X, 0) @ X)", "X", lambda X, A, **_: jnp.trace(X @ A) + jnp.trace(X)),
    _c("nested-definitions", "X: (n, k)\nW: (k, p)\nb: (p,)\nH = tanh(X @ W)\nZ = H @ b\nf = logsumexp(Z) + norm(H)", "W b", lambda X, W, b, **_: lse(jnp.tanh(X @ W) @ b) + fnorm(jnp.tanh(X @ W))),
]  # fmt: skip

# --- product and literal dims, the commutation matrix ---------------------------------------------
G += [
    _c("product-dims", "K: (m*n, p)\nx: (p,)\nf = sum((K @ x) ** 2)", "x K", lambda K, x, **_: jnp.sum((K @ x) ** 2)),
    _c("kron-product-dims", "A: (m, n)\nB: (p, q)\nK: (m*p, n*q)\nf = trace(kron(A, B).T @ K)", "A B", lambda A, B, K, **_: jnp.trace(jnp.kron(A, B).T @ K)),
    _c("literal-dims", "A: (3, 2)\nx: (2,)\nf = sum(A @ x) * sum(x)", "x A", lambda A, x, **_: jnp.sum(A @ x) * jnp.sum(x)),
    _c("commutation", "X: (m, n)\nY: (n, m)\nf = (commutation(m, n) @ vec(X)) @ vec(Y) + sum(X * Y.T)", "X", lambda X, Y, **_: 2 * jnp.sum(X * Y.T)),
]  # fmt: skip

GRADIENT_CASES = G

# --- vector- and matrix-valued targets -------------------------------------------------------------
J: list[Case] = [
    _c("map-sandwich", "A: (m, n)\nX: (n, p)\nB: (p, q)\nF = A @ X @ B", "X A", lambda A, X, B, **_: A @ X @ B),
    _c("map-inverse", "X: (n, n) invertible\nF = inv(X)", "X", lambda X, **_: jnp.linalg.inv(X)),
    _c("map-transpose", "X: (m, n)\nF = X.T", "X", lambda X, **_: X.T),
    _c("map-hadamard", "X: (m, n)\nY: (m, n)\nF = X * Y * X", "X Y", lambda X, Y, **_: X * Y * X),
    _c("map-division", "X: (m, n)\nY: (m, n) positive\nF = X / Y + 1 / Y", "X Y", lambda X, Y, **_: X / Y + 1 / Y),
    _c("map-entrywise-tanh", "A: (m, n)\nX: (n, p)\nF = tanh(A @ X)", "X", lambda A, X, **_: jnp.tanh(A @ X)),
    _c("map-entrywise-mix", "X: (m, n) positive\nF = exp(X) + log(X) * sqrt(X) - sin(X) * cos(X) + sigmoid(X) + softplus(X)", "X", lambda X, **_: jnp.exp(X) + jnp.log(X) * jnp.sqrt(X) - jnp.sin(X) * jnp.cos(X) + sig(X) + softplus(X)),
    _c("map-robot-arm", "W1: (h, d)\nW2: (o, h)\nx: (d,)\nF = tanh(W2 @ tanh(W1 @ x))", "W1 W2", lambda W1, W2, x, **_: jnp.tanh(W2 @ jnp.tanh(W1 @ x))),
    _c("map-softmax", "x: (n,)\nF = softmax(x)", "x", lambda x, **_: jax.nn.softmax(x)),
    _c("map-kron", "A: (m, n)\nB: (p, q)\nF = kron(A, B)", "A B", lambda A, B, **_: jnp.kron(A, B)),
    _c("map-vec", "A: (m, n)\nF = vec(A)", "A", lambda A, **_: vecF(A)),
    _c("map-diag", "X: (n, n)\nF = diag(X)", "X", lambda X, **_: jnp.diag(X)),
    _c("map-diagm", "x: (n,)\nF = diagm(x)", "x", lambda x, **_: jnp.diag(x)),
    _c("map-vector-matrix", "x: (n,)\nA: (n, k)\nF = x @ A", "x A", lambda x, A, **_: x @ A),
    _c("map-matrix-vector", "x: (k,)\nA: (n, k)\nF = A @ x", "x A", lambda x, A, **_: A @ x),
    _c("map-gram", "X: (m, n)\nF = X.T @ X", "X", lambda X, **_: X.T @ X),
    _c("map-solve", "A: (n, n) invertible\nB: (n, k)\nF = solve(A, B)", "A B", lambda A, B, **_: jnp.linalg.solve(A, B)),
    _c("map-mpow", "X: (n, n)\nF = mpow(X, 3)", "X", lambda X, **_: jnp.linalg.matrix_power(X, 3)),
    _c("map-outer", "x: (n,)\ny: (k,)\nF = outer(x, y)", "x y", lambda x, y, **_: jnp.outer(x, y)),
    _c("map-scalar-times-matrix", "c: ()\nX: (m, n)\nF = c * X + c ** 2 * eye(m) @ X", "c X", lambda c, X, **_: c * X + c**2 * X),
    _c("map-power", "X: (m, n) positive\nc: ()\nF = X ** 3 + X ** c", "X c", lambda X, c, **_: X**3 + X**c),
    _c("map-solve-vector", "A: (n, n) invertible\nb: (n,)\nF = solve(A, b)", "A b", lambda A, b, **_: jnp.linalg.solve(A, b)),
    _c("map-definitions", "X: (n, k)\nW: (k, p)\nH = sigmoid(X @ W)\nF = H.T @ H", "W", lambda X, W, **_: sig(X @ W).T @ sig(X @ W)),
    _c("map-symmetric", "S: (n, n) symmetric\nF = S @ S", "S", lambda S, **_: S @ S),
    _c("map-spd-inverse", "S: (n, n) spd\nF = inv(S)", "S", lambda S, **_: jnp.linalg.inv(S)),
    _c("map-diagonal", "D: (n, n) diagonal\nA: (n, n)\nF = D @ A @ D", "D", lambda D, A, **_: D @ A @ D),
    _c("map-det-times", "X: (n, n) invertible\nF = det(X) * inv(X)", "X", lambda X, **_: jnp.linalg.det(X) * jnp.linalg.inv(X)),
]  # fmt: skip

JACOBIAN_CASES = J

#: cases whose compact Kronecker form does not exist (diag/diagm/kron of the variable)
NO_KRONECKER_FORM = {"map-kron", "map-diag", "map-diagm"}

#: (case id, kind of check) -> the engine bug that makes it fail
#: kinds: "kronecker" (the compact Jacobian), "dense" (jacobian_function), "steps" (building
#: the steps at all), "steps-equal" (consecutive steps agree), "readoff" (read-off lines equal
#: the generated functions). Bugs 1-3 and 7 of ENGINE_BUGS.md were listed here while open.
KNOWN_BUGS: dict[tuple[str, str], str] = {}
