"""`applicable`: identities found in a user's expression, with rewrites that keep its value."""

import numpy as np
import pytest

from gradwright import derive
from gradwright import expr as E
from gradwright.evaluate import evaluate
from gradwright.identities import applicable
from gradwright.language import parse_block
from gradwright.sampling import default_sizes, needs_positive, sample_symbol

# the demo scenarios' formulas, as the demo notebooks write them, and a few more
SOIL = """Z: (m, n)
S: (n, n) spd
days: ()
nll = days * logdet(S) + trace(solve(S, Z.T @ Z))"""
SOIL_FACTOR = """Z: (m, n)
L: (n, n)
days: ()
S = L @ L.T
nll = days * logdet(S) + trace(solve(S, Z.T @ Z))"""
STORE = """P: (s, w)
U: (s, r)
V: (w, r)
mu: ()
R = P - U @ V.T
loss = sum(R**2) + mu * (sum(U**2) + sum(V**2))"""
BRIDGE = """Y: (k, g)
X: (k, p)
B: (p, g)
S: (k, k) spd
E = Y - X @ B
misfit = trace(E.T @ solve(S, E))"""
ROBOT = """x: (j,)
W1: (h, j)
W2: (o, h)
grip = tanh(W2 @ tanh(W1 @ x))"""
MORE = [
    "A: (m, n)\nX: (n, p)\nB: (p, q)\nf = vec(A @ X @ B)",
    "A: (n, n)\nU: (n, k)\nC: (k, k)\nV: (k, n)\nf = inv(A + U @ C @ V)",
    "S: (n, n) spd\nu: (n,)\nf = logdet(S + outer(u, u))",
    "A: (m, n)\nB: (p, q)\nC: (n, r)\nD: (q, s)\nf = kron(A, B) @ kron(C, D)",
    "A: (m, n)\nB: (p, q)\nC: (n, r)\nD: (q, s)\nG: (t, m*p)\nH: (r*s, t)\nf = trace(G @ kron(A, B) @ kron(C, D) @ H)",
    "M: (n, n)\nA: (n, n)\nB: (n, n)\nf = M + inv(A) + inv(B)",
    "A: (n, n)\nx: (n,)\ny: (n,)\nf = x @ A @ y + x @ A @ x",
    "A: (m, n)\nB: (p, q)\nf = trace(kron(A.T @ A, B @ B.T))",
    "X: (n, n)\nf = det(inv(X)) * logdet(X.T @ X)",
    "x: (n,)\nw: (n,) positive\nf = x @ diagm(w) @ x + sum(exp(x))",
    "A: (m, n)\nX: (n, p)\nB: (p, q)\nf = kron(B.T, A) @ vec(X)",
    "A: (m, m)\nB: (n, n)\nX: (m, n)\nf = vec(X) @ kron(B, A) @ vec(X)",
    "A: (m, n)\nf = commutation(m, n) @ vec(A)",
    "Q: (n, n) orthogonal\nA: (n, k)\nf = norm(Q @ A)",
    "S: (n, n) spd\nC: (n, k)\nW: (k, k) spd\nf = trace(inv(S + C @ W @ C.T))",
    "A: (m, n)\nB: (n, m)\nf = logdet(eye(m) + A @ B)",
]
GALLERY = [SOIL, SOIL_FACTOR, STORE, BRIDGE, ROBOT, *MORE]


def ids(matches, direction=None):
    return {m.identity.id for m in matches if direction is None or m.direction == direction}


def texts(matches, identity_id):
    return [m.text for m in matches if m.identity.id == identity_id]


def sample(expression, seed):
    symbols = {}
    for n in E.walk(expression):
        if type(n) is E.Symbol:
            symbols[n.name] = n
    dims = []
    for n in E.walk(expression):
        # sizes come from every shape, and from dims used as numbers (`trace(eye(n))` is n)
        extra = n.args if type(n) in (E.SizeOf, E.Commutation) else ()
        for d in (*n.shape, *extra):
            for name in () if d is None else d.names:
                if name not in dims:
                    dims.append(name)
    sizes = default_sizes(dims)
    positive = needs_positive(E.inline_named(expression))
    rng = np.random.default_rng(seed)
    arrays = {n: sample_symbol(s, sizes, rng, positive=n in positive) for n, s in symbols.items()}
    return arrays, sizes, rng


def close(a, b, rtol=1e-8):
    a, b = np.asarray(a, dtype=float), np.asarray(b, dtype=float)
    scale = max(1.0, float(np.max(np.abs(a), initial=0.0)))
    return a.shape == b.shape and np.allclose(a, b, rtol=rtol, atol=1e-10 * scale)


# ---------------------------------------------------------------------------------------------
# every match keeps the value (checked without the matcher's own safety net)
# ---------------------------------------------------------------------------------------------


@pytest.mark.parametrize("block", GALLERY, ids=lambda b: b.splitlines()[-1])
def test_every_rewrite_evaluates_equal_to_the_original(block):
    root = parse_block(block).expr
    matches = applicable(block, verify=False)
    assert matches, "expected at least one applicable identity"
    for seed in (0, 1):
        arrays, sizes, rng = sample(root, seed)
        original = evaluate(root, arrays, dims=sizes)
        for m in matches:
            if not m.is_rewrite:
                continue
            got = evaluate(m.rewritten, arrays, dims=sizes)
            assert close(original, got), f"{m.summary}: {original} != {got}"
            # the matched piece and its replacement agree on their own, too
            assert close(
                evaluate(m.matched, arrays, dims=sizes), evaluate(m.replacement, arrays, dims=sizes)
            ), m.summary


def differential_or_gradient_agrees(m, arrays, sizes, rng, h=1e-6):
    """A differential match against a central difference of the matched piece along random
    directions (each pending d(e) replaced by the difference of e); a gradient match by the
    directional derivative tr(G^T E)."""
    if m.direction == "gradient":
        moving = {m.wrt}
    else:
        moving = set()
        for n in E.walk(m.replacement):
            if type(n) is E.Differential:
                moving.add(n.symbol.name)
            elif type(n) is E.D:
                moving |= n.args[0].symbols
    dirs = {n: rng.standard_normal(np.shape(arrays[n])) for n in moving}
    plus = {k: v + h * dirs[k] if k in dirs else v for k, v in arrays.items()}
    minus = {k: v - h * dirs[k] if k in dirs else v for k, v in arrays.items()}

    def fd(e):
        return (
            np.asarray(evaluate(e, plus, dims=sizes)) - np.asarray(evaluate(e, minus, dims=sizes))
        ) / (2 * h)

    numeric = fd(m.matched)
    if m.direction == "gradient":
        analytic = np.sum(np.asarray(evaluate(m.replacement, arrays, dims=sizes)) * dirs[m.wrt])
    else:
        pending = {}
        extra = {}
        for i, node in enumerate(n for n in E.walk(m.replacement) if type(n) is E.D):
            name = f"_pending_{i}"
            pending[node] = E.Symbol(name, node.args[0].shape)
            extra[name] = fd(node.args[0])
        replacement = E.substitute(m.replacement, pending)
        full = dict(dirs)
        for n in E.walk(replacement):
            if type(n) is E.Differential:
                full.setdefault(n.symbol.name, np.zeros(np.shape(arrays[n.symbol.name])))
        analytic = evaluate(replacement, {**arrays, **extra}, differentials=full, dims=sizes)
    return close(numeric, analytic, rtol=1e-5)


@pytest.mark.parametrize("block", GALLERY, ids=lambda b: b.splitlines()[-1])
def test_every_differential_and_gradient_match_agrees_with_finite_differences(block):
    root = parse_block(block).expr
    matches = [m for m in applicable(block, verify=False) if not m.is_rewrite]
    assert matches
    arrays, sizes, rng = sample(root, 3)
    for m in matches:
        assert differential_or_gradient_agrees(m, arrays, sizes, rng), m.summary


# ---------------------------------------------------------------------------------------------
# the rewrites a user expects
# ---------------------------------------------------------------------------------------------


def test_vec_of_triple_product():
    matches = applicable("A: (m, n)\nX: (n, p)\nB: (p, q)\nf = vec(A @ X @ B)")
    assert texts(matches, "vec-triple-product") == ["kron(B.T, A) @ vec(X)"]
    (m,) = [m for m in matches if m.identity.id == "vec-triple-product"]
    assert m.direction == "forward" and m.matched_text == "vec(A @ X @ B)"
    assert "\\otimes" in m.latex
    assert m.summary == "vec-triple-product: vec(A @ X @ B) -> kron(B.T, A) @ vec(X)"


def test_the_other_direction_is_found_too():
    matches = applicable("A: (m, n)\nX: (n, p)\nB: (p, q)\nf = kron(B.T, A) @ vec(X)")
    assert "vec(A @ X @ B)" in texts(matches, "vec-triple-product")
    assert any(m.direction == "backward" for m in matches if m.identity.id == "vec-triple-product")


def test_pattern_symbols_bind_to_whole_subexpressions():
    block = "P: (n, k)\nQ: (k, r)\nR: (r, t)\nW: (t, u)\nf = vec((P @ Q) @ R @ (W.T).T)"
    got = texts(applicable(block), "vec-triple-product")
    assert "kron(W.T, P @ Q) @ vec(R)" in got
    assert "kron(R.T @ Q.T, P) @ vec(W)" not in got  # never a wrong transpose


def test_soil_moisture_scenario():
    matches = applicable(SOIL)
    found = ids(matches)
    assert {"solve-is-inverse-times", "differential-of-logdet", "gradient-of-logdet"} <= found
    assert "days * logdet(S) + trace(inv(S) @ Z.T @ Z)" in texts(matches, "solve-is-inverse-times")
    (grad,) = [m for m in matches if m.identity.id == "gradient-of-logdet"]
    assert grad.wrt == "S" and grad.replacement_text == "inv(S)"
    assert "logdet-of-product" in ids(applicable(SOIL_FACTOR))


def test_store_demand_scenario():
    matches = applicable(STORE)
    assert "trace(R.T @ R) + mu * (sum(U**2) + sum(V**2))" in texts(
        matches, "sum-of-hadamard-square-is-trace"
    )
    assert "frobenius-norm-as-sum-of-squares" in ids(matches, "backward")
    (fit,) = [m for m in matches if m.identity.id == "gradient-of-low-rank-fit"]
    assert fit.wrt == "U"


def test_bridge_gauge_scenario():
    matches = applicable(BRIDGE)
    found = ids(matches)
    assert {"weighted-squared-norm-as-trace", "trace-cyclic-two", "differential-of-solve"} <= found
    assert "trace(E.T @ inv(S) @ E)" in texts(matches, "solve-is-inverse-times")


def test_robot_arm_scenario_chain_rule_steps():
    matches = applicable(ROBOT)
    got = {m.text for m in matches}
    assert "d(tanh(W1 @ x)) = (1 - tanh(W1 @ x)**2) * d(W1 @ x)" in got
    assert "d(W1 @ x) = d(W1) @ x + W1 @ d(x)" in got


def test_woodbury_and_determinant_lemma():
    matches = applicable(MORE[1])
    assert texts(matches, "woodbury-identity") == [
        "inv(A) - inv(A) @ U @ inv(inv(C) + V @ inv(A) @ U) @ V @ inv(A)"
    ]
    assert "logdet-rank-one-update" in ids(applicable(MORE[2]))
    assert "sylvester-determinant-identity" not in ids(applicable(MORE[-1]))  # logdet, not det
    assert "sylvester-determinant-identity" in ids(
        applicable("A: (m, n)\nB: (n, m)\nf = det(eye(m) + A @ B)")
    )


def test_a_slice_of_a_longer_product_is_matched():
    matches = applicable(MORE[4])
    assert "trace(G @ kron(A @ C, B @ D) @ H)" in texts(matches, "kronecker-mixed-product")


def test_some_terms_of_a_longer_sum_are_matched():
    matches = applicable(MORE[5])
    assert "M + inv(A) @ (A + B) @ inv(B)" in texts(matches, "sum-of-inverses-factored")


def test_structure_is_respected():
    general = "A: (n, n)\nx: (n,)\nf = x @ A @ x"
    sym = "S: (n, n) symmetric\nx: (n,)\nf = x @ S @ x"
    assert "gradient-of-symmetric-quadratic-form" not in ids(applicable(general))
    assert "gradient-of-symmetric-quadratic-form" in ids(applicable(sym))
    assert "frobenius-norm-orthogonal-left" in ids(applicable(MORE[13]))
    assert "frobenius-norm-orthogonal-left" not in ids(
        applicable("Q: (n, n)\nA: (n, k)\nf = norm(Q @ A)")
    )
    spd = MORE[14]
    plain = "S: (n, n)\nC: (n, k)\nW: (k, k)\nf = trace(inv(S + C @ W @ C.T))"
    assert "woodbury-identity-symmetric" in ids(applicable(spd))
    assert "woodbury-identity-symmetric" not in ids(applicable(plain))
    assert "woodbury-identity" in ids(applicable(plain))


def test_repeated_pattern_symbols_must_bind_alike():
    matches = applicable(MORE[6])
    quad = [m for m in matches if m.identity.id == "quadratic-form-as-trace"]
    assert [m.matched_text for m in quad] == ["x @ A @ x"]
    bilinear = [m.matched_text for m in matches if m.identity.id == "bilinear-form-as-trace"]
    assert "x @ A @ y" in bilinear


def test_shapes_are_respected():
    # det(A kron B) = det(A)**p det(B)**n for A n x n, B p x p: the exponents follow the sizes
    # (Magnus & Neudecker, Matrix Differential Calculus, 3rd ed., Ch. 2, Sec. 2.4, from memory)
    def exponents(text):
        return texts(applicable(text), "kronecker-determinant")

    assert exponents("A: (3, 3)\nB: (2, 2)\nf = det(kron(A, B))") == ["det(A)**2 * det(B)**3"]
    assert exponents("A: (2, 2)\nB: (3, 3)\nf = det(kron(A, B))") == ["det(A)**3 * det(B)**2"]
    assert exponents("A: (n, n)\nB: (q, q)\nf = det(kron(A, B))") == ["det(A)**q * det(B)**n"]


def test_input_forms():
    text = "A: (m, n)\nX: (n, p)\nB: (p, q)\nf = vec(A @ X @ B)"
    block = parse_block(text)
    want = "kron(B.T, A) @ vec(X)"
    assert want in texts(applicable(block), "vec-triple-product")
    assert want in texts(applicable(block.expr), "vec-triple-product")
    shapes = {"A": ("m", "n"), "X": ("n", "p"), "B": ("p", "q")}
    assert want in texts(applicable("vec(A @ X @ B)", shapes=shapes), "vec-triple-product")
    derivation = derive(text, wrt="X")
    assert want in texts(applicable(derivation), "vec-triple-product")
    with pytest.raises(TypeError):
        applicable(42)


def test_limit_and_order():
    matches = applicable(STORE)
    assert applicable(STORE, limit=3) == matches[:3]
    order = {"forward": 0, "backward": 1, "differential": 2, "gradient": 3}
    ranks = [order[m.direction] for m in matches]
    assert ranks == sorted(ranks)


def test_no_duplicate_matches():
    for block in GALLERY:
        matches = applicable(block)
        keys = [(m.identity.id, m.matched_text, m.text) for m in matches]
        assert len(keys) == len(set(keys)), block


# ---------------------------------------------------------------------------------------------
# the whole catalogue applied to its own sides
# ---------------------------------------------------------------------------------------------


def _own_blocks():
    from gradwright.identities import all as all_identities

    for ident in all_identities():
        if ident.kind == "differential":
            inner = ident.lhs.strip()[2:-1]
            yield ident, "differential", "\n".join([*ident.declarations, f"f = {inner}"])
        elif ident.kind == "derivative":
            yield ident, "gradient", ident.block("lhs")
        else:
            yield ident, "forward", ident.block("lhs")
            yield ident, "backward", ident.block("rhs")


OWN = list(_own_blocks())


@pytest.mark.parametrize("ident, direction, block", OWN, ids=[f"{i.id}-{d}" for i, d, _ in OWN])
def test_each_identity_applies_to_its_own_side_and_keeps_the_value(ident, direction, block):
    from gradwright.identities.apply import compiled_patterns

    offered = {(p.identity.id, p.direction) for p in compiled_patterns()}
    matches = applicable(block, verify=False)
    if (ident.id, direction) in offered:
        # a symmetric identity (trace(A @ B) = trace(B @ A)) may be found in the other direction
        assert any(m.identity.id == ident.id for m in matches)
    root = parse_block(block).expr
    arrays, sizes, _ = sample(root, 0)
    original = evaluate(root, arrays, dims=sizes)
    for m in matches:
        if m.is_rewrite:
            assert close(original, evaluate(m.rewritten, arrays, dims=sizes), rtol=1e-6), m.summary


def test_most_identities_are_offered_as_rewrites():
    from gradwright.identities.apply import compiled_patterns

    offered = {p.identity.id for p in compiled_patterns()}
    assert len(offered) >= 150


def test_a_match_states_its_conditions_in_words():
    block = (
        "A: (n, n) invertible\nU: (n, k)\nC: (k, k) invertible\nV: (k, n)\nf = inv(A + U @ C @ V)"
    )
    (woodbury,) = [m for m in applicable(block) if m.identity.id == "woodbury-identity"]
    assert woodbury.conditions == "A, C and A + U @ C @ V invertible"
