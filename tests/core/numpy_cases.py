"""Blocks written the way NumPy users write models: broadcasting, indexing, dims as numbers.

Each case is checked by tests/test_meaning.py: the value equals what NumPy computes from the
same text, and the gradient (scalar targets) or vector-Jacobian product (array targets) equals
JAX's derivative of that same text (reference library: JAX). Sizes come from
checks.DEFAULT_SIZES (n=3, k=4, p=2, m=5, h=4, ...), so `X[:n]` of an (m, p) matrix is in range.
"""

from __future__ import annotations

from dataclasses import dataclass


@dataclass(frozen=True)
class NumpyCase:
    id: str
    block: str
    wrt: tuple


def _c(id_, block, wrt):
    return NumpyCase(id_, block, tuple(wrt.split()))


LAYER = "X: (n, p)\nW: (p, h)\nb: (h,)\nY: (n, h)\n"

BROADCAST = [
    _c("bias-row", LAYER + "f = sum((tanh(X @ W + b) - Y) ** 2)", "W b"),
    _c("bias-left", LAYER + "f = sum((b - X @ W) ** 2) + sum(b + Y)", "W b"),
    _c("bias-defined", LAYER + "H = tanh(X @ W + b)\nf = sum(H * Y) + sum(H ** 2)", "W b"),
    _c("bias-product", LAYER + "f = sum(Y * b * Y) + sum(X @ W * b)", "b W"),
    _c("bias-division", LAYER + "f = sum(Y / (1 + b ** 2))", "b"),
    _c("bias-scalar-over", LAYER + "f = sum(2 / (1 + b ** 2) + Y)", "b"),
    _c("column-matrix", "X: (n, h)\nc: (n, 1)\nf = sum(exp(X - c)) + sum(c * X)", "c X"),
    _c("row-matrix", "X: (n, h)\nr: (1, h)\nf = sum(X * r) + sum((r - X) ** 2)", "r X"),
    _c("column-times-row", "c: (n, 1)\nr: (1, h)\nY: (n, h)\nf = sum(Y * (c * r + c))", "c r"),
    _c("column-plus-vector", "c: (n, 1)\nx: (n,)\nf = sum(sin(c + x))", "c x"),
    _c("new-axis-column", "x: (n,)\nX: (n, h)\nf = sum((X - x[:, None]) ** 2)", "x X"),
    _c("new-axis-row", "y: (h,)\nX: (n, h)\nf = sum(X * y[None, :]) + sum(y[None] * X)", "y"),
    _c("new-axis-outer", "x: (n,)\ny: (h,)\nA: (n, h)\nf = sum(x[:, None] * y[None, :] * A)", "x y"),
    _c("length-one-vector", "a: (1,)\nx: (n,)\nf = sum((x + a) ** 2) + sum(a * x)", "a x"),
    _c("one-by-one", "a: (1, 1)\nX: (n, h)\nf = sum(X / (2 + a ** 2))", "a"),
    _c("square-bias-rows", "A: (n, n)\nv: (n,)\nf = sum(tanh(A + v) * A)", "v A"),
    _c("poisson-intercepts", "X: (n, p)\nW: (p, k)\nb: (k,)\nY: (n, k)\nZ = X @ W + b\nf = sum(exp(Z)) - sum(Y * Z)", "W b"),
]  # fmt: skip

INDEXING = [
    _c("vector-first", "theta: (p,)\nX: (n, p)\nf = theta[0] ** 2 + sum(X @ theta)", "theta"),
    _c("vector-last-two", "x: (n,)\nf = sum(x[-2:] ** 2) * x[-1]", "x"),
    _c("vector-literal-slice", "x: (k,)\nf = x[1:3] @ x[0:2]", "x"),
    _c("vector-up-to-dim", "x: (m,)\nA: (n, n)\nf = x[:n] @ A @ x[:n]", "x"),
    _c("matrix-column", "X: (n, k)\nf = sum(X[:, 1] ** 2) + X[:, -1] @ X[:, 0]", "X"),
    _c("matrix-row", "X: (n, k)\nw: (k,)\nf = X[2, :] @ w + X[0] @ w", "X w"),
    _c("matrix-entry", "X: (n, k)\nf = X[1, 2] * X[0, 0] + X[-1, -1] ** 2", "X"),
    _c("matrix-block", "X: (m, k)\nf = sum(X[0:2, 1:3] ** 2) + sum(X[-2:, :2])", "X"),
    _c("matrix-first-rows", "X: (m, p)\nA: (n, n)\nf = trace(X[:n].T @ A @ X[:n])", "X"),
    _c("literal-axis", "v: (5,)\nf = v[1:] @ v[:-1] + v[-1]", "v"),
    _c("index-of-expression", "A: (n, k)\nB: (k, n)\nf = (A @ B)[0, 1] + sum((A @ B)[1])", "A B"),
]  # fmt: skip

NUMBERS = [
    _c("gaussian-nll", "x: (n,)\nmu: ()\ns: () positive\nf = n / 2 * log(2 * pi * s) + sum((x - mu) ** 2) / (2 * s)", "mu s"),
    _c("attention-scale", "Q: (t, e)\nK: (t, e)\nf = logsumexp(Q @ K.T / sqrt(e))", "Q K"),
    _c("dim-products", "A: (n, n)\nB: (n, n)\nC: (n, k)\nf = trace(kron(A, B) @ eye(n*n)) + sum(zeros(n, 2*k) + C[:, :1]) + ones(n*n) @ vec(A @ B)", "A B"),
    _c("mean-by-hand", "X: (n, k)\nf = sum(X) / (n * k) + sum(X ** 2) / n", "X"),
    _c("symbols-T-and-d", "T: (n, n)\nd: (n,)\nf = d @ T @ d + sum(T.T * T)", "T d"),
    _c("symbol-e", "e: ()\nx: (n,)\nf = e * sum(x) + e ** 2", "e x"),
]  # fmt: skip

ARRAY_TARGETS = [
    _c("map-bias", LAYER + "F = X @ W + b", "W b"),
    _c("map-column", "X: (n, k)\nF = X[:, 1]", "X"),
    _c("map-block", "X: (m, k)\nF = X[1:3, -2:]", "X"),
    _c("map-outer-axes", "x: (n,)\ny: (h,)\nF = x[:, None] * y[None, :]", "x y"),
    _c("map-slice-vector", "x: (m,)\ny: (n,)\nF = x[:n] * y", "x y"),
    _c("map-dim-scale", "X: (n, k)\nF = X / n + pi", "X"),
]  # fmt: skip

# reductions over an axis, softmax over an axis, maximum/minimum, the NumPy entrywise functions
REDUCTIONS = [
    _c("ferry-logit", LAYER + "Z = X @ W + b\nf = sum(logsumexp(Z, axis=1)) - sum(Y * Z)", "W b"),
    _c("log-softmax-by-hand", "Z: (n, k)\nY: (n, k)\nf = -sum(Y * (Z - logsumexp(Z, axis=1, keepdims=True)))", "Z"),
    _c("log-softmax-rows", "Z: (n, k)\nY: (n, k)\nf = -sum(Y * log_softmax(Z, axis=-1))", "Z"),
    _c("relu-layer", LAYER + "H = maximum(X @ W + b, 0)\nf = sum((H - Y) ** 2)", "W b"),
    _c("axis-sums", "R: (n, k)\nf = sum(sum(R ** 2, axis=0) ** 2) + mean(R, axis=-1) @ mean(R, axis=1)", "R"),
    _c("max-min-axis", "X: (n, k)\nf = sum(max(X, axis=1) ** 2) - sum(min(X, axis=0, keepdims=True))", "X"),
    _c("max-centred", "Z: (n, k)\nf = sum(exp(Z - max(Z, axis=1, keepdims=True)))", "Z"),
    _c("norm-rows", "X: (n, k)\nf = sum(norm(X, axis=1)) + norm(X, axis=0) @ norm(X, axis=0)", "X"),
    _c("softmax-columns", "Z: (n, k)\nY: (n, k)\nf = sum(Y * softmax(Z, axis=0)) + sum(softmax(Z, axis=1)[0] ** 2)", "Z"),
    _c("entrywise-zoo", "x: (n,)\nf = sum(abs(x) + cosh(x) + sinh(x) ** 2 + arctan(x) + expm1(x) + square(x) + erf(x))", "x"),
    _c("positive-zoo", "x: (n,) positive\nnu: () positive\nf = sum(log1p(x) + reciprocal(x) + gammaln(nu * x)) + digamma(nu)", "x nu"),
    _c("stable-forms", "Z: (n, k)\nx: (n,)\nf = sum(log(exp(Z) @ ones(k))) + log(sum(exp(x))) + sum(log(1 + exp(x)))", "Z x"),
    _c("minimum-scalar", "x: (n,)\nc: ()\nf = sum(minimum(x, c) ** 2 + maximum(c, x))", "x c"),
    _c("map-row-logsumexp", "Z: (n, k)\nF = logsumexp(Z, axis=1, keepdims=True)", "Z"),
    _c("map-softmax-rows", "Z: (n, k)\nF = softmax(Z, axis=1)", "Z"),
    _c("map-relu-bias", LAYER + "F = maximum(X @ W + b, 0)", "W b"),
    _c("map-column-max", "Z: (n, k)\nF = max(Z, axis=0)", "Z"),
]  # fmt: skip

NUMPY_CASES = BROADCAST + INDEXING + NUMBERS + ARRAY_TARGETS + REDUCTIONS
