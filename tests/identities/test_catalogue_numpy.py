"""Every identity checked with an evaluator independent of gradwright (`numpy_eval`).

Equalities: both sides equal at random values honouring the declarations, over several dims and
seeds. Differentials: the right side with d(X) = E equals a central difference of the function
along E. Derivatives: the right side equals a central-difference gradient, entry by entry.
"""

import itertools

import numpy as np
import pytest
from numpy_eval import (
    close,
    differential_argument,
    differential_symbols,
    dim_names,
    direction_like,
    evaluate,
    numeric_gradient,
    parse_declaration,
    sample_declarations,
)

from gradwright.identities.catalogue import RECORDS

IDS = [r["id"] for r in RECORDS]
SEEDS = range(3)
# dims vary over 2..4 and differ from each other, so a misplaced transpose cannot pass
SIZE_PLANS = (
    (2, 3, 4, 2, 3, 4),
    (3, 4, 2, 4, 2, 3),
    (4, 2, 3, 3, 4, 2),
    (2, 2, 2, 2, 2, 2),
    (5, 6, 5, 6, 5, 6),  # past the small sizes: records are stated at symbolic sizes
)


def plans(record):
    names = dim_names(record["declarations"])
    for seed, plan in itertools.product(SEEDS, SIZE_PLANS):
        yield seed, {name: plan[i % len(plan)] for i, name in enumerate(names)}


def structure(record):
    return {
        parse_declaration(line)[0]: parse_declaration(line)[2] for line in record["declarations"]
    }


def central_difference(text, arrays, sizes, directions, h=1e-5):
    plus, minus = dict(arrays), dict(arrays)
    for name, e in directions.items():
        plus[name] = arrays[name] + h * e
        minus[name] = arrays[name] - h * e
    fp = np.asarray(evaluate(text, plus, sizes))
    fm = np.asarray(evaluate(text, minus, sizes))
    return (fp - fm) / (2 * h)


@pytest.mark.parametrize("record", RECORDS, ids=IDS)
def test_identity_holds_numerically(record):
    words = structure(record)
    for seed, sizes in plans(record):
        rng = np.random.default_rng(seed)
        arrays = sample_declarations(record["declarations"], sizes, rng)
        kind = record["kind"]
        where = f"{record['id']} (seed {seed}, sizes {sizes})"
        if kind == "equality":
            lhs = evaluate(record["lhs"], arrays, sizes)
            rhs = evaluate(record["rhs"], arrays, sizes)
            assert np.shape(lhs) == np.shape(rhs), where
            assert close(lhs, rhs, rtol=1e-9, atol=1e-10), f"{where}: {lhs} != {rhs}"
        elif kind == "differential":
            function = differential_argument(record["lhs"])
            names = differential_symbols(record["rhs"])
            directions = {n: direction_like(arrays[n], words[n], rng) for n in names}
            numeric = central_difference(function, arrays, sizes, directions)
            analytic = evaluate(record["rhs"], arrays, sizes, directions)
            assert np.shape(numeric) == np.shape(analytic), where
            assert close(numeric, analytic, rtol=1e-6, atol=1e-7), f"{where}"
        else:
            wrt = record["wrt"]

            def f(x, arrays=arrays, sizes=sizes, wrt=wrt):
                return evaluate(record["lhs"], {**arrays, wrt: x}, sizes)

            assert np.ndim(f(arrays[wrt])) == 0, f"{where}: a derivative record needs a scalar lhs"
            numeric = numeric_gradient(f, arrays[wrt])
            analytic = evaluate(record["rhs"], arrays, sizes)
            assert np.shape(numeric) == np.shape(analytic), where
            assert close(numeric, analytic, rtol=1e-6, atol=1e-7), f"{where}"


def test_evaluator_catches_a_wrong_transpose():
    # the check must be able to fail: a classic slip in the vec rule
    sizes = {"m": 2, "n": 3, "p": 4, "q": 2}
    rng = np.random.default_rng(0)
    arrays = sample_declarations(("A: (m, n)", "X: (n, p)", "B: (p, q)"), sizes, rng)
    right = evaluate("kron(B.T, A) @ vec(X)", arrays, sizes)
    assert close(evaluate("vec(A @ X @ B)", arrays, sizes), right)
    arrays["B"] = sample_declarations(("B: (p, p)",), {"p": 4}, rng)["B"]
    sizes["q"] = 4
    assert not close(
        evaluate("vec(A @ X @ B)", arrays, sizes), evaluate("kron(B, A) @ vec(X)", arrays, sizes)
    )


def test_commutation_matrix_convention():
    from numpy_eval import commutation_matrix

    a = np.arange(6.0).reshape(2, 3)
    vec = a.reshape(-1, order="F")
    assert np.array_equal(commutation_matrix(2, 3) @ vec, a.T.reshape(-1, order="F"))


def test_the_independent_evaluator_does_not_use_gradwright():
    import ast
    from pathlib import Path

    import numpy_eval

    tree = ast.parse(Path(numpy_eval.__file__).read_text())
    imported = set()
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            imported |= {a.name.split(".")[0] for a in node.names}
        elif isinstance(node, ast.ImportFrom):
            imported.add((node.module or "").split(".")[0])
    assert "gradwright" not in imported
    assert imported <= {"__future__", "ast", "re", "numpy"}
