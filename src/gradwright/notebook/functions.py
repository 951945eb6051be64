"""The functions `%%derive` puts into the user's namespace, with readable signatures.

Also the packer that turns several matrix variables into the one flat vector an optimizer wants,
and the `(value, flat gradient)` objective for `scipy.optimize.minimize(..., jac=True)`.
"""

from __future__ import annotations

import inspect
from dataclasses import dataclass

import numpy as np

from ..errors import frame_named

__all__ = ["Injected", "Packer", "injections"]

_KW = inspect.Parameter.KEYWORD_ONLY
_POS = inspect.Parameter.POSITIONAL_OR_KEYWORD


@dataclass
class Injected:
    """One name to inject: the object and the line that describes it to the user."""

    name: str
    value: object
    describes: str


#: the generated code's argument checks: an error raised there is about what the user passed
_INPUT_CHECKS = frozenset({"_gw_check", "__missing__", "refuse"})


def _is_input_error(err: BaseException) -> bool:
    tb = err.__traceback__
    while tb is not None:
        code = tb.tb_frame.f_code
        if code.co_name in _INPUT_CHECKS and (
            code.co_filename.startswith("<gradwright") or code.co_name == "refuse"
        ):
            return True
        tb = tb.tb_next
    return False


def _named(fn, name: str, positional, keywords, doc: str):
    def wrapper(*args, **kwargs):
        if len(args) > len(positional):  # name the function the user called, and the fix
            shown = ", ".join([*positional, *(f"{k}=..." for k in keywords)])
            raise TypeError(
                f"{name}() got {len(args)} positional arguments: pass arrays by "
                f"keyword: {name}({shown})"
            )
        try:
            return fn(*args, **kwargs)
        except (TypeError, ValueError) as err:
            if not _is_input_error(err):
                raise
            # A wrong shape or type is the caller's to fix: the message and the caller's line,
            # not five frames of dispatch and generated checks and a chained LookupError.
            raise err.with_traceback(None) from None

    wrapper.__name__ = wrapper.__qualname__ = name
    frame_named(wrapper, name)  # a traceback says grad_loss, not _named.<locals>.wrapper
    wrapper.__doc__ = doc
    wrapper.__module__ = "__main__"
    wrapper.__signature__ = inspect.Signature(
        [inspect.Parameter(p, _POS) for p in positional]
        + [inspect.Parameter(k, _KW) for k in keywords]
    )
    wrapper.__wrapped_gradwright__ = fn
    return wrapper


def signature_text(fn) -> str:
    return f"{fn.__name__}{inspect.signature(fn)}"


def _shape_words(shape) -> str:
    shape = tuple(shape)
    if not shape:
        return "scalar"
    return "(" + ", ".join(str(d) for d in shape) + (",)" if len(shape) == 1 else ")")


class Packer:
    """The magic's `pack`/`unpack`/`objective`: thin wrappers over the core `Objective`.

    The layout is the core's (`gradwright.fitting.Layout`): variables in wrt order, each
    column-major (free entries only for structured matrices). `unpack` returns the variable,
    or a tuple in wrt order; the objective takes the constants by keyword.
    """

    def __init__(self, derivation):
        from ..fitting import Layout

        self.derivation = derivation
        self.layout = Layout(derivation)
        self.variables = self.layout.variables

    @classmethod
    def for_derivation(cls, derivation) -> Packer:
        return cls(derivation)

    def pack(self, *values, **arrays) -> np.ndarray:
        """`pack(U=U0, V=V0)` (or positionally in wrt order) -> 1-D float array."""
        return self.layout.pack(*values, **arrays)

    def unpack(self, flat, *, as_dict: bool = False, **constants):
        """1-D vector -> the variable's array, or a tuple of arrays in wrt order."""
        self.layout.bind(constants)
        out = self.layout.unpack(flat)
        if as_dict:
            return out
        return out[self.variables[0]] if len(self.variables) == 1 else tuple(out.values())

    def objective(self, value_and_gradient=None):
        """`objective(flat, **constants) -> (value, flat gradient)` for `minimize(jac=True)`."""
        from ..fitting import Objective, _with

        core = Objective(self.derivation)
        core.layout = self.layout  # shapes learnt by pack() serve the objective too

        def objective(flat, **constants):
            return _with(core, constants)(flat)

        return objective


def injections(derivation, name: str) -> list[Injected]:
    """Everything `%%derive` injects for `derivation` under the base name `name`, in print order."""
    d = derivation
    args = list(d.arguments())
    variables = list(d.variables)
    several = len(variables) > 1
    target = d.target
    out: list[Injected] = []

    def add(fn_name, fn, positional, describes_tail, doc):
        wrapped = _named(fn, fn_name, positional, args, doc)
        out.append(Injected(fn_name, wrapped, f"{signature_text(wrapped)}  {describes_tail}"))

    shape_f = _shape_words(d.target_shape)
    add(name, d.function(), [], f"-> {target}, {shape_f}", f"Value of {target}.")
    if d.is_scalar:
        if several:
            shapes = ", ".join(f"{v} {_shape_words(d.symbols[v].shape)}" for v in variables)
            tail = f"-> tuple of gradients ({shapes})"
        else:
            tail = f"-> gradient wrt {variables[0]}, {_shape_words(d.symbols[variables[0]].shape)}"
        add(
            f"grad_{name}",
            d.gradient_function(*variables),
            [],
            tail,
            f"Gradient of {target} with respect to {', '.join(variables)}"
            + (" (a tuple in that order)." if several else "."),
        )
    else:
        jvps = {v: d.jvp_function(v) for v in variables}
        vjps = {v: d.vjp_function(v) for v in variables}
        directions = [f"d{v}" for v in variables]

        def jvp(*dirs, **arrays):
            if len(dirs) != len(variables):
                missing = directions[len(dirs) :]
                dirs = list(dirs) + [arrays.pop(k) for k in missing]
            total = None
            for v, dv in zip(variables, dirs):
                part = jvps[v](dv, **arrays)
                total = part if total is None else total + part
            return total

        def vjp(G, **arrays):
            parts = tuple(vjps[v](G, **arrays) for v in variables)
            return parts if several else parts[0]

        add(
            f"jvp_{name}",
            jvp,
            directions,
            f"-> d{target}, {shape_f} (Jacobian times the directions)",
            f"Jacobian-vector product of {target}: the change of {target} along "
            f"{', '.join(directions)}.",
        )
        add(
            f"vjp_{name}",
            vjp,
            ["G"],
            "-> "
            + (
                f"tuple shaped like ({', '.join(variables)})"
                if several
                else f"shaped like {variables[0]}"
            )
            + f"  (G shaped like {target})",
            f"Vector-Jacobian product of {target}: the adjoint map applied to G.",
        )
        dense = {v: d.jacobian_function(v) for v in variables}

        def jacobian(**arrays):
            parts = tuple(dense[v](**arrays) for v in variables)
            return parts if several else parts[0]

        add(
            f"jacobian_{name}",
            jacobian,
            [],
            "-> dense Jacobian over column-major vec (small sizes only)",
            f"Dense Jacobian d vec({target}) / d vec(X)^T for each variable X.",
        )
    packer = Packer.for_derivation(d)
    pack = _named(packer.pack, f"{name}_pack", [], variables, "Variables -> one flat vector.")
    pack.__signature__ = inspect.Signature([inspect.Parameter(v, _KW) for v in variables])
    out.append(
        Injected(f"{name}_pack", pack, f"{signature_text(pack)}  -> flat vector for an optimizer")
    )
    unpack = packer.unpack
    out.append(
        Injected(
            f"{name}_unpack",
            unpack,
            f"{name}_unpack(flat)  -> "
            + (f"({', '.join(variables)})" if several else variables[0]),
        )
    )
    if d.is_scalar:
        objective = packer.objective()
        constants = [a for a in args if a not in variables]
        objective = _named(
            objective,
            f"{name}_objective",
            ["flat"],
            constants,
            f"(value, flat gradient) of {target} for scipy.optimize.minimize(..., jac=True).",
        )
        out.append(
            Injected(
                f"{name}_objective",
                objective,
                f"{signature_text(objective)}  -> (value, flat gradient) for "
                "minimize(..., jac=True)",
            )
        )
    out.append(
        Injected(
            f"{name}_derivation",
            d,
            f"{name}_derivation  the Derivation (.latex(), .source(), .to_notebook(path))",
        )
    )
    return out
