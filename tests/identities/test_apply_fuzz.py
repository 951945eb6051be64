"""Random formulas: every rewrite `applicable` offers keeps the formula's value.

The formulas are drawn from a small grammar over square matrices, a symmetric positive definite
matrix, rectangular factors and vectors; the check runs without the matcher's own safety net.
"""

import numpy as np
import pytest
from test_apply import differential_or_gradient_agrees

from gradwright.evaluate import evaluate
from gradwright.identities import applicable
from gradwright.language import parse_block
from gradwright.sampling import sample_symbol

DECLARATIONS = """A: (n, n)
B: (n, n)
C: (n, n)
S: (n, n) spd
Q: (n, n) orthogonal
U: (n, k)
V: (k, n)
M: (k, k)
x: (n,)
y: (n,)
w: (n,) positive
c: ()"""

SQUARE = ["A", "B", "C", "S", "Q", "A.T", "B.T", "inv(A)", "inv(S)", "eye(n)", "(U @ V)"]
VECTOR = ["x", "y", "w"]


def square(rng, depth):
    if depth == 0 or rng.random() < 0.3:
        return str(rng.choice(SQUARE))
    a, b = square(rng, depth - 1), square(rng, depth - 1)
    choice = rng.integers(0, 12)
    return [
        f"({a} @ {b})",
        f"({a} + {b})",
        f"({a} - {b})",
        f"({a} * {b})",
        f"inv({a} + S)",
        f"({a}).T",
        f"solve(S, {a})",
        f"(U @ M @ V + {a})",
        f"(outer(x, y) + {a})",
        f"diagm(diag({a}))",
        f"(c * {a})",
        f"({a} @ diagm(w) @ {b})",
    ][choice]


def scalar(rng, depth):
    a = square(rng, depth)
    choice = rng.integers(0, 11)
    return [
        f"trace({a})",
        f"trace({a} @ {square(rng, depth)})",
        f"det({a})",
        f"logdet(S + {a} @ ({a}).T)",
        f"sum({a})",
        f"sum(({a})**2)",
        f"norm({a})",
        f"x @ {a} @ y",
        f"x @ {a} @ x",
        f"trace(kron({a}, M))",
        f"vec({a}) @ vec({square(rng, depth)})",
    ][choice]


def formula(rng):
    kind = rng.integers(0, 4)
    if kind == 0:
        return scalar(rng, 2) + " + " + scalar(rng, 1)
    if kind == 1:
        return f"vec({square(rng, 2)} @ {square(rng, 1)} @ {square(rng, 1)})"
    if kind == 2:
        return f"{square(rng, 2)} @ {str(rng.choice(VECTOR))}"
    return f"kron({square(rng, 1)}, M) @ kron({square(rng, 1)}, M)"


def close(a, b):
    a, b = np.asarray(a, dtype=float), np.asarray(b, dtype=float)
    scale = max(1.0, float(np.max(np.abs(a), initial=0.0)))
    return a.shape == b.shape and np.allclose(a, b, rtol=1e-6, atol=1e-9 * scale)


@pytest.mark.parametrize("seed", range(120))
def test_random_formula_rewrites_keep_the_value(seed):
    rng = np.random.default_rng(seed)
    text = f"{DECLARATIONS}\nf = {formula(rng)}"
    block = parse_block(text)
    matches = applicable(block, verify=False)
    sizes = {"n": 3, "k": 2}
    values = np.random.default_rng(100 + seed)
    arrays = {n: sample_symbol(s, sizes, values) for n, s in block.declarations.items()}
    arrays["c"] = 1.7
    with np.errstate(all="ignore"):
        original = evaluate(block.expr, arrays, dims=sizes)
        if not np.all(np.isfinite(original)):
            pytest.skip("the random formula is not finite at the sample")
        for m in matches:
            where = f"{text.splitlines()[-1]}\n{m.summary}"
            if m.is_rewrite:
                got = evaluate(m.rewritten, arrays, dims=sizes)
                assert close(original, got), where
            else:
                assert differential_or_gradient_agrees(m, arrays, sizes, values), where
