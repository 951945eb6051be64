"""Call-time choices in generated code: chain order and distribution follow the actual sizes."""

from __future__ import annotations

import itertools

import numpy as np
import pytest

from gradwright import derive
from gradwright import expr as E
from gradwright.printing.calltime import (
    chain_candidates,
    chain_dims,
    choice_text,
    poly_text,
    tree_cost,
)
from gradwright.printing.costmodel import CostModel


def _optimum(dims: tuple) -> float:
    return CostModel({}).chain_order_of_dims(dims)[0]


CHAINS = [("a", "b", "c", "d"), ("n", "p", "n", "k"), ("m", "r", "m", "r", "m"), ("n", "1", "n")]


@pytest.mark.parametrize("names", CHAINS)
def test_call_time_order_is_near_the_optimum(names):
    dims = [E.Dim.of(int(x)) if x.isdigit() else E.Dim.of(x) for x in names]
    shapes = [(a, b) for a, b in zip(dims, dims[1:])]
    trees = chain_candidates(shapes, CostModel({}))
    costs = [poly_text(tree_cost(chain_dims(shapes), t)) for t in trees]
    pick = choice_text([str(i) for i in range(len(trees))], costs)
    rng = np.random.default_rng(0)
    free = sorted({x for x in names if not x.isdigit()})
    for sizes in itertools.islice(itertools.product((1, 7, 50, 900), repeat=len(free)), 200):
        _dims = dict(zip(free, (int(s) for s in sizes)))
        _dims.update({k: int(v) for k, v in zip(free, rng.integers(1, 3000, len(free)))})
        chosen = trees[eval(pick, {"_dims": _dims})]  # our own generated text
        numbers = tuple(float(_dims[x]) if x in _dims else float(x) for x in names)
        cost = eval(poly_text(tree_cost(chain_dims(shapes), chosen)), {"_dims": _dims})
        assert cost <= 1.25 * _optimum(numbers)


def test_least_squares_without_sizes_chooses_at_call_time():
    d = derive("X: (n, p)\nW: (p, k)\nY: (n, k)\nf = sum((X @ W - Y)**2)", wrt="W")
    src = d.source()
    start = src.index("def gradient_W")
    assert " else " in src[start : src.index("\ndef ", start + 1)]
    g = d.gradient_function()
    rng = np.random.default_rng(4)
    for n, p, k in ((300, 4, 2), (3, 40, 60), (50, 50, 50)):
        X, W, Y = (rng.standard_normal(s) for s in ((n, p), (p, k), (n, k)))
        np.testing.assert_allclose(g(X=X, W=W, Y=Y), 2 * X.T @ (X @ W - Y), rtol=1e-9, atol=1e-9)


def test_given_sizes_decide_once():
    d = derive(
        "X: (n, p)\nW: (p, k)\nY: (n, k)\nf = sum((X @ W - Y)**2)",
        wrt="W",
        sizes={"n": 1000, "p": 10, "k": 10},
    )
    src = d.source()
    start = src.index("def gradient_W")
    assert " else " not in src[start : src.index("\ndef ", start + 1)]
