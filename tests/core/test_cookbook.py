"""Derivative results from K. B. Petersen and M. S. Pedersen, *The Matrix Cookbook*
(version of November 15, 2012). Equation numbers are from memory.

The engine's gradient EXPRESSION, evaluated by the reference evaluator, is compared with the
closed form written directly in NumPy, at random points.
"""

from __future__ import annotations

import numpy as np
import pytest

from checks import assert_close, random_point, sizes_for
from gradwright import derive
from gradwright.evaluate import evaluate

inv = np.linalg.inv
det = np.linalg.det
mpow = np.linalg.matrix_power
I = np.eye  # noqa: E741

#: (cookbook eq., block, variable, closed form as a function of the arrays)
COOKBOOK = [
    # --- traces, first order (section 2.5.1) ---
    ("(99) d tr(X)/dX = I", "X: (n, n)\nf = trace(X)", "X", lambda X, **_: I(len(X))),
    ("(100) d tr(XA)/dX = A^T", "X: (n, n)\nA: (n, n)\nf = trace(X @ A)", "X", lambda A, **_: A.T),
    ("(100) d tr(AX)/dX = A^T", "X: (k, n)\nA: (n, k)\nf = trace(A @ X)", "X", lambda A, **_: A.T),
    ("(101) d tr(AXB)/dX = A^T B^T", "A: (p, n)\nX: (n, k)\nB: (k, p)\nf = trace(A @ X @ B)", "X", lambda A, B, **_: A.T @ B.T),
    ("(102) d tr(AX^T B)/dX = BA", "A: (p, k)\nX: (n, k)\nB: (n, p)\nf = trace(A @ X.T @ B)", "X", lambda A, B, **_: B @ A),
    ("(103) d tr(X^T A)/dX = A", "X: (n, k)\nA: (n, k)\nf = trace(X.T @ A)", "X", lambda A, **_: A),
    ("(104) d tr(AX^T)/dX = A", "X: (n, k)\nA: (n, k)\nf = trace(A @ X.T)", "X", lambda A, **_: A),
    ("(105) d tr(A kron X)/dX = tr(A) I", "A: (k, k)\nX: (n, n)\nf = trace(kron(A, X))", "X", lambda A, X, **_: np.trace(A) * I(len(X))),
    # --- traces, second order (section 2.5.2) ---
    ("(106) d tr(X^2)/dX = 2 X^T", "X: (n, n)\nf = trace(X @ X)", "X", lambda X, **_: 2 * X.T),
    ("(107) d tr(X^2 B)/dX = (XB + BX)^T", "X: (n, n)\nB: (n, n)\nf = trace(X @ X @ B)", "X", lambda X, B, **_: (X @ B + B @ X).T),
    ("(108) d tr(X^T B X)/dX = BX + B^T X", "X: (n, k)\nB: (n, n)\nf = trace(X.T @ B @ X)", "X", lambda X, B, **_: B @ X + B.T @ X),
    ("(109) d tr(B X X^T)/dX = BX + B^T X", "X: (n, k)\nB: (n, n)\nf = trace(B @ X @ X.T)", "X", lambda X, B, **_: B @ X + B.T @ X),
    ("(111) d tr(X B X^T)/dX = X B^T + X B", "X: (n, k)\nB: (k, k)\nf = trace(X @ B @ X.T)", "X", lambda X, B, **_: X @ B.T + X @ B),
    ("(114) d tr(AXBX)/dX = A^T X^T B^T + B^T X^T A^T", "A: (k, n)\nX: (n, k)\nB: (k, n)\nf = trace(A @ X @ B @ X)", "X", lambda A, X, B, **_: A.T @ X.T @ B.T + B.T @ X.T @ A.T),
    ("(115) d tr(X^T X)/dX = 2X", "X: (n, k)\nf = trace(X.T @ X)", "X", lambda X, **_: 2 * X),
    ("(116) d tr(B^T X^T C X B)/dX = C^T X B B^T + C X B B^T", "B: (k, p)\nX: (n, k)\nC: (n, n)\nf = trace(B.T @ X.T @ C @ X @ B)", "X", lambda B, X, C, **_: C.T @ X @ B @ B.T + C @ X @ B @ B.T),
    ("(117) d tr(X^T B X C)/dX = B X C + B^T X C^T", "X: (n, k)\nB: (n, n)\nC: (k, k)\nf = trace(X.T @ B @ X @ C)", "X", lambda X, B, C, **_: B @ X @ C + B.T @ X @ C.T),
    ("(118) d tr(A X B X^T C)/dX = A^T C^T X B^T + C A X B", "A: (p, n)\nX: (n, k)\nB: (k, k)\nC: (n, p)\nf = trace(A @ X @ B @ X.T @ C)", "X", lambda A, X, B, C, **_: A.T @ C.T @ X @ B.T + C @ A @ X @ B),
    ("(119) d tr[(AXB + C)(AXB + C)^T]/dX = 2 A^T (AXB + C) B^T", "A: (p, n)\nX: (n, k)\nB: (k, m)\nC: (p, m)\nR = A @ X @ B + C\nf = trace(R @ R.T)", "X", lambda A, X, B, C, **_: 2 * A.T @ (A @ X @ B + C) @ B.T),
    ("(120) d tr(X kron X)/dX = 2 tr(X) I", "X: (n, n)\nf = trace(kron(X, X))", "X", lambda X, **_: 2 * np.trace(X) * I(len(X))),
    ("(121) d tr(X^k)/dX = k (X^(k-1))^T", "X: (n, n)\nf = trace(mpow(X, 4))", "X", lambda X, **_: 4 * mpow(X, 3).T),
    # --- traces with inverses (section 2.5.4) ---
    ("(124) d tr(A X^-1 B)/dX = -X^-T A^T B^T X^-T", "A: (k, n)\nX: (n, n) invertible\nB: (n, k)\nf = trace(A @ inv(X) @ B)", "X", lambda A, X, B, **_: -inv(X).T @ A.T @ B.T @ inv(X).T),
    ("(124) d tr(X^-1 A)/dX = -X^-T A^T X^-T", "X: (n, n) invertible\nA: (n, n)\nf = trace(inv(X) @ A)", "X", lambda X, A, **_: -inv(X).T @ A.T @ inv(X).T),
    # --- determinants (section 2.1.2) ---
    ("(49) d det(X)/dX = det(X) X^-T", "X: (n, n) invertible\nf = det(X)", "X", lambda X, **_: det(X) * inv(X).T),
    ("(50) d det(AXB)/dX = det(AXB) X^-T", "A: (n, n) invertible\nX: (n, n) invertible\nB: (n, n) invertible\nf = det(A @ X @ B)", "X", lambda A, X, B, **_: det(A @ X @ B) * inv(X).T),
    ("(55) d ln det(X^T X)/dX = 2 (X^+)^T", "X: (m, n)\nf = logdet(X.T @ X)", "X", lambda X, **_: 2 * np.linalg.pinv(X).T),
    ("(57) d ln|det X|/dX = X^-T", "X: (n, n)\nf = logdet(X)", "X", lambda X, **_: inv(X).T),
    ("(58) d det(X^k)/dX = k det(X^k) X^-T", "X: (n, n) invertible\nf = det(mpow(X, 3))", "X", lambda X, **_: 3 * det(mpow(X, 3)) * inv(X).T),
    # --- inverses (section 2.2) ---
    ("(61) d a^T X^-1 b/dX = -X^-T a b^T X^-T", "a: (n,)\nX: (n, n) invertible\nb: (n,)\nf = a @ inv(X) @ b", "X", lambda a, X, b, **_: -inv(X).T @ np.outer(a, b) @ inv(X).T),
    # --- vectors and quadratic forms (section 2.4) ---
    ("(69) d x^T a/dx = a", "x: (n,)\na: (n,)\nf = x @ a", "x", lambda a, **_: a),
    ("(70) d a^T X b/dX = a b^T", "a: (n,)\nX: (n, k)\nb: (k,)\nf = a @ X @ b", "X", lambda a, b, **_: np.outer(a, b)),
    ("(71) d a^T X^T b/dX = b a^T", "a: (k,)\nX: (n, k)\nb: (n,)\nf = a @ X.T @ b", "X", lambda a, b, **_: np.outer(b, a)),
    ("(77) d b^T X^T X c/dX = X (b c^T + c b^T)", "b: (k,)\nX: (n, k)\nc: (k,)\nf = b @ X.T @ X @ c", "X", lambda b, X, c, **_: X @ (np.outer(b, c) + np.outer(c, b))),
    ("(78) d (Bx + b)^T C (Dx + d)/dx = B^T C (Dx + d) + D^T C^T (Bx + b), d written e", "B: (n, k)\nx: (k,)\nb: (n,)\nC: (n, p)\nD: (p, k)\ne: (p,)\nf = (B @ x + b) @ C @ (D @ x + e)", "x", lambda B, x, b, C, D, e, **_: B.T @ C @ (D @ x + e) + D.T @ C.T @ (B @ x + b)),
    ("(79) d b^T X^T D X c/dX = D^T X b c^T + D X c b^T", "b: (k,)\nX: (n, k)\nD: (n, n)\nc: (k,)\nf = b @ X.T @ D @ X @ c", "X", lambda b, X, D, c, **_: D.T @ X @ np.outer(b, c) + D @ X @ np.outer(c, b)),
    ("(80) d (Xb + c)^T D (Xb + c)/dX = (D + D^T)(Xb + c) b^T", "X: (n, k)\nb: (k,)\nc: (n,)\nD: (n, n)\nf = (X @ b + c) @ D @ (X @ b + c)", "X", lambda X, b, c, D, **_: np.outer((D + D.T) @ (X @ b + c), b)),
    ("(81) d x^T B x/dx = (B + B^T) x", "x: (n,)\nB: (n, n)\nf = x @ B @ x", "x", lambda x, B, **_: (B + B.T) @ x),
    # --- norms (sections 2.6 and 2.7) ---
    ("(129) d ||x - a||_2/dx = (x - a)/||x - a||_2", "x: (n,)\na: (n,)\nf = norm(x - a)", "x", lambda x, a, **_: (x - a) / np.linalg.norm(x - a)),
    ("(2.7.1) d ||X||_F^2/dX = 2X", "X: (n, k)\nf = norm(X) ** 2", "X", lambda X, **_: 2 * X),
]  # fmt: skip


@pytest.mark.parametrize("eq, block, var, closed", COOKBOOK, ids=[c[0].split(" d")[0] + "-" + str(i) for i, c in enumerate(COOKBOOK)])  # fmt: skip
def test_cookbook_gradient(eq, block, var, closed):
    d = derive(block, wrt=var)
    g = d.gradient(var)
    for seed in (0, 1, 2):
        arrays = random_point(d, seed)
        got = evaluate(g, arrays, dims=sizes_for(d))
        want = closed(**arrays)  # The Matrix Cookbook (2012), eq. as in the id (from memory)
        assert np.shape(got) == np.shape(want)
        assert_close(got, want, 1e-10, what=eq)
        # and the generated NumPy function agrees with the expression
        assert_close(d.gradient_function(var)(**arrays), want, 1e-10, what=f"{eq} (code)")


def test_at_least_fifteen_cookbook_results():
    assert len({c[0].split(")")[0] for c in COOKBOOK}) >= 15
