"""The functions `%%derive` puts into the user's namespace, with readable signatures.

Also the packer that turns several matrix variables into the one flat vector an optimizer wants,
and the `(value, flat gradient)` objective for `scipy.optimize.minimize(..., jac=True)`.
"""

from __future__ import annotations

import inspect
from dataclasses import dataclass, field

import numpy as np

__all__ = ["Injected", "Packer", "injections"]

_KW = inspect.Parameter.KEYWORD_ONLY
_POS = inspect.Parameter.POSITIONAL_OR_KEYWORD


@dataclass
class Injected:
    """One name to inject: the object and the line that describes it to the user."""

    name: str
    value: object
    describes: str


def _named(fn, name: str, positional, keywords, doc: str):
    def wrapper(*args, **kwargs):
        if len(args) > len(positional):  # name the function the user called, and the fix
            shown = ", ".join([*positional, *(f"{k}=..." for k in keywords)])
            raise TypeError(
                f"{name}() got {len(args)} arrays by position: pass arrays by "
                f"keyword: {name}({shown})"
            )
        return fn(*args, **kwargs)

    wrapper.__name__ = wrapper.__qualname__ = name
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


def _prod(values) -> int:
    out = 1
    for v in values:
        out *= int(v)
    return out


@dataclass
class Packer:
    """Flattens the variables (in wrt order, each in NumPy's C order) into one vector and back.

    Shapes come from the last `pack` call, or from the dims of constants passed to `unpack`;
    with one dim still unknown it is solved from the vector's length.
    """

    variables: tuple
    symbolic: dict  # variable -> declared shape (dims as str or int)
    constant_shapes: dict  # every other input -> declared shape
    shapes: dict = field(default_factory=dict)  # variable -> concrete shape, from `pack`

    @classmethod
    def for_derivation(cls, derivation) -> Packer:
        symbolic = {v: tuple(derivation.symbols[v].shape) for v in derivation.variables}
        others = {
            name: tuple(info.shape)
            for name, info in derivation.symbols.items()
            if name not in symbolic and info.role == "constant"
        }
        return cls(tuple(derivation.variables), symbolic, others)

    def pack(self, *values, **arrays) -> np.ndarray:
        """`pack(U=U0, V=V0)` (or positionally in wrt order) -> 1-D float array."""
        if values and arrays:
            raise TypeError("pass the variables either by name or in order, not both")
        if values:
            if len(values) == 1 and len(self.variables) > 1 and isinstance(values[0], tuple):
                values = values[0]
            if len(values) != len(self.variables):
                raise TypeError(
                    f"expected {len(self.variables)} arrays: {', '.join(self.variables)}"
                )
            arrays = dict(zip(self.variables, values))
        missing = [v for v in self.variables if v not in arrays]
        if missing:
            raise TypeError(
                f"pack needs {', '.join(missing)} (the variables: {', '.join(self.variables)})"
            )
        parts = []
        for var in self.variables:
            value = np.asarray(arrays[var], dtype=float)
            if value.ndim != len(self.symbolic[var]):
                raise ValueError(
                    f"{var} has {value.ndim} axes; the block declares "
                    f"{_shape_words(self.symbolic[var])}"
                )
            self.shapes[var] = value.shape
            parts.append(value.ravel())
        return np.concatenate(parts) if parts else np.zeros(0)

    def _concrete(self, length: int, constants: dict) -> dict:
        bound: dict = {}
        for name, shape in self.constant_shapes.items():
            if name in constants:
                for dim, size in zip(shape, np.shape(constants[name])):
                    bound.setdefault(str(dim), int(size))
        for var, shape in self.shapes.items():
            for dim, size in zip(self.symbolic[var], shape):
                bound.setdefault(str(dim), int(size))

        def resolve(extra):
            known = {**bound, **extra}
            out = {}
            for var, shape in self.symbolic.items():
                dims = []
                for dim in shape:
                    if isinstance(dim, int) or str(dim).isdigit():
                        dims.append(int(dim))
                    elif str(dim) in known:
                        dims.append(known[str(dim)])
                    else:
                        return None
                out[var] = tuple(dims)
            return out

        shapes = resolve({})
        if shapes is None:
            unknown = sorted(
                {
                    str(d)
                    for s in self.symbolic.values()
                    for d in s
                    if not (isinstance(d, int) or str(d).isdigit()) and str(d) not in bound
                }
            )
            if len(unknown) == 1:
                for guess in range(1, length + 1):
                    trial = resolve({unknown[0]: guess})
                    total = sum(_prod(s) for s in trial.values())
                    if total == length:
                        shapes = trial
                        break
                    if total > length:
                        break
            if shapes is None:
                raise ValueError(
                    f"cannot tell the sizes of {', '.join(unknown)}: call pack(...) once with "
                    "arrays of the right shapes, or pass the constants that carry these dims"
                )
        total = sum(_prod(s) for s in shapes.values())
        if total != length:
            raise ValueError(f"the vector has {length} entries; the variables need {total}")
        return shapes

    def unpack(self, flat, *, as_dict: bool = False, **constants):
        """1-D vector -> the variable's array, or a tuple of arrays in wrt order."""
        flat = np.asarray(flat)
        shapes = self._concrete(flat.size, constants)
        out, start = {}, 0
        for var in self.variables:
            size = _prod(shapes[var])
            piece = flat[start : start + size].reshape(shapes[var])
            out[var] = piece if piece.ndim else piece[()]
            start += size
        if as_dict:
            return out
        return out[self.variables[0]] if len(self.variables) == 1 else tuple(out.values())

    def objective(self, value_and_gradient):
        """`objective(flat, **constants) -> (value, flat gradient)` for `minimize(jac=True)`."""
        variables = self.variables

        def objective(flat, **constants):
            arrays = dict(constants)
            arrays.update(self.unpack(flat, as_dict=True, **constants))
            value, grads = value_and_gradient(**arrays)
            if len(variables) == 1:
                grads = (grads,)
            flat_grad = np.concatenate([np.asarray(g, dtype=float).ravel() for g in grads])
            return float(value), flat_grad

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
        objective = packer.objective(d.value_and_gradient_function())
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
