"""Speed of gradwright's generated code, as ratios against baselines run in the same process.

    python benchmarks/bench_gradients.py [--quick]

Baselines: the value function itself, the gradient written literally in NumPy, and the
gradient from jitted automatic differentiation (JAX, CPU, float64) when JAX is installed.
Also the time `derive()` takes on typical blocks, against parsing the same text with `ast`.
"""

from __future__ import annotations

import argparse
import ast
import time

import numpy as np

from gradwright import derive


def best_of(fn, repeat=7, number=3) -> float:
    best = float("inf")
    for _ in range(repeat):
        t = time.perf_counter()
        for _ in range(number):
            fn()
        best = min(best, (time.perf_counter() - t) / number)
    return best


DEMAND = (
    "P: (s, w)\nU: (s, r)\nV: (w, r)\nmu: ()\nR = P - U @ V.T\n"
    "loss = sum(R**2) + mu * (sum(U**2) + sum(V**2))"
)
COVARIANCE = (
    "Z: (m, n)\nS: (n, n) spd\nm_days: ()\nnll = m_days * logdet(S) + trace(solve(S, Z.T @ Z))"
)
GLS = (
    "X: (t, l)\nY: (t, g)\nS: (t, t) spd\nB: (l, g)\nE = Y - X @ B\ngls = trace(E.T @ solve(S, E))"
)


def factorization(n: int, r: int, rows: list):
    d = derive(DEMAND, wrt=["U", "V"], sizes={"s": n, "w": n, "r": r})
    rng = np.random.default_rng(0)
    a = {
        "P": rng.standard_normal((n, n)),
        "U": rng.standard_normal((n, r)),
        "V": rng.standard_normal((n, r)),
        "mu": 0.1,
    }
    f = d.function()
    g = d.gradient_function("U")
    vg = d.value_and_gradient_function()
    P, U, V, mu = a["P"], a["U"], a["V"], a["mu"]

    def literal():
        return -2 * (P - U @ V.T) @ V + 2 * mu * U

    np.testing.assert_allclose(g(**a), literal(), rtol=1e-8, atol=1e-8)
    t_f = best_of(lambda: f(**a))
    rows.append((f"factorization n={n} r={r}: value", t_f, 1.0))
    rows.append(("  gradient dU, literal NumPy", best_of(literal), best_of(literal) / t_f))
    t_g = best_of(lambda: g(**a))
    rows.append(("  gradient dU, gradwright", t_g, t_g / t_f))
    t_vg = best_of(lambda: vg(**a))
    rows.append(("  value + both gradients, gradwright", t_vg, t_vg / t_f))
    try:
        import jax

        jax.config.update("jax_enable_x64", True)
        import jax.numpy as jnp

        def loss(U, V, P, mu):
            R = P - U @ V.T
            return jnp.sum(R**2) + mu * (jnp.sum(U**2) + jnp.sum(V**2))

        jg = jax.jit(jax.grad(loss, 0))
        ja = [jnp.asarray(x) for x in (U, V, P)] + [mu]
        jg(*ja).block_until_ready()
        t_j = best_of(lambda: jg(*ja).block_until_ready())
        rows.append(("  gradient dU, jitted JAX autodiff", t_j, t_j / t_f))
        jvg = jax.jit(jax.value_and_grad(loss, (0, 1)))
        jax.block_until_ready(jvg(*ja))
        t_jvg = best_of(lambda: jax.block_until_ready(jvg(*ja)))
        rows.append(("  value + both gradients, jitted JAX", t_jvg, t_jvg / t_f))
    except ImportError:
        rows.append(("  (JAX not installed: no autodiff baseline)", float("nan"), float("nan")))


def covariance(n: int, m: int, rows: list):
    d = derive(COVARIANCE, wrt="S")
    rng = np.random.default_rng(1)
    Z = rng.standard_normal((m, n))
    A = rng.standard_normal((n, n))
    a = {"Z": Z, "S": A @ A.T / n + np.eye(n), "m_days": float(m)}
    S = a["S"]
    f = d.function()
    g = d.gradient_function("S")

    def literal():
        Si = np.linalg.inv(S)
        return m * Si - Si @ Z.T @ Z @ Si

    np.testing.assert_allclose(g(**a), literal(), rtol=1e-6, atol=1e-8)
    t_f = best_of(lambda: f(**a))
    rows.append((f"covariance n={n} m={m}: value", t_f, 1.0))
    rows.append(("  gradient, literal NumPy (inv)", best_of(literal), best_of(literal) / t_f))
    t_g = best_of(lambda: g(**a))
    rows.append(("  gradient, gradwright", t_g, t_g / t_f))


def derive_speed(rows: list):
    for name, text, wrt in (
        ("demand", DEMAND, ["U", "V"]),
        ("covariance", COVARIANCE, ["S"]),
        ("gls", GLS, ["B"]),
    ):
        code = "\n".join(line for line in text.splitlines() if ":" not in line)
        t_ast = best_of(lambda code=code: ast.parse(code), number=20)
        t_derive = best_of(lambda text=text, wrt=wrt: derive(text, wrt=wrt), number=20)
        t_grad = best_of(
            lambda text=text, wrt=wrt: [derive(text, wrt=wrt).gradient(v) for v in wrt], number=5
        )
        t_steps = best_of(lambda text=text, wrt=wrt: derive(text, wrt=wrt).latex(), number=5)
        rows.append((f"derive() {name}", t_derive, t_derive / t_ast))
        rows.append((f"  + gradient expressions {name}", t_grad, t_grad / t_ast))
        rows.append((f"  + derivation LaTeX {name}", t_steps, t_steps / t_ast))


def main():
    p = argparse.ArgumentParser()
    p.add_argument("--quick", action="store_true", help="small sizes (seconds)")
    args = p.parse_args()
    rows: list = []
    n = 300 if args.quick else 1000
    factorization(n, 10, rows)
    covariance(100 if args.quick else 400, 2000, rows)
    derive_speed(rows)
    width = max(len(r[0]) for r in rows)
    print(f"{'case'.ljust(width)}  {'seconds':>10}  {'ratio':>7}")
    for name, t, ratio in rows:
        print(f"{name.ljust(width)}  {t:10.2e}  {ratio:7.2f}")
    print(
        "ratios: against the value function (speed groups) and against ast.parse of the "
        "block's definition lines (derive groups)"
    )


if __name__ == "__main__":
    main()
