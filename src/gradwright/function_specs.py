"""The functions of a generated module, as `FunctionSpec`s: one builder for real and complex
derivations.

A derivation tells the builder what differs through a few hooks (`Derivation` has the real
ones, `ComplexDerivation` overrides them): `_code_value()` the value to compute,
`_code_has_gradients` whether gradients exist, `_code_vjp(v)` the cotangent map before lowering,
`_code_dense` whether dense Jacobians and Hessians are generated, and `_code_doc(kind, v)` the
docstring of each function.
"""

from __future__ import annotations

from . import expr as E
from .errors import NotSupportedError
from .printing import numpy_code as C

#: Hessian-vector products are generated only for gradients up to this size (written out)
MAX_HESSIAN_GRADIENT = 2_000


#: functions a module may be generated for alone (they call no other generated function)
ALONE = ("value", "value_and_gradient", "gradient_")


def build_specs(d, sizes: dict | None = None, only: str | None = None) -> tuple:
    """(code generator, [FunctionSpec]) for a derivation `d`, in the order of the module;
    with `only` (a name of ALONE's kinds) the spec of that one function.

    >>> from gradwright import derive
    >>> gen, specs = build_specs(derive("x: (n,)\\nf = sum(x**2)", wrt="x"))
    >>> [s.name for s in specs][:3]
    ['value', 'gradient_x', 'value_and_gradient']
    """
    tgt_shape = d.expr.shape
    cost = d._cost(sizes)
    gen = C.CodeGen(d.block.declarations, d.arguments(), cost, use_cholesky=True)
    gen.complex_directions = getattr(d, "is_complex", False)
    wanted = (lambda name: True) if only is None else (lambda name: name == only)
    specs = []
    value = None
    if only in (None, "value", "value_and_gradient"):
        value = C.lower(d._code_value(), cost)
    if wanted("value"):
        specs.append(
            C.FunctionSpec(
                "value",
                f"The value of {d.target}.",
                [C.Output("_value", value, tgt_shape, "the value")],
                _ret("_value", tgt_shape),
            )
        )
    if d._code_has_gradients:
        specs += _gradient_specs(d, value, cost, wanted)
    if only is None:
        for v in d.variables:
            specs += _variable_specs(d, v, gen, cost)
    return gen, specs


def _gradient_specs(d, value, cost, wanted) -> list:
    tgt_shape = d.expr.shape
    specs = []
    for v in d.variables:
        if not wanted(f"gradient_{v}"):
            continue
        gl = C.lower(d._gradient(v), cost)
        specs.append(
            C.FunctionSpec(
                f"gradient_{v}",
                d._code_doc("gradient", v),
                [C.Output(f"_grad_{v}", gl, d._vars[v].shape, f"the gradient of {v}")],
                f"_grad_{v}",
            )
        )
    if not wanted("value_and_gradient"):
        return specs
    # the value's subexpressions are computed anyway: free for the gradients here
    free = frozenset(E.walk(value))
    both = [C.Output("_value", value, tgt_shape, "the value")]
    for v in d.variables:
        gl = C.lower(d._gradient(v), cost, free)
        both.append(C.Output(f"_grad_{v}", gl, d._vars[v].shape, f"the gradient of {v}"))
    rets = ", ".join(f"_grad_{v}" for v in d.variables)
    if len(d.variables) > 1:
        rets = f"({rets})"
    specs.append(
        C.FunctionSpec(
            "value_and_gradient",
            d._code_doc("value_and_gradient", None),
            both,
            f"{_ret('_value', tgt_shape)}, {rets}",
        )
    )
    return specs


def _variable_specs(d, v: str, gen, cost) -> list:
    """jvp, vjp, and where they exist the dense Jacobian, hvp and dense Hessian in `v`."""
    tgt_shape = d.expr.shape
    sym = d._vars[v]
    lin = C.lower(d._differential((v,)), cost)
    vjp = C.lower(d._code_vjp(v), cost)
    specs = [
        C.FunctionSpec(
            f"jvp_{v}",
            d._code_doc("jvp", v),
            [C.Output("_jvp", lin, tgt_shape, "the directional derivative")],
            _ret("_jvp", tgt_shape),
            direction=("_direction", v, sym.shape),
        ),
        C.FunctionSpec(
            f"vjp_{v}",
            d._code_doc("vjp", v),
            [C.Output("_vjp", vjp, sym.shape, "the vector-Jacobian product")],
            "_vjp",
            direction=("_cotangent", "_cotangent", tgt_shape),
        ),
    ]
    n_in = _size_code(sym.shape)
    call_args = ", ".join(f"{a}={a}" for a in gen.required)
    reshape_in = _reshape_code(sym.shape)
    if d._code_dense:
        specs.append(
            C.FunctionSpec(
                f"jacobian_{v}",
                f"The dense Jacobian d vec({d.target}) / d vec({v})^T (column-major vec); "
                "for small sizes.",
                [],
                "_jac",
                loop=(
                    f"    _n_in, _n_out = {n_in}, {_size_code(tgt_shape)}\n"
                    "    _jac = np.empty((_n_out, _n_in), dtype=_dims.dtype)\n"
                    "    for _k in range(_n_in):\n"
                    "        _e = np.zeros(_n_in, dtype=_dims.dtype)\n"
                    "        _e[_k] = 1.0\n"
                    f'        _col = _gw_functions["jvp_{v}"]({reshape_in}, {call_args})\n'
                    '        _jac[:, _k] = np.reshape(_col, -1, order="F")'
                ),
            )
        )
    if not d._code_has_gradients:
        return specs
    if E.expanded_size(d._gradient(v), MAX_HESSIAN_GRADIENT) > MAX_HESSIAN_GRADIENT:
        return specs  # second derivatives of so large a gradient: not generated
    try:
        hv = C.lower(d._hvp_expr(v), cost)
    except NotSupportedError:
        return specs
    specs.append(
        C.FunctionSpec(
            f"hvp_{v}",
            d._code_doc("hvp", v),
            [C.Output("_hvp", hv, sym.shape, "the Hessian-vector product")],
            "_hvp",
            direction=("_direction", v, sym.shape),
        )
    )
    if d._code_dense:
        specs.append(
            C.FunctionSpec(
                f"hessian_{v}",
                f"The dense Hessian of {d.target} over column-major vec({v}).",
                [],
                "_hess",
                loop=(
                    f"    _n_in = {n_in}\n"
                    "    _hess = np.empty((_n_in, _n_in), dtype=_dims.dtype)\n"
                    "    for _k in range(_n_in):\n"
                    "        _e = np.zeros(_n_in, dtype=_dims.dtype)\n"
                    "        _e[_k] = 1.0\n"
                    f'        _col = _gw_functions["hvp_{v}"]({reshape_in}, {call_args})\n'
                    '        _hess[:, _k] = np.reshape(_col, -1, order="F")'
                ),
            )
        )
    return specs


def _ret(name: str, shape) -> str:
    if not E.is_scalar_shape(shape):
        return name
    # a NumPy scalar as it is (the common case, and no call); a 0-d array or number made one
    return f"({name} if isinstance({name}, np.generic) else np.asarray({name})[()])"


def _size_code(shape) -> str:
    dims = [d for d in shape if d is not None]
    if not dims:
        return "1"
    parts = []
    for d in dims:
        parts.extend(f'_dims["{n}"]' for n in d.names)
        if d.coef != 1 or not d.names:
            parts.append(str(d.coef))
    return " * ".join(parts)


def _reshape_code(shape) -> str:
    r, c = shape
    if r is None and c is None:
        return "_e[0]"
    if r is None or c is None:
        return "_e"
    return f'_e.reshape(({_size_code((r, None))}, {_size_code((c, None))}), order="F")'
