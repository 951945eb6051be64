"""Generated functions on arrays of other libraries: dispatch on the arguments (NumPy keeps its
own module and speed), array-API modules per library, and which dims a Dask input makes large.

>>> from gradwright import derive
>>> d = derive("X: (n, p)\\nw: (p,)\\ny: (n,)\\nf = sum((X @ w - y)**2)", wrt="w")
>>> import numpy as np
>>> g = d.gradient_function()
>>> g(X=np.eye(2), w=np.ones(2), y=np.zeros(2)).tolist()   # NumPy in, NumPy out
[2.0, 2.0]
"""

from __future__ import annotations

import inspect

import numpy as np

from .errors import FormulaError
from .printing.array_api_code import BACKENDS, NUMPY_ONLY_PREFIXES, translate

#: the size the cost model assumes for a dim that a Dask input chunks (rows past one machine)
LARGE = 10**9


def _library(value):
    from .printing.xp_runtime import _gw_library

    return _gw_library(value)


def module_source(derivation, backend: str = "numpy", sizes: dict | None = None) -> str:
    """The module text for `backend` (see `Derivation.source`)."""
    if backend not in BACKENDS:
        raise FormulaError(
            f"unknown backend {backend!r}: choose one of {', '.join(map(repr, BACKENDS))}"
        )
    if sizes is not None:
        bad = [k for k, v in sizes.items() if isinstance(v, bool) or not isinstance(v, int)]
        if bad or any(v <= 0 for v in sizes.values()):
            raise FormulaError("sizes must map dim names to positive integers, like {'n': 1000}")
    text = derivation._numpy_source(sizes)
    return text if backend == "numpy" else translate(text, backend)


def _array_api_namespace(derivation, large: tuple) -> dict:
    cache = derivation.__dict__.setdefault("_array_api_namespaces", {})
    ns = cache.get(large)
    if ns is None:
        source = module_source(derivation, "array_api", {d: LARGE for d in large} or None)
        ns = {"__name__": f"gradwright_generated_{derivation.target}_array_api"}
        # our own printer wrote this text from the tree (rewritten by array_api_code); no user
        # text is executed
        exec(compile(source, f"<gradwright {derivation.target} array api>", "exec"), ns)  # noqa: S102
        ns["_GW_WARN_NONFINITE"] = derivation.warn_nonfinite
        cache[large] = ns
    return ns


def chunked_dims(derivation, arrays: dict) -> tuple:
    """Dims bound to an axis that a Dask argument splits into several chunks: the large ones."""
    out = set()
    for name, value in arrays.items():
        info = derivation.symbols.get(name)
        chunks = getattr(value, "chunks", None)
        if info is None or _library(value) != "dask" or chunks is None:
            continue
        for dim, along in zip(info.shape, chunks):
            if isinstance(dim, str) and dim.isidentifier() and len(along) > 1:
                out.add(dim)
    return tuple(sorted(out))


def _router(derivation, numpy_ns: dict):
    """What a live NumPy module calls (from its slow path) with arguments it does not take as
    they are: arrays of another library go to the array-API module; anything else back."""

    def route(name: str, lead: tuple, kwargs: dict):
        values = (*lead, *kwargs.values())
        libraries = {_library(v) for v in values} - {None, "numpy"}
        if not libraries:
            return numpy_ns["_GW_NUMPY"]  # np.matrix, NumPy scalars, ...
        large = chunked_dims(derivation, kwargs) if "dask" in libraries else ()
        ns = _array_api_namespace(derivation, large)
        if name.startswith(NUMPY_ONLY_PREFIXES):
            return _dense(ns, name, lead, kwargs)
        return ns[name](*lead, **kwargs)

    return route


def _dense(ns: dict, name: str, args: tuple, kwargs: dict):
    """The dense Jacobian or Hessian over column-major vec, one JVP or HVP per column, in the
    arguments' library (the NumPy module fills an array in place, which JAX cannot)."""
    import array_api_compat

    kind, var = name.split("_", 1)
    product = ns[("jvp_" if kind == "jacobian" else "hvp_") + var]
    if args or var not in kwargs:
        return product(*args, **kwargs)  # its own error about the arguments
    x = kwargs[var]
    shape = tuple(int(s) for s in getattr(x, "shape", np.shape(x)))
    dtype = str(getattr(x, "dtype", "float64")).rsplit(".", 1)[-1]
    if dtype not in ("float32", "float64"):
        dtype = "float64"
    n_in = int(np.prod(shape))
    columns = []
    for k in range(n_in):
        e = np.zeros(n_in, dtype=dtype)
        e[k] = 1.0
        col = product(e.reshape(shape, order="F"), **kwargs)
        xp = array_api_compat.array_namespace(col)
        if col.ndim > 1:
            col = xp.permute_dims(col, tuple(range(col.ndim))[::-1])
        columns.append(xp.reshape(col, (-1,)))
    return xp.stack(columns, axis=1)


def dispatching(derivation, name: str, ns: dict):
    """The generated function `name`, taking arrays of any supported library.

    It is the NumPy module's own function: NumPy arrays, numbers and lists take its fast path
    (one tuple comparison); on a miss its slow path asks the router set here, which sends
    PyTorch, JAX, CuPy and Dask arrays to the array-API module, written once per set of large
    dims. Arrays passed by position are refused there, in words.
    """
    fn = ns[name]
    if ns["_GW_ROUTER"][0] is None:
        ns["_GW_ROUTER"][0] = _router(derivation, ns)
    if "__signature__" not in fn.__dict__:
        # help() and the notebook show the parameters as written, not the marker defaults
        params = [
            p.replace(default=inspect.Parameter.empty) if p.default is ns["_GW_UNSET"] else p
            for p in inspect.signature(fn).parameters.values()
            if p.kind is not p.VAR_POSITIONAL
        ]
        fn.__signature__ = inspect.Signature(params)
    return fn
