"""Derived gradients on Dask arrays, on a dask.distributed LocalCluster started here: least
squares, multi-output GLS and logistic regression over about 10^6 rows in several chunks equal
NumPy's numbers, no n x n array enters the task graph, and an L-BFGS fit on Dask data read from
Parquet reproduces statsmodels' estimates (reference library: statsmodels).
"""

from __future__ import annotations

import numpy as np
import pytest

from checks import rel_err
from gradwright import derive
from gradwright.backends import chunked_dims

da = pytest.importorskip("dask.array")
dask = pytest.importorskip("dask")
distributed = pytest.importorskip("distributed")

N, P, K = 1_000_000, 20, 3
CHUNK = 250_000

LEAST_SQUARES = "X: (n, p)\nw: (p,)\ny: (n,)\nf = sum((X @ w - y)**2)"
GLS = "X: (n, p)\nB: (p, k)\nY: (n, k)\nS: (k, k) spd\nR = Y - X @ B\nf = trace(solve(S, R.T @ R))"
LOGISTIC = "X: (n, p)\nw: (p,)\ny: (n,)\nf = sum(softplus(X @ w)) - y @ (X @ w)"


@pytest.fixture(scope="module")
def client():
    from distributed import Client, LocalCluster

    with (
        LocalCluster(
            n_workers=2,
            threads_per_worker=1,
            processes=True,
            dashboard_address=None,
            scheduler_port=0,
            host="127.0.0.1",
        ) as cluster,
        Client(cluster) as c,
    ):
        yield c


@pytest.fixture(scope="module")
def data(client):
    """A persisted chunked design (generated on the workers) and its NumPy copy."""
    rng = da.random.default_rng(7)
    X = rng.standard_normal((N, P), chunks=(CHUNK, P))
    gen = np.random.default_rng(8)
    beta, gamma = gen.standard_normal(P) / 4, gen.standard_normal((P, K))
    y_ls = X @ beta + rng.standard_normal(N, chunks=CHUNK)
    y_01 = (rng.random(N, chunks=CHUNK) < 1 / (1 + da.exp(-(X @ beta)))).astype(float)
    Y = X @ gamma + rng.standard_normal((N, K), chunks=(CHUNK, K))
    X, y_ls, y_01, Y = dask.persist(X, y_ls, y_01, Y)
    Xn, y_ls_n, y_01_n, Yn = dask.compute(X, y_ls, y_01, Y)
    A = gen.standard_normal((K, K))
    return {
        "X": (X, Xn),
        "y_ls": (y_ls, y_ls_n),
        "y_01": (y_01, y_01_n),
        "Y": (Y, Yn),
        "S": A @ A.T + K * np.eye(K),
        "w": gen.standard_normal(P) / 10,
        "B": gen.standard_normal((P, K)),
    }


def _arrays(name, data):
    if name == "least squares":
        return LEAST_SQUARES, "w", {"X": data["X"], "y": data["y_ls"], "w": data["w"]}
    if name == "GLS":
        return GLS, "B", {"X": data["X"], "Y": data["Y"], "B": data["B"], "S": data["S"]}
    return LOGISTIC, "w", {"X": data["X"], "y": data["y_01"], "w": data["w"]}


def large_arrays(collections, n: int) -> list:
    """Arrays of the task graph with two or more axes of size >= n (from Dask's own layer
    annotations of shapes)."""
    out = []
    for c in collections:
        for name, layer in c.__dask_graph__().layers.items():
            shape = (getattr(layer, "collection_annotations", None) or {}).get("shape")
            if shape and sum(1 for s in shape if s == s and s >= n) >= 2:
                out.append((name, shape))
    return out


@pytest.mark.parametrize("model", ["least squares", "GLS", "logistic"])
def test_gradient_over_row_chunks_equals_numpy(model, data, client):
    block, var, arrays = _arrays(model, data)
    d = derive(block, wrt=var)
    lazy = {k: v[0] if isinstance(v, tuple) else v for k, v in arrays.items()}
    eager = {k: v[1] if isinstance(v, tuple) else v for k, v in arrays.items()}
    assert chunked_dims(d, lazy) == ("n",)
    value, grad = d.value_and_gradient_function()(**lazy)
    assert isinstance(value, da.Array) and isinstance(grad, da.Array)  # lazy until computed
    assert large_arrays([value, grad], N) == []
    got_value, got_grad = dask.compute(value, grad)  # on the LocalCluster (the active client)
    want_value, want_grad = d.value_and_gradient_function()(**eager)
    assert rel_err(got_value, want_value) <= 1e-10
    assert rel_err(got_grad, want_grad) <= 1e-10
    assert got_grad.dtype == np.float64 and got_grad.shape == np.shape(eager[var])


def test_the_graph_check_sees_an_n_by_n_array():
    """The check above can fail: a formula whose code forms X Xᵀ is caught (graph only, small)."""
    d = derive("X: (n, p)\nw: (p,)\nf = sum(exp(X @ X.T)) + w @ w", wrt="w")
    X = da.ones((400, 3), chunks=(100, 3))
    value = d.function()(X=X, w=np.ones(3))
    assert large_arrays([value], 400) != []


def test_gradient_follows_the_chunks_of_the_rows():
    """The size hint comes from the chunked axis: the same block chunked along p makes p large."""
    d = derive(LEAST_SQUARES, wrt="w")
    X = da.ones((50, 40), chunks=(50, 10))
    assert chunked_dims(d, {"X": X}) == ("p",)


def test_lbfgs_fit_on_parquet_matches_statsmodels(client, tmp_path):
    """Logistic regression and weighted least squares (GLS with a diagonal covariance), fitted
    by SciPy's L-BFGS on Dask-evaluated value and gradient, against statsmodels' Logit and WLS
    on the same data (statsmodels computes them by Newton's method and by QR on whitened data)."""
    import dask.dataframe as dd
    import pandas as pd
    import statsmodels.api as sm
    from scipy.optimize import minimize

    gen = np.random.default_rng(11)
    n = 6000
    frame = pd.DataFrame(gen.standard_normal((n, 3)), columns=["moisture", "shade", "slope"])
    frame["one"] = 1.0
    eta = frame.to_numpy() @ np.array([0.8, -0.5, 0.3, -0.2])
    frame["sprouted"] = (gen.random(n) < 1 / (1 + np.exp(-eta))).astype(float)
    frame["height"] = eta + gen.standard_normal(n) * np.sqrt(1 + frame["shade"] ** 2)
    frame["weight"] = 1 / (1 + frame["shade"] ** 2)
    dd.from_pandas(frame, npartitions=4).to_parquet(tmp_path / "plots")

    table = dd.read_parquet(tmp_path / "plots").persist()
    cols = ["moisture", "shade", "slope", "one"]
    X, y, h, wt = (
        table[c].to_dask_array().compute_chunk_sizes().persist()
        for c in (cols, "sprouted", "height", "weight")
    )
    assert X.numblocks[0] >= 2

    def fit(vg, **data):
        def objective(b):
            value, grad = dask.compute(*vg(b=b, **data))
            return float(value), np.asarray(grad)

        res = minimize(objective, np.zeros(4), jac=True, method="L-BFGS-B",
                       options={"gtol": 1e-10, "ftol": 1e-15, "maxiter": 500})  # fmt: skip
        assert res.success, res.message
        return res.x

    logit = derive("X: (n, p)\nb: (p,)\ny: (n,)\nf = sum(softplus(X @ b)) - y @ (X @ b)", "b")
    got = fit(logit.value_and_gradient_function(), X=X, y=y)
    Xn = frame[cols].to_numpy()
    want = sm.Logit(frame["sprouted"].to_numpy(), Xn).fit(disp=0, tol=1e-12).params
    np.testing.assert_allclose(got, want, rtol=1e-5, atol=1e-7)

    wls = derive("X: (n, p)\nb: (p,)\ny: (n,)\nv: (n,)\nf = sum(v * (X @ b - y)**2)", "b")
    got = fit(wls.value_and_gradient_function(), X=X, y=h, v=wt)
    want = sm.WLS(frame["height"].to_numpy(), Xn, weights=frame["weight"].to_numpy()).fit().params
    np.testing.assert_allclose(got, want, rtol=1e-6, atol=1e-8)


def test_float32_on_dask_stays_float32():
    d = derive(GLS, wrt=["B", "S"])
    gen = np.random.default_rng(2)
    A = gen.standard_normal((K, K))
    eager = {
        "X": gen.standard_normal((400, 5)),
        "Y": gen.standard_normal((400, K)),
        "B": gen.standard_normal((5, K)),
        "S": A @ A.T + K * np.eye(K),
    }
    lazy = {
        k: da.from_array(v.astype(np.float32), chunks=(100, -1)) if k in "XY" else np.float32(v)
        for k, v in eager.items()
    }
    lazy["B"], lazy["S"] = da.from_array(lazy["B"]), da.from_array(lazy["S"])
    value, (gB, gS) = dask.compute(*d.value_and_gradient_function()(**lazy), scheduler="sync")
    want = d.value_and_gradient_function()(**eager)
    assert value.dtype == gB.dtype == gS.dtype == np.float32
    assert rel_err(gB, want[1][0]) <= 1e-5 and rel_err(gS, want[1][1]) <= 1e-5


def test_unknown_chunk_sizes_are_named():
    d = derive(LEAST_SQUARES, wrt="w")
    X = da.ones((40, 3), chunks=(10, 3))
    kept = X[X[:, 0] > 0]  # a filter: Dask does not know the row count before computing
    with pytest.raises(ValueError, match=r"X has an unknown number of rows .*compute_chunk_sizes"):
        d.gradient_function()(X=kept, w=np.ones(3), y=kept[:, 0])
