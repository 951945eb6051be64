"""The same block gives byte-identical LaTeX, steps and generated source in every process.

Python salts str hashes per process (PYTHONHASHSEED); any set or dict ordered by hash that
leaks into output would differ between the runs below.
"""

from __future__ import annotations

import hashlib
import json
import os
import subprocess
import sys
import textwrap

import pytest

BLOCKS = [
    (
        "P: (s, w)\nU: (s, r)\nV: (w, r)\nmu: ()\nR = P - U @ V.T\n"
        "loss = sum(R**2) + mu * (sum(U**2) + sum(V**2))",
        ["U", "V"],
    ),  # fmt: skip
    ("S: (n, n) spd\nX: (n, k)\nf = logdet(S) + trace(X.T @ solve(S, X))", ["S", "X"]),
    ("W: (k, n)\nx: (n,)\ny: (k,)\np = softmax(W @ x)\nf = -y @ log(p)", ["W", "x"]),
    ("A: (m, n)\nB: (p, q)\nF = kron(A, B)", ["A", "B"]),
    ("X: (m, n)\nF = X @ X.T + 2 * X @ X.T", ["X"]),
    (
        "x: (n,) positive\nc: ()\nz: (n,)\n"
        "f = sum(sqrt(x) * tanh(z) + softplus(x) / c) + c * cos(c) + x @ z",
        ["x", "c", "z"],
    ),  # fmt: skip
    (
        "A: (n, n)\nx: (n,)\nb: (n,)\nf = (A @ x - b) @ (A @ x - b) + x @ inv(A) @ x + det(A)",
        ["A", "x"],
    ),  # fmt: skip
    (
        "X: (m, n)\nw: (n,)\nf = logsumexp(X @ w) + norm(w) + sum(diag(X.T @ X)) "
        "+ sum(mpow(X.T @ X, 2))",
        ["X", "w"],
    ),  # fmt: skip
]

CHILD = textwrap.dedent(
    """
    import json, sys
    import gradwright

    out = []
    for block, wrt in json.loads(sys.argv[1]):
        d = gradwright.derive(block, wrt=wrt)
        parts = {"latex": d.latex(), "text_steps": d.text_steps(), "source": d.source()}
        read_off = d.gradient if d.is_scalar else d.jacobian
        derivatives = []
        for v in wrt:
            try:
                derivatives.append(gradwright.printing.text(read_off(v)))
            except gradwright.NotSupportedError as err:  # no compact form: its message
                derivatives.append(str(err))
        parts["derivatives"] = "\\n".join(derivatives)
        parts["shape_table"] = json.dumps(d.shape_table())
        out.append(parts)
    print(json.dumps(out))
    """
)


def run_with_seed(seed: str) -> list:
    env = {**os.environ, "PYTHONHASHSEED": seed}
    proc = subprocess.run(
        [sys.executable, "-c", CHILD, json.dumps(BLOCKS)],
        capture_output=True,
        text=True,
        env=env,
        timeout=120,
    )
    assert proc.returncode == 0, proc.stderr[-3000:]
    return json.loads(proc.stdout)


@pytest.fixture(scope="module")
def runs():
    return {seed: run_with_seed(seed) for seed in ("0", "1", "12345")}


@pytest.mark.parametrize("index", range(len(BLOCKS)))
@pytest.mark.parametrize("part", ["latex", "text_steps", "source", "derivatives", "shape_table"])
def test_byte_identical_across_hash_seeds(runs, index, part):
    seen = {}
    for seed, outputs in runs.items():
        text = outputs[index][part]
        seen[seed] = hashlib.sha256(text.encode("utf-8")).hexdigest()
    assert len(set(seen.values())) == 1, (BLOCKS[index][0], part, seen)


def test_outputs_are_not_empty(runs):
    for outputs in runs.values():
        for parts in outputs:
            assert all(parts[k] for k in ("latex", "text_steps", "source"))
