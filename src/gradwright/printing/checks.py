"""Argument checks of generated functions: a full check with clear messages, and a fast path.

Every generated function first compares a key of its arguments (types, shapes and dtypes)
with the key of the last call that passed the full check; on a match it reuses the dims that
call bound, at the cost of one tuple comparison. Only calls whose arrays needed no conversion
are remembered (exact `np.ndarray` of a real floating dtype, Python numbers for scalars), so a
complex, integer, list or otherwise unusual argument always takes the full check and gets its
message or conversion there. Example of the generated text:

    try:
        _hit = _gw_last_value[0]
        if (type(X), X.shape, X.dtype, type(w), w.shape, w.dtype) != _hit[0]:
            raise LookupError
        _dims = _hit[1]
    except (AttributeError, LookupError):
        _dims = None
    if _dims is None:
        if _gw_pos or _gw_foreign(X, w):
            _gw_out = _gw_route('value', _gw_pos, (), dict(X=X, w=w))
            if _gw_out is not _GW_NUMPY:
                return _gw_out
        (X, w), _dims = _gw_check((...), _gw_last_value)

The function itself is what the user calls: no wrapper. Its keyword arguments default to a
marker, so that a missing or positional argument, like an array of another library, falls to
the slow path and is named (or routed) there, at no cost to the fast path.
"""

from __future__ import annotations


def _bind_products_text() -> str:
    """The text of the dim-binding functions (printing/xp_runtime_dims.py), which the
    array-API runtime joins too: one source for both checks."""
    import ast
    from pathlib import Path

    text = Path(__file__).with_name("xp_runtime_dims.py").read_text(encoding="utf-8")
    functions = [s for s in ast.parse(text).body if isinstance(s, ast.FunctionDef)]
    return "".join("\n\n" + ast.get_source_segment(text, fn) + "\n" for fn in functions)


CHECK_HELPER = '''
class _GwDims(dict):
    """Dim sizes bound by the arguments; a size no argument fixes is a clear error."""

    dtype = np.dtype(float)  # the floating dtype of the arrays passed (float32 stays float32)

    def __missing__(self, key):
        raise ValueError(
            f"the size of dim {key} is not known from the arrays passed (none of them has "
            f"{key} as a dim of its own)"
        )


# set only while the finite-difference check evaluates the value function at a complex step
_GW_COMPLEX_STEP = []


class _GwRequired:
    """The default of a required argument: its absence is named in the slow path."""

    def __repr__(self):
        return "<required>"


_GW_UNSET = _GwRequired()
_GW_NUMPY = _GwRequired()  # the router's answer: these arguments are for the NumPy code
# types the NumPy code takes as they are (anything else may be another library's array)
_GW_PLAIN = frozenset(
    {np.ndarray, float, int, bool, complex, list, tuple, np.float64, np.float32, np.int64,
     type(None), _GwRequired}
)
# set by gradwright for a live module: routes other libraries' arrays to array-API code
_GW_ROUTER = [None]


def _gw_foreign(*values):
    return _GW_ROUTER[0] is not None and not _GW_PLAIN.issuperset(map(type, values))


def _gw_route(name, pos, lead, kw):
    """Arguments the NumPy code does not take as they are: arrays passed by position (refused
    with the call to write), or arrays of another library (computed by its array-API code)."""
    if pos:
        shown = ", ".join(["direction"] * len(lead) + [f"{k}=..." for k in kw])
        raise TypeError(
            f"{name}() got {len(pos)} positional argument{'s' * (len(pos) > 1)}: "
            f"pass arrays by keyword: {name}({shown})"
        )
    router = _GW_ROUTER[0]
    if router is None:
        return _GW_NUMPY
    return router(name, lead, {k: v for k, v in kw.items() if v is not _GW_UNSET})


def _gw_check(specs, last=None):
    """Validate the arguments; returns the arrays and the dims they bind. When `last` is
    given and no argument needed a conversion, remember the call's key there (fast path)."""
    missing = [repr(spec[0]) for spec in specs if spec[1] is _GW_UNSET]
    if missing:
        s = "s" * (len(missing) > 1)
        raise TypeError(
            f"missing {len(missing)} required keyword-only argument{s}: "
            + (", ".join(missing[:-1]) + " and " if len(missing) > 1 else "")
            + missing[-1]
        )
    dims, owner, out, products = _GwDims(), {}, [], []
    key, plain, kinds = [], last is not None, []
    for name, value, spec, *field in specs:  # field: "complex" for a complex-declared input
        if spec:
            key += (type(value), getattr(value, "shape", None), getattr(value, "dtype", None))
        else:
            key.append(type(value))
        if isinstance(value, (str, bytes)) or value is None:
            raise TypeError(f"{name} must be a numeric array, got {type(value).__name__}")
        try:
            a = np.asarray(value)
        except Exception as err:
            raise TypeError(
                f"{name} must be a numeric array; NumPy cannot read it ({err})"
            ) from None
        if a.dtype.kind not in "biufc":
            got = f"dtype {a.dtype}" if isinstance(value, np.ndarray) else type(value).__name__
            raise TypeError(f"{name} must be a numeric array, got {got}")
        if a.dtype.kind == "c" and not _GW_COMPLEX_STEP and not field:
            if " " in name:  # a direction or cotangent, not a declared symbol
                raise TypeError(
                    f"{name} is a complex array, but the block is real: pass a real array"
                )
            shown = "(" + ", ".join(map(str, spec)) + ("," if len(spec) == 1 else "") + ")"
            raise TypeError(
                f"{name} is a complex array, but {name} is declared real: the derivative of a "
                f"real formula is wrong for complex input. Declare it `{name}: {shown} complex` "
                f"or pass a real array (for example {name}.real)"
            )
        if a.dtype.kind in "biu":
            a = a.astype(float)
        elif a.dtype.kind == "f" and a.dtype.itemsize < 4:
            a = a.astype(np.float32)  # LAPACK has no half precision
        if a.ndim != len(spec):
            want = ("a scalar", "a vector", "a matrix")[len(spec)]
            shown = "(" + ", ".join(map(str, spec)) + ("," if len(spec) == 1 else "") + ")"
            axes = "1 axis" if a.ndim == 1 else f"{a.ndim} axes"
            raise ValueError(f"{name} should be {want} {shown} but has {axes}, shape {a.shape}")
        for axis, (d, n) in enumerate(zip(spec, a.shape)):
            word = ("rows", "columns")[axis] if len(spec) == 2 else "entries"
            _gw_bind_axis(name, word, d, n, dims, owner, products)
        if spec:
            kinds.append(a.dtype)
            plain = plain and type(value) is np.ndarray and a is value and a.dtype.kind == "f"
        else:
            # a Python number is weak in NumPy's promotion: float32 arrays stay float32
            plain = plain and type(value) in (float, int)
            a = a.item()
        out.append(a)
    _gw_bind_products(products, dims, owner)
    dims.dtype = np.result_type(*kinds, np.float32) if kinds else np.result_type(*out, 0.0)
    if plain:
        last[0] = (tuple(key), dims)
    return out, dims
''' + _bind_products_text()


def _key_text(names_and_specs) -> str:
    parts = []
    for var, spec in names_and_specs:
        if spec == "()":
            parts.append(f"type({var})")
        else:
            parts.append(f"type({var}), {var}.shape, {var}.dtype")
    return "(" + ", ".join(parts) + ("," if len(parts) == 1 and "," not in parts[0] else "") + ")"


def check_code(
    fname: str, entries: list, keywords: tuple = (), lead: str | None = None
) -> tuple[list[str], list[str]]:
    """(module-level lines, function-body lines) checking the arguments of `fname`.

    `entries` lists (label, variable, spec text[, "complex"]) in argument order; spec text as
    written into the generated call, e.g. "('n', 'p')" or "()"; the marker lets a complex array
    through for a complex-declared symbol (and the directions of a complex block).
    """
    if not entries:
        return [], ["    _dims = _gw_check(())[1]"]
    cache = f"_gw_last_{fname}"
    targets = ", ".join(e[1] for e in entries) + ("," if len(entries) == 1 else "")
    key = _key_text([(e[1], e[2]) for e in entries])
    values = [lead] * bool(lead) + list(keywords)
    kw = ", ".join(f"{k}={k}" for k in keywords)
    # the full check runs after the cache's try statement, not inside its except clause: an
    # error it raises about an argument is not shown as raised "during handling" of the miss
    body = [
        "    try:",
        f"        _hit = {cache}[0]",
        f"        if {key} != _hit[0]:",
        "            raise LookupError",
        "        _dims = _hit[1]",
        "    except (AttributeError, LookupError):",
        "        _dims = None",
        "    if _dims is None:",
        f"        if _gw_pos or _gw_foreign({', '.join(values)}):",
        f"            _gw_out = _gw_route({fname!r}, _gw_pos, ({lead + ',' if lead else ''}), "
        f"dict({kw}))",
        "            if _gw_out is not _GW_NUMPY:",
        "                return _gw_out",
        f"        ({targets}), _dims = _gw_check(",
        "            (",
        *[f"                ({e[0]!r}, {e[1]}, {e[2]}{_marker(e)})," for e in entries],
        "            ),",
        f"            {cache},",
        "        )",
    ]
    return [f"{cache} = [(None, None)]"], body


def _marker(entry) -> str:
    return f", {entry[3]!r}" if len(entry) > 3 else ""


def finite_lines(name: str, shape, what: str) -> list[str]:
    """Warn when an output is not finite. A sum of squares is not finite exactly when some
    entry is not (or, harmlessly, when it overflows: then the helper counts and finds none),
    and costs one BLAS call instead of an isfinite pass and a count."""
    if all(d is None for d in shape):  # a number: the test costs next to nothing
        return [f"    if not cmath.isfinite({name}):", f"        _gw_finite({name}, {what!r})"]
    # an array: one BLAS call, which shows at small sizes, so only when asked for
    return [
        f"    if _GW_WARN_NONFINITE and not cmath.isfinite(np.vdot({name}, {name})):",
        f"        _gw_finite({name}, {what!r})",
    ]
