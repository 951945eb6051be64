"""The derived gradient of a logistic loss on Dask arrays, against the number of rows.

    python benchmarks/bench_dask_rows.py [--quick]

For each row count a fresh dask.distributed LocalCluster (2 workers, 1 thread each) evaluates
value_and_gradient once over rows generated on the workers in chunks of CHUNK rows (nothing
persisted), so that each worker's peak memory (its process's maximum resident set) shows what
one evaluation needs. Expected: time linear in the rows, peak memory flat (set by the chunk).
Also the dispatch overhead on NumPy arrays: the generated function called
through `d.gradient_function()` against the NumPy module's function called directly.
"""

from __future__ import annotations

import argparse
import time

import numpy as np

from gradwright import derive

LOGISTIC = "X: (n, p)\nw: (p,)\ny: (n,)\nf = sum(softplus(X @ w)) - y @ (X @ w)"
P = 20
CHUNK = 250_000


def _peak_rss_mib() -> float:
    import resource

    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024  # KiB on Linux


def one_size(n: int, seed: int = 0) -> tuple[float, float, float]:
    """(seconds for one evaluation, baseline peak MiB per worker, peak MiB after it), on a
    fresh cluster, so that the peak belongs to this evaluation alone."""
    import dask
    import dask.array as da
    from distributed import Client, LocalCluster

    d = derive(LOGISTIC, wrt="w")
    vg = d.value_and_gradient_function()
    w = np.full(P, 0.05)
    with (
        LocalCluster(
            n_workers=2, threads_per_worker=1, dashboard_address=None, host="127.0.0.1"
        ) as cluster,
        Client(cluster) as client,
    ):
        base = max(client.run(_peak_rss_mib).values())
        # features and outcome from one task per chunk, as a Parquet partition gives them
        # (two separately generated arrays make Dask's scheduler hold chunks longer)
        rng = da.random.default_rng(seed)
        Z = rng.standard_normal((n, P + 1), chunks=(CHUNK, P + 1))
        X, y = Z[:, :P], (Z[:, P] > 0).astype(float)
        t = time.perf_counter()
        dask.compute(*vg(X=X, y=y, w=w))
        seconds = time.perf_counter() - t
        peak = max(client.run(_peak_rss_mib).values())
    return seconds, base, peak


def numpy_overhead() -> tuple[float, float]:
    """Microseconds per call at n = 16: through the dispatcher and direct."""
    d = derive(LOGISTIC, wrt="w")
    g = d.gradient_function()
    direct = g.__wrapped__
    rng = np.random.default_rng(0)
    arrays = {"X": rng.standard_normal((16, 4)), "w": rng.standard_normal(4), "y": np.ones(16)}
    out = []
    for fn in (g, direct):
        best = float("inf")
        for _ in range(7):
            t = time.perf_counter()
            for _ in range(2000):
                fn(**arrays)
            best = min(best, (time.perf_counter() - t) / 2000)
        out.append(best * 1e6)
    return out[0], out[1]


def main():
    parser = argparse.ArgumentParser()
    parser.add_argument("--quick", action="store_true", help="two row counts only")
    args = parser.parse_args()
    via, direct = numpy_overhead()
    print(f"NumPy arrays, n = 16: {via:.1f} us through dispatch, {direct:.1f} us direct")
    rows = [1_000_000, 2_000_000] if args.quick else [1_000_000, 2_000_000, 4_000_000, 8_000_000]
    print(f"logistic value and gradient, p = {P}, chunks of {CHUNK:,} rows, 2 workers")
    print(f"{'rows':>12} {'seconds':>9} {'s per 1e6 rows':>15} {'worker MiB before':>18}"
          f" {'peak worker MiB':>16}")  # fmt: skip
    for n in rows:
        seconds, base, peak = one_size(n)
        print(f"{n:>12,} {seconds:>9.2f} {seconds / n * 1e6:>15.3f} {base:>18.0f} {peak:>16.0f}")


if __name__ == "__main__":
    main()
