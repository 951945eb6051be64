"""gradwright's generated code against hand-written NumPy, jitted JAX and torch eager.

    python benchmarks/bench_suite.py [--quick]

Single-threaded (BLAS, XLA and torch limited to one thread before they are imported), float64,
every figure from this one run, all in one process. Times are CPU seconds of the process
(`time.process_time`, best of several repeats), so that other work on a shared machine does
not inflate them; the ratio column divides by the hand-written NumPy time of the same case.
No `sizes=` is passed to `derive` anywhere. The last lines print the targets of issue 11 and
whether this run meets them.
"""

from __future__ import annotations

import os

for _var in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ[_var] = "1"
os.environ["XLA_FLAGS"] = "--xla_cpu_multi_thread_eigen=false intra_op_parallelism_threads=1"

import argparse  # noqa: E402
import platform  # noqa: E402
import subprocess  # noqa: E402
import sys  # noqa: E402
import time  # noqa: E402

import numpy as np  # noqa: E402
from scipy.linalg import cho_factor, cho_solve  # noqa: E402

from gradwright import derive  # noqa: E402

try:
    import jax
    import jax.numpy as jnp

    jax.config.update("jax_enable_x64", True)
except ImportError:  # pragma: no cover - the bench extra installs it
    jax = None
try:
    import torch

    torch.set_num_threads(1)
except ImportError:  # pragma: no cover
    torch = None

ROWS: list = []
TARGETS: list = []


def best_of(fn, repeat=5, min_time=0.02) -> float:
    fn()
    number = 1
    while True:
        t = time.process_time()
        for _ in range(number):
            fn()
        if time.process_time() - t >= min_time or number >= 1 << 16:
            break
        number *= 4
    best = float("inf")
    for _ in range(repeat):
        t = time.process_time()
        for _ in range(number):
            fn()
        best = min(best, (time.process_time() - t) / number)
    return best


def record(case: str, label: str, fn, hand: float | None) -> float:
    t = best_of(fn)
    ROWS.append((case, label, t, t / hand if hand else 1.0))
    return t


def check(got, want, what):
    got = got if isinstance(got, tuple) else (got,)
    want = want if isinstance(want, tuple) else (want,)
    for g, w in zip(got, want):
        np.testing.assert_allclose(np.asarray(g), np.asarray(w), rtol=1e-6, atol=1e-8, err_msg=what)


def others(case: str, ref, args: dict, wrt: tuple, hand: float, want: tuple | None = None):
    """Jitted JAX value-and-gradient and torch eager autograd of the same function; with
    `want` (value, *gradients in the order of `wrt`) both are checked against it first."""
    if jax is not None:
        ja = {k: jnp.asarray(v) for k, v in args.items()}
        f = jax.jit(jax.value_and_grad(lambda vs, cs: ref(jnp, **cs, **vs)))
        vs = {k: ja[k] for k in wrt}
        cs = {k: v for k, v in ja.items() if k not in wrt}
        if want is not None:
            value, grads = f(vs, cs)
            check((value, *(grads[k] for k in wrt)), want, f"{case} (JAX)")
        record(case, "value+gradient, jitted JAX", lambda: jax.block_until_ready(f(vs, cs)), hand)
    if torch is not None:
        ta = {k: torch.tensor(v, dtype=torch.float64) for k, v in args.items()}

        def run():
            vs = {k: ta[k].detach().requires_grad_(True) for k in wrt}
            out = ref(torch, **{**ta, **vs})
            return (out, *torch.autograd.grad(out, [vs[k] for k in wrt]))

        if want is not None:
            check(tuple(t.detach().numpy() for t in run()), want, f"{case} (torch)")
        return record(case, "value+gradient, torch eager", run, hand)
    return None


# --- problems ---------------------------------------------------------------------------------

LSQ = "X: (n, p)\ny: (n,)\nw: (p,)\nf = sum((X @ w - y)**2)"
MLSQ = "X: (n, p)\nW: (p, k)\nY: (n, k)\nf = sum((X @ W - Y)**2)"


def least_squares(n: int):
    case = f"least squares n={n} p={n // 2}"
    d = derive(LSQ, wrt="w")
    rng = np.random.default_rng(n)
    X, y, w = rng.standard_normal((n, n // 2)), rng.standard_normal(n), rng.standard_normal(n // 2)
    g, vg = d.gradient_function(), d.value_and_gradient_function()

    def hand_g():
        return 2 * (X.T @ (X @ w - y))

    def hand_vg():
        r = X @ w - y
        return r @ r, 2 * (X.T @ r)

    check(g(X=X, y=y, w=w), hand_g(), case)
    check(vg(X=X, y=y, w=w), hand_vg(), case)
    h = record(case, "gradient, hand-written NumPy", hand_g, None)
    rg = record(case, "gradient, gradwright", lambda: g(X=X, y=y, w=w), h) / h
    hv = record(case, "value+gradient, hand-written NumPy", hand_vg, None)
    rvg = record(case, "value+gradient, gradwright", lambda: vg(X=X, y=y, w=w), hv) / hv
    TARGETS.append((f"{case}: gradient / hand <= 1.1", rg, rg <= 1.1))
    TARGETS.append((f"{case}: value+gradient / hand <= 1.1", rvg, rvg <= 1.1))


def matrix_least_squares(n: int, p: int, k: int):
    case = f"matrix least squares n={n} p={p} k={k}"
    d = derive(MLSQ, wrt="W")
    rng = np.random.default_rng(p)
    X, W, Y = rng.standard_normal((n, p)), rng.standard_normal((p, k)), rng.standard_normal((n, k))
    g = d.gradient_function()

    def hand():
        return 2 * (X.T @ (X @ W - Y))

    check(g(X=X, W=W, Y=Y), hand(), case)
    h = record(case, "gradient, hand-written NumPy", hand, None)
    r = record(case, "gradient, gradwright", lambda: g(X=X, W=W, Y=Y), h) / h
    TARGETS.append((f"{case}: gradient / hand <= 1.1", r, r <= 1.1))


def _against_torch(case, vg, hand, ref, a, wrt, want, got):
    """Value+gradient of gradwright and the hand-written NumPy version, then JAX and torch;
    the target is a ratio to torch eager."""
    check(got, want, case)
    h = record(case, "value+gradient, hand-written NumPy", lambda: hand(**a), None)
    ours = record(case, "value+gradient, gradwright", lambda: vg(**a), h)
    t_torch = others(case, ref, a, wrt, h, want=want)
    if t_torch:
        TARGETS.append(
            (f"{case}: value+gradient / torch <= 0.8", ours / t_torch, ours <= 0.8 * t_torch)
        )


NETWORK = (
    "X: (n, d)\nW1: (d, h)\nb1: (h,)\nW2: (h, k)\nb2: (k,)\nY: (n, k)\n"
    "H = tanh(X @ W1 + b1)\nf = sum((H @ W2 + b2 - Y)**2)"
)


def network(n, dd, hh, k):
    case = f"two-layer network n={n} d={dd} h={hh} k={k}"
    d = derive(NETWORK, wrt=["W1", "b1", "W2", "b2"])
    rng = np.random.default_rng(1)
    a = {
        "X": rng.standard_normal((n, dd)),
        "W1": rng.standard_normal((dd, hh)) / np.sqrt(dd),
        "b1": rng.standard_normal(hh),
        "W2": rng.standard_normal((hh, k)) / np.sqrt(hh),
        "b2": rng.standard_normal(k),
        "Y": rng.standard_normal((n, k)),
    }
    vg = d.value_and_gradient_function()

    def hand(X, W1, b1, W2, b2, Y):
        H = np.tanh(X @ W1 + b1)
        R = H @ W2 + b2 - Y
        G = (1 - H * H) * (R @ W2.T)
        return np.vdot(R, R), (2 * (X.T @ G), 2 * G.sum(0), 2 * (H.T @ R), 2 * R.sum(0))

    def ref(xp, X, W1, b1, W2, b2, Y):
        return xp.sum((xp.tanh(X @ W1 + b1) @ W2 + b2 - Y) ** 2)

    value, grads = vg(**a)
    hv, hg = hand(**a)
    _against_torch(case, vg, hand, ref, a, ("W1", "b1", "W2", "b2"), (hv, *hg), (value, *grads))


ATTENTION = (
    "Q: (n, e)\nK: (m, e)\nV: (m, e)\nT: (n, e)\nc: ()\n"
    "A = softmax(c * Q @ K.T, axis=1)\nf = sum((A @ V - T)**2)"
)


def _softmax_rows(xp, z):
    if xp is np:
        z = np.exp(z - z.max(axis=1, keepdims=True))
        return z / z.sum(axis=1, keepdims=True)
    if torch is not None and xp is torch:
        return torch.softmax(z, dim=1)
    return jax.nn.softmax(z, axis=1)


def attention(n, m, e):
    case = f"attention head (softmax over each row) n={n} m={m} e={e}"
    d = derive(ATTENTION, wrt=["Q", "K", "V"])
    rng = np.random.default_rng(2)
    a = {
        "Q": rng.standard_normal((n, e)),
        "K": rng.standard_normal((m, e)),
        "V": rng.standard_normal((m, e)),
        "T": rng.standard_normal((n, e)),
        "c": 1 / np.sqrt(e),
    }
    vg = d.value_and_gradient_function()

    def hand(Q, K, V, T, c):
        S = Q @ K.T
        S *= c
        S -= S.max(axis=1, keepdims=True)
        A = np.exp(S, out=S)
        A /= A.sum(axis=1, keepdims=True)
        R = A @ V
        R -= T
        G = R @ V.T  # half the cotangent of A
        G -= np.einsum("ij,ij->i", A, G)[:, None]
        G *= A  # the softmax backward A * (G - rowsum(A * G)), halved
        return np.vdot(R, R), (2 * c * (G @ K), 2 * c * (G.T @ Q), 2 * (A.T @ R))

    def ref(xp, Q, K, V, T, c):
        return xp.sum((_softmax_rows(xp, c * Q @ K.T) @ V - T) ** 2)

    value, grads = vg(**a)
    hv, hg = hand(**a)
    _against_torch(case, vg, hand, ref, a, ("Q", "K", "V"), (hv, *hg), (value, *grads))


KALMAN = (
    "H: (m, n)\nP: (n, n) spd\nR: (m, m) spd\nv: (m,)\nS = H @ P @ H.T + R\n"
    "nll = logdet(S) + v @ solve(S, v)"
)


def _spd(rng, n):
    a = rng.standard_normal((n, n))
    return a @ a.T / n + np.eye(n)


def kalman(m, n):
    case = f"Kalman innovation likelihood m={m} n={n}"
    d = derive(KALMAN, wrt=["P", "R"])
    rng = np.random.default_rng(3)
    a = {"H": rng.standard_normal((m, n)), "P": _spd(rng, n), "R": _spd(rng, m)}
    a["v"] = rng.standard_normal(m)
    vg = d.value_and_gradient_function()

    def hand(H, P, R, v):
        c = cho_factor(H @ P @ H.T + R, check_finite=False)
        s = cho_solve(c, v, check_finite=False)
        Si = cho_solve(c, np.eye(m), check_finite=False)
        gR = Si - np.outer(s, s)
        return 2 * np.log(np.diagonal(c[0])).sum() + v @ s, (H.T @ gR @ H, gR)

    value, grads = vg(**a)
    hv, hg = hand(**a)
    check((value, *grads), (hv, *hg), case)
    h = record(case, "value+gradient, hand-written Cholesky", lambda: hand(**a), None)
    r = record(case, "value+gradient, gradwright", lambda: vg(**a), h) / h
    TARGETS.append((f"{case}: value+gradient / hand Cholesky <= 1.1", r, r <= 1.1))


GP = (
    "K: (n, n) spd\ns: () positive\ny: (n,)\nC = K + s * eye(n)\n"
    "nll = 0.5 * (y @ solve(C, y) + logdet(C))"
)


def gaussian_process(n):
    case = f"Gaussian-process likelihood n={n}"
    d = derive(GP, wrt="s")
    rng = np.random.default_rng(4)
    x = np.sort(rng.uniform(0, 10, n))
    a = {"K": np.exp(-0.5 * (x[:, None] - x[None, :]) ** 2), "s": 0.1, "y": np.sin(x)}
    vg = d.value_and_gradient_function()

    def hand(K, s, y):
        c = cho_factor(K + s * np.eye(n), check_finite=False)
        al = cho_solve(c, y, check_finite=False)
        ci = cho_solve(c, np.eye(n), check_finite=False)
        value = 0.5 * (y @ al) + np.log(np.diagonal(c[0])).sum()
        return value, 0.5 * (np.trace(ci) - al @ al)

    check(vg(**a), hand(**a), case)
    h = record(case, "value+gradient, hand-written Cholesky", lambda: hand(**a), None)
    r = record(case, "value+gradient, gradwright", lambda: vg(**a), h) / h
    TARGETS.append((f"{case}: value+gradient / hand Cholesky <= 1.1", r, r <= 1.1))


REML = (
    "X: (n, p)\nZ: (n, g)\ny: (n,)\nse: () positive\nsu: () positive\n"
    "V = se * eye(n) + su * (Z @ Z.T)\nB = X.T @ solve(V, X)\n"
    "r = y - X @ solve(B, X.T @ solve(V, y))\n"
    "reml = logdet(V) + logdet(B) + r @ solve(V, r)"
)


def reml(n, p, groups):
    case = f"REML, random intercept n={n} p={p} groups={groups}"
    d = derive(REML, wrt=["se", "su"])
    rng = np.random.default_rng(5)
    Z = np.zeros((n, groups))
    Z[np.arange(n), rng.integers(0, groups, n)] = 1.0
    X = np.column_stack([np.ones(n), rng.standard_normal((n, p - 1))])
    y = X @ rng.standard_normal(p) + Z @ rng.standard_normal(groups) + rng.standard_normal(n)
    a = {"X": X, "Z": Z, "y": y, "se": 1.0, "su": 0.5}
    vg = d.value_and_gradient_function()

    def hand(X, Z, y, se, su):
        c = cho_factor(se * np.eye(n) + su * (Z @ Z.T), check_finite=False)
        ViX = cho_solve(c, X, check_finite=False)
        Viy = cho_solve(c, y, check_finite=False)
        cb = cho_factor(X.T @ ViX, check_finite=False)
        Py = Viy - ViX @ cho_solve(cb, X.T @ Viy, check_finite=False)
        Vi = cho_solve(c, np.eye(n), check_finite=False)
        P = Vi - ViX @ cho_solve(cb, ViX.T, check_finite=False)
        ZtPy = Z.T @ Py
        value = 2 * np.log(np.diagonal(c[0])).sum() + 2 * np.log(np.diagonal(cb[0])).sum() + y @ Py
        return value, (np.trace(P) - Py @ Py, np.vdot(Z, P @ Z) - ZtPy @ ZtPy)

    value, grads = vg(**a)
    hv, hg = hand(**a)
    check((value, *grads), (hv, *hg), case)
    h = record(case, "value+gradient, hand-written Cholesky", lambda: hand(**a), None)
    r = record(case, "value+gradient, gradwright", lambda: vg(**a), h) / h
    TARGETS.append((f"{case}: value+gradient / hand Cholesky <= 1.1", r, r <= 1.1))


DEMAND = (
    "P: (s, w)\nU: (s, r)\nV: (w, r)\nmu: ()\nR = P - U @ V.T\n"
    "loss = sum(R**2) + mu * (sum(U**2) + sum(V**2))"
)


def factorization(n, r):
    case = f"factorization n={n} r={r}"
    d = derive(DEMAND, wrt=["U", "V"])
    rng = np.random.default_rng(6)
    a = {
        "P": rng.standard_normal((n, n)),
        "U": rng.standard_normal((n, r)),
        "V": rng.standard_normal((n, r)),
        "mu": 0.1,
    }
    g = d.gradient_function("U")

    def hand(P, U, V, mu):
        return -2 * (P - U @ V.T) @ V + 2 * mu * U

    check(g(**a), hand(**a), case)
    h = record(case, "gradient dU, hand-written (literal)", lambda: hand(**a), None)
    record(case, "gradient dU, gradwright", lambda: g(**a), h)


FRESH = """
import time
import numpy as np
t1 = time.process_time()
import gradwright
d = gradwright.derive({block!r}, wrt={wrt!r})
f = d.gradient_function()
f(**{args})
t2 = time.process_time()
print((t2 - t1) * 1e3)
"""
FRESH_ARGS = {
    "least squares": "dict(X=np.ones((5, 3)), y=np.ones(5), w=np.ones(3))",
    "Kalman (spd)": "dict(H=np.ones((3, 2)), P=np.eye(2), R=np.eye(3), v=np.ones(3))",
}


def fresh_process():
    for name, block, wrt in (("least squares", LSQ, "w"), ("Kalman (spd)", KALMAN, "P")):
        code = FRESH.format(block=block, wrt=wrt, args=FRESH_ARGS[name])
        env = dict(os.environ)
        env.pop("PYTHONDONTWRITEBYTECODE", None)
        subprocess.run([sys.executable, "-c", code], env=env, capture_output=True, check=True)
        times = []
        for _ in range(3):
            out = subprocess.run(
                [sys.executable, "-c", code], env=env, capture_output=True, text=True, check=True
            )
            times.append(float(out.stdout.strip().splitlines()[-1]))
        ms = min(times)
        what = "import + derive + first gradient (CPU)"
        ROWS.append((f"fresh process, {name}", what, ms / 1e3, 1.0))
        TARGETS.append((f"fresh process {name}: ms beyond NumPy's import < 50", ms, ms < 50))


def main():
    p = argparse.ArgumentParser()
    p.add_argument("--quick", action="store_true", help="small sizes (under a minute)")
    p.add_argument("--only", default="", help="comma-separated problems, e.g. attention,network")
    args = p.parse_args()
    q = args.quick
    problems = {
        "least_squares": lambda: [
            least_squares(n) for n in ((16, 64, 256) if q else (16, 64, 200, 1000))
        ],
        "matrix_least_squares": lambda: (
            matrix_least_squares(*((100, 100, 100) if q else (300, 300, 300))),
            matrix_least_squares(*((500, 20, 3) if q else (2000, 50, 3))),
        ),
        "factorization": lambda: factorization(300 if q else 1000, 10),
        "network": lambda: network(*((256, 98, 32, 10) if q else (2048, 784, 256, 10))),
        "attention": lambda: attention(*((128, 64, 16) if q else (512, 256, 64))),
        "kalman": lambda: kalman(*((50, 20) if q else (200, 100))),
        "gaussian_process": lambda: gaussian_process(100 if q else 500),
        "reml": lambda: reml(*((100, 3, 10) if q else (500, 5, 25))),
        "fresh_process": fresh_process,
    }
    chosen = [w for w in args.only.split(",") if w] or list(problems)
    for name in chosen:
        problems[name]()
    print(f"machine: {platform.machine()}, {os.cpu_count()} cores, {platform.platform()}")
    print(f"python {platform.python_version()}, numpy {np.__version__}", end="")
    print(f", jax {jax.__version__}" if jax else "", end="")
    print(f", torch {torch.__version__}" if torch else "")
    w1 = max(len(r[0]) for r in ROWS)
    w2 = max(len(r[1]) for r in ROWS)
    print(f"{'problem'.ljust(w1)}  {'case'.ljust(w2)}  {'seconds':>9}  {'ratio':>6}")
    for case, label, t, ratio in ROWS:
        print(f"{case.ljust(w1)}  {label.ljust(w2)}  {t:9.2e}  {ratio:6.2f}")
    print("\ntargets (issue 11):")
    for what, value, ok in TARGETS:
        print(f"  {'met    ' if ok else 'NOT met'}  {what}: {value:.2f}")


if __name__ == "__main__":
    main()
