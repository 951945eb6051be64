"""Every identity verified through gradwright's own reader and reference evaluator.

Both sides are parsed with `gradwright.language.parse_block` and evaluated with
`gradwright.evaluate.evaluate` at values drawn by `gradwright.sampling.sample_symbol` (several
dims, several seeds). Differentials are checked with a central difference along a random
direction, derivatives against both `gradwright.derive(...).gradient_function` and a central
difference. `test_catalogue_numpy.py` runs the same checks with an evaluator that does not use
gradwright at all.
"""

import itertools

import numpy as np
import pytest
from numpy_eval import close, differential_argument, differential_symbols, numeric_gradient

from gradwright import derive
from gradwright import expr as E
from gradwright.evaluate import evaluate
from gradwright.identities import all as all_identities
from gradwright.language import parse_block
from gradwright.sampling import sample_symbol

IDENTITIES = all_identities()
IDS = [i.id for i in IDENTITIES]
SEEDS = (0, 1, 2)
# every record is stated at symbolic sizes (tr(I_n) = n): each dim takes four different sizes,
# one of them past 4, so a size written into a side (a 3 where n belongs) cannot pass
SIZE_PLANS = (
    (2, 3, 4, 2, 3, 4),
    (3, 4, 2, 4, 2, 3),
    (4, 2, 3, 3, 4, 2),
    (5, 6, 5, 6, 5, 6),
)


def parse(ident, text):
    return parse_block("\n".join([*ident.declarations, f"f = {text}"]), allow_differentials=True)


def cases(ident, block):
    for seed, plan in itertools.product(SEEDS, SIZE_PLANS):
        sizes = {d: plan[i % len(plan)] for i, d in enumerate(block.dims)}
        rng = np.random.default_rng(seed)
        arrays = {n: sample_symbol(s, sizes, rng) for n, s in block.declarations.items()}
        yield seed, sizes, rng, arrays


def direction(symbol, value, rng):
    if np.ndim(value) == 0:
        return float(rng.standard_normal())
    e = rng.standard_normal(np.shape(value))
    if np.ndim(value) == 2 and E.is_symmetric(symbol):
        e = (e + e.T) / 2
    if np.ndim(value) == 2 and "diagonal" in symbol.structure:
        e = np.diag(np.diag(e))
    return e


@pytest.mark.parametrize("ident", IDENTITIES, ids=IDS)
def test_identity_verified_by_the_core(ident):
    if ident.kind == "differential":
        left = parse(ident, differential_argument(ident.lhs))
    else:
        left = parse(ident, ident.lhs)
    right = parse(ident, ident.rhs)
    for seed, sizes, rng, arrays in cases(ident, left):
        where = f"{ident.id} (seed {seed}, sizes {sizes})"
        if ident.kind == "equality":
            a = evaluate(left.expr, arrays, dims=sizes)
            b = evaluate(right.expr, arrays, dims=sizes)
            assert np.shape(a) == np.shape(b), where
            assert close(a, b, rtol=1e-9, atol=1e-10), f"{where}: {a} != {b}"
        elif ident.kind == "differential":
            names = differential_symbols(ident.rhs)
            dirs = {n: direction(left.declarations[n], arrays[n], rng) for n in names}
            h = 1e-5
            plus = {k: v + h * dirs[k] if k in dirs else v for k, v in arrays.items()}
            minus = {k: v - h * dirs[k] if k in dirs else v for k, v in arrays.items()}
            fd = (
                np.asarray(evaluate(left.expr, plus, dims=sizes))
                - np.asarray(evaluate(left.expr, minus, dims=sizes))
            ) / (2 * h)
            analytic = evaluate(right.expr, arrays, differentials=dirs, dims=sizes)
            assert np.shape(fd) == np.shape(analytic), where
            assert close(fd, analytic, rtol=1e-6, atol=1e-7), where
        else:
            wrt = ident.wrt

            def f(x, arrays=arrays, sizes=sizes, wrt=wrt):
                return evaluate(left.expr, {**arrays, wrt: x}, dims=sizes)

            expected = evaluate(right.expr, arrays, dims=sizes)
            numeric = numeric_gradient(f, arrays[wrt])
            assert close(numeric, expected, rtol=1e-6, atol=1e-7), f"{where}: finite difference"
            derivation = derive(ident.block("lhs"), wrt=wrt)
            g = derivation.gradient_function(wrt)
            got = g(**{k: arrays[k] for k in derivation.arguments()})
            assert close(got, expected, rtol=1e-8, atol=1e-9), f"{where}: derive gradient"


@pytest.mark.parametrize(
    "ident", [i for i in IDENTITIES if i.kind == "differential"], ids=lambda i: i.id
)
def test_core_differential_agrees_with_the_record(ident):
    # the engine's own differential of the function, evaluated at a random direction
    function = differential_argument(ident.lhs)
    names = differential_symbols(ident.rhs)
    derivation = derive(ident.block("lhs").rsplit("\n", 1)[0] + f"\nf = {function}", wrt=names)
    right = parse(ident, ident.rhs)
    block = parse(ident, function)
    for seed, sizes, rng, arrays in cases(ident, block):
        dirs = {n: direction(block.declarations[n], arrays[n], rng) for n in names}
        ours = evaluate(derivation.differential(), arrays, differentials=dirs, dims=sizes)
        record = evaluate(right.expr, arrays, differentials=dirs, dims=sizes)
        assert close(ours, record, rtol=1e-8, atol=1e-9), f"{ident.id} (seed {seed})"


@pytest.mark.parametrize("ident", IDENTITIES, ids=IDS)
def test_every_dim_is_exercised_at_several_sizes(ident):
    block = parse(ident, ident.lhs if ident.kind != "differential" else "0")
    seen: dict = {}
    for _seed, sizes, _rng, _arrays in cases(ident, block):
        for dim, size in sizes.items():
            seen.setdefault(dim, set()).add(size)
    assert all(len(v) >= 4 for v in seen.values()), f"{ident.id}: {seen}"


def test_a_size_written_as_a_number_is_caught():
    # trace(eye(n)) = 3 holds at n = 3 only: the size plans must expose it
    from gradwright.identities.record import Identity

    fixed = Identity.from_record(
        {
            **{k: v for k, v in all_identities()[0].to_dict().items() if k != "latex"},
            "declarations": ("A: (n, n)",),
            "lhs": "trace(eye(n))",
            "rhs": "3",
            "conditions": (),
        }
    )
    block = parse(fixed, fixed.lhs)
    wrong = [
        sizes
        for _seed, sizes, _rng, arrays in cases(fixed, block)
        if evaluate(block.expr, arrays, dims=sizes) != 3
    ]
    assert wrong
