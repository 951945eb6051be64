"""The runtime's argument check `_gw_check`: one library for all arrays, dtypes, shapes and
the dims they bind; a piece of the runtime (see xp_runtime.py), joined last at export time."""

import math

import array_api_compat as _gw_compat

from .xp_runtime import (
    _GW_BACKEND,
    _GW_COMPLEX_STEP,
    _gw_kind,
    _gw_library,
    _gw_namespace_for,
    _gw_numpy_of,
    _GwDims,
)
from .xp_runtime_dims import _gw_bind_axis, _gw_bind_products
from .xp_runtime_namespace import _GwXp


def _gw_check(specs):
    """Validate the arguments; returns the arrays (all of one library), the dims they bind and
    the namespace object the function computes with."""
    library, lead, lead_name = "numpy", None, None
    for name, value, _spec in specs:
        k = _gw_library(value)
        if k in (None, "numpy"):
            continue
        if lead is None:
            library, lead, lead_name = k, value, name
        elif k != library:
            raise TypeError(
                f"{name} is a {k} array but {lead_name} is a {library} array: pass arrays of one "
                "library (NumPy arrays and Python numbers may join arrays of any library)"
            )
    if _GW_BACKEND is not None and _GW_BACKEND != "array_api" and library != _GW_BACKEND:
        if lead is not None:
            raise TypeError(
                f"{lead_name} is a {library} array, but this module was written for "
                f"{_GW_BACKEND} arrays"
            )
        library = _GW_BACKEND
    ns, native = _gw_namespace_for(library, lead)
    device = _gw_compat.device(lead) if lead is not None else None
    where = {} if library == "dask" or device is None else {"device": device}
    # arrays of the library as they come; NumPy arrays moved to it; numbers (Python numbers and
    # 0-d NumPy values) adopt the common floating dtype of the arrays, so float32 stays float32
    arrays, floats = [], []
    for name, value, _spec in specs:
        k = _gw_library(value)
        if k == library:
            a = value
        else:
            a = _gw_numpy_of(value, name)
            if a.ndim == 0 or k is None and a.dtype.kind in "biu":
                arrays.append(a)
                continue
            a = ns.asarray(a, **where)
        if _gw_kind(ns, a) != "i":
            floats.append(a.dtype)
        arrays.append(a)
    dtype = ns.result_type(*floats) if floats else ns.float64
    xp = _GwXp(library, ns, native, dtype, device)
    dims, owner, out, products = _GwDims(), {}, [], []
    dims.dtype = dtype  # the dtype of constants the code builds (eye, ones, zeros)
    for a, (name, _v, spec) in zip(arrays, specs):
        if _gw_library(a) != library:  # a number or a list of integers
            a = ns.asarray(a, dtype=dtype if a.dtype.kind != "c" else None, **where)
        kind = _gw_kind(ns, a)
        if kind == "c" and not _GW_COMPLEX_STEP:
            if " " in name:  # a direction or cotangent, not a declared symbol
                raise TypeError(
                    f"{name} is a complex array, but the block is real: pass a real array"
                )
            raise TypeError(
                f"{name} is a complex array, but {name} is declared real: the derivative of a "
                f"real formula is wrong for complex input; pass a real array"
            )
        if kind == "i":
            a = ns.astype(a, dtype)
        if a.ndim != len(spec):
            want = ("a scalar", "a vector", "a matrix")[len(spec)]
            shown = "(" + ", ".join(map(str, spec)) + ("," if len(spec) == 1 else "") + ")"
            axes = "1 axis" if a.ndim == 1 else f"{a.ndim} axes"
            raise ValueError(
                f"{name} should be {want} {shown} but has {axes}, shape {tuple(a.shape)}"
            )
        for axis, (d, n) in enumerate(zip(spec, a.shape)):
            word = ("rows", "columns")[axis] if len(spec) == 2 else "entries"
            if n is None or (isinstance(n, float) and math.isnan(n)):
                raise ValueError(
                    f"{name} has an unknown number of {word} (a Dask array of unknown chunk "
                    "sizes): call .compute_chunk_sizes() on it, or to_dask_array(lengths=True)"
                )
            n = int(n)
            _gw_bind_axis(name, word, d, n, dims, owner, products)
        out.append(a)
    _gw_bind_products(products, dims, owner)
    return out, dims, xp
