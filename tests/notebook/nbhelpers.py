"""Blocks and helpers shared by the notebook-face tests."""

from __future__ import annotations


def run_derive(shell, line: str, cell: str):
    """Run `%%derive line` on `cell`; returns the captured outputs (MIME bundles and stdout)."""
    from IPython.utils.capture import capture_output

    with capture_output() as cap:
        shell.run_cell_magic("derive", line, cell)
    return cap


DEMAND = """\
P: (s, w)          # demand, stores x weeks
U: (s, r)          # store factors
V: (w, r)          # week factors
mu: ()
R = P - U @ V.T
loss = sum(R**2) + mu * (sum(U**2) + sum(V**2))
"""

COVARIANCE = """\
Z: (m, n)
S: (n, n) spd
days: ()
nll = days * logdet(S) + trace(solve(S, Z.T @ Z))
"""

ARM = """\
x: (j,)
W1: (h, j)
W2: (o, h)
grip = tanh(W2 @ tanh(W1 @ x))
"""
