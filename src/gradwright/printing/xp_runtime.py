"""Runtime of array-API generated code: a namespace object, made per call from the arguments,
that answers the NumPy names the printer writes with the arguments' own library.

The text of this file and of its pieces (`xp_runtime_*.py`, joined in the order of
`array_api_code.RUNTIME_PIECES`) is copied into every array-API module gradwright writes (so that
such a module can be vendored without gradwright): it imports nothing from gradwright, needs only
`array-api-compat` and the array library itself, and keeps its names `_gw`-prefixed. The pieces
import from one another only to be read and linted alone; those imports vanish in the join.
"""

import array_api_compat as _gw_compat

# a module exported for one library names it here ("torch", "jax", ...); None dispatches on the
# arguments
_GW_BACKEND = None

# set only while the finite-difference check evaluates the value function at a complex step
_GW_COMPLEX_STEP = []

#: entrywise and reducing functions of the standard that the generated code calls by name
_GW_STANDARD = frozenset(
    "exp log sqrt sin cos tanh sinh cosh abs sign real imag conj isfinite log1p expm1 square "
    "maximum minimum where mean min prod sum max matmul broadcast_to".split()
)


class _GwDims(dict):
    """Dim sizes bound by the arguments; a size no argument fixes is a clear error."""

    def __missing__(self, key):
        raise ValueError(
            f"the size of dim {key} is not known from the arrays passed (none of them has "
            f"{key} as a dim of its own)"
        )


def _gw_library(value):
    """The library an array belongs to ("numpy", "torch", ...); None for numbers and lists."""
    c = _gw_compat
    if c.is_numpy_array(value):
        return "numpy"
    if c.is_torch_array(value):
        return "torch"
    if c.is_jax_array(value):
        return "jax"
    if c.is_cupy_array(value):
        return "cupy"
    if c.is_dask_array(value):
        return "dask"
    if c.is_array_api_obj(value):
        return "array_api"
    return None


def _gw_namespace_for(library, lead):
    """(standard namespace, the library's own module or None) for arrays of `library`."""
    if library == "numpy":
        import numpy

        return _gw_compat.array_namespace(numpy.empty(0)), numpy
    if library == "torch":
        import torch

        return _gw_compat.array_namespace(torch.empty(0)), torch
    if library == "jax":
        import jax.numpy as jnp

        return jnp, jnp
    if library == "cupy":
        import cupy

        return _gw_compat.array_namespace(cupy.empty(0)), cupy
    if library == "dask":
        import dask.array as da

        return _gw_compat.array_namespace(da.empty(0)), da
    return _gw_compat.array_namespace(lead), None


def _gw_numpy_of(value, name):
    """A number, list or NumPy array read by NumPy (the one library every input may come in)."""
    import numpy

    if isinstance(value, (str, bytes)) or value is None:
        raise TypeError(f"{name} must be a numeric array, got {type(value).__name__}")
    try:
        a = numpy.asarray(value)
    except Exception as err:
        raise TypeError(f"{name} must be a numeric array; NumPy cannot read it ({err})") from None
    if a.dtype.kind not in "biufc":
        raise TypeError(f"{name} must be a numeric array, got dtype {a.dtype}")
    return a


def _gw_kind(xp, a):
    """'c' complex, 'f' real floating, 'i' integer or boolean."""
    if xp.isdtype(a.dtype, "complex floating"):
        return "c"
    if xp.isdtype(a.dtype, "real floating"):
        return "f"
    return "i"


def _gw_who(label):
    return label[:-2] if label.endswith(".T") and label[:-2].isidentifier() else label
