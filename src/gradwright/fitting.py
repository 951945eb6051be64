"""From a derivation to a fitted model: the packed parameter vector, the optimizer objective,
the block Hessian over the packed vector, values of definitions and standard errors.

The packed layout: variables in wrt order, each as its free entries in column-major order
(all entries of a general variable, `vec X`; the lower triangle of a `lower`, `symmetric` or
`spd` matrix, column by column; the diagonal of a `diagonal` matrix).
"""

from __future__ import annotations

import numpy as np

from . import expr as E
from .errors import FormulaError, NotSupportedError

__all__ = ["Layout", "Objective"]


def _prod(values) -> int:
    out = 1
    for v in values:
        out *= int(v)
    return out


def _kind(sym: E.Symbol) -> str:
    words = sym.structure
    if not E.is_matrix_shape(sym.shape):
        return "full"
    if "orthogonal" in words:
        return "orthogonal"
    if "diagonal" in words:
        return "diagonal"
    if "lower" in words:
        return "lower"
    if words & E.SYMMETRIC_WORDS:
        return "symmetric"
    return "full"


def _lower_index(n: int):
    """Row and column indices of the lower triangle, column by column."""
    rows = [i for j in range(n) for i in range(j, n)]
    cols = [j for j in range(n) for i in range(j, n)]
    return np.array(rows, dtype=int), np.array(cols, dtype=int)


class Layout:
    """Where each variable's free entries sit in the packed vector.

    >>> from gradwright import derive
    >>> d = derive("X: (n, p)\\nW: (p, k)\\nb: (k,)\\nf = sum((X @ W + b)**2)", wrt=["W", "b"])
    >>> lay = Layout(d)
    >>> flat = lay.pack(W=[[1.0, 2.0], [3.0, 4.0]], b=[5.0, 6.0])
    >>> flat.tolist()  # W column by column, then b
    [1.0, 3.0, 2.0, 4.0, 5.0, 6.0]
    """

    def __init__(self, derivation):
        self.derivation = derivation
        self.variables = tuple(derivation.variables)
        self.kinds = {v: _kind(derivation._vars[v]) for v in self.variables}
        self.symbolic = {v: tuple(derivation.symbols[v].shape) for v in self.variables}
        self.constant_shapes = {
            name: tuple(info.shape)
            for name, info in derivation.symbols.items()
            if info.role == "constant"
        }
        self.bound: dict = {}  # dim name -> size, from pack() calls and constants seen
        for v, kind in self.kinds.items():
            if kind == "orthogonal":
                raise NotSupportedError(
                    f"not supported yet: packing the orthogonal variable {v} for an optimizer "
                    "(orthogonal matrices are not a vector space; parameterize them yourself)"
                )

    # --- shapes ---------------------------------------------------------------------------------

    def bind(self, arrays: dict) -> None:
        """Learn dim sizes from arrays passed by name (constants or variables)."""
        shapes = dict(self.constant_shapes)
        shapes.update(self.symbolic)
        for name, value in arrays.items():
            if name not in shapes:
                continue
            for dim, size in zip(shapes[name], np.shape(value)):
                if not (isinstance(dim, int) or str(dim).isdigit()):
                    self.bound[str(dim)] = int(size)

    def _resolve(self, extra: dict):
        known = {**self.bound, **extra}
        out = {}
        for var, shape in self.symbolic.items():
            dims = []
            for dim in shape:
                if isinstance(dim, int) or str(dim).isdigit():
                    dims.append(int(dim))
                elif "*" in str(dim):
                    parts = str(dim).split("*")
                    if not all(p.isdigit() or p in known for p in parts):
                        return None
                    dims.append(_prod(int(p) if p.isdigit() else known[p] for p in parts))
                elif str(dim) in known:
                    dims.append(known[str(dim)])
                else:
                    return None
            out[var] = tuple(dims)
        return out

    def shapes(self, length: int | None = None) -> dict:
        """variable -> concrete NumPy shape; one unknown dim is solved from `length`."""
        shapes = self._resolve({})
        if shapes is None:
            unknown = sorted(
                {
                    p
                    for s in self.symbolic.values()
                    for d in s
                    for p in str(d).split("*")
                    if not p.isdigit() and p not in self.bound
                }
            )
            if len(unknown) == 1 and length is not None:
                for guess in range(1, length + 1):
                    trial = self._resolve({unknown[0]: guess})
                    total = sum(self._free_size(v, trial[v]) for v in self.variables)
                    if total == length:
                        shapes = trial
                        break
                    if total > length:
                        break
            if shapes is None:
                raise FormulaError(
                    f"cannot tell the sizes of {', '.join(unknown)}: pack(...) the variables "
                    "once, or pass the constants that carry these dims"
                )
        if length is not None:
            total = sum(self._free_size(v, shapes[v]) for v in self.variables)
            if total != length:
                raise FormulaError(
                    f"the vector has {length} entries; the variables need {total} "
                    f"({self.describe(shapes)})"
                )
        return shapes

    def _free_size(self, var: str, shape: tuple) -> int:
        kind = self.kinds[var]
        if kind in ("lower", "symmetric"):
            return shape[0] * (shape[0] + 1) // 2
        if kind == "diagonal":
            return shape[0]
        return _prod(shape)

    def slices(self, shapes: dict | None = None) -> dict:
        """variable -> slice of the packed vector."""
        shapes = shapes or self.shapes()
        out, start = {}, 0
        for v in self.variables:
            size = self._free_size(v, shapes[v])
            out[v] = slice(start, start + size)
            start += size
        return out

    def describe(self, shapes: dict | None = None) -> str:
        shapes = shapes or self.shapes()
        parts = []
        for v, sl in self.slices(shapes).items():
            what = {
                "full": "column-major",
                "lower": "lower triangle, column by column",
                "symmetric": "lower triangle, column by column",
                "diagonal": "diagonal",
            }[self.kinds[v]]
            parts.append(f"{v} {shapes[v]} -> [{sl.start}:{sl.stop}] ({what})")
        return "; ".join(parts)

    # --- the maps -------------------------------------------------------------------------------

    def _to_free(self, var: str, value: np.ndarray) -> np.ndarray:
        kind = self.kinds[var]
        if kind in ("lower", "symmetric"):
            return value[_lower_index(value.shape[0])]
        if kind == "diagonal":
            return np.diagonal(value).copy()
        return np.ravel(value, order="F")

    def _from_free(self, var: str, piece: np.ndarray, shape: tuple):
        kind = self.kinds[var]
        if kind in ("lower", "symmetric", "diagonal"):
            out = np.zeros(shape, dtype=piece.dtype)
            if kind == "diagonal":
                out[np.diag_indices(shape[0])] = piece
                return out
            rows, cols = _lower_index(shape[0])
            out[rows, cols] = piece
            if kind == "symmetric":
                out[cols, rows] = piece
            return out
        out = piece.reshape(shape, order="F")
        return out[()] if out.ndim == 0 else out

    def _cotangent_to_free(self, var: str, g) -> np.ndarray:
        """The adjoint of `_from_free`: a gradient shaped like the variable -> free entries."""
        g = np.asarray(g, dtype=float)
        kind = self.kinds[var]
        if kind == "symmetric":
            full = g + g.T
            full[np.diag_indices(g.shape[0])] /= 2
            return full[_lower_index(g.shape[0])]
        return self._to_free(var, g.reshape(np.shape(g)))

    def pack(self, *values, **arrays) -> np.ndarray:
        """`pack(W=W0, b=b0)` (or positionally in wrt order) -> the packed 1-D float vector."""
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
        extra = [k for k in arrays if k not in self.variables]
        if missing or extra:
            raise TypeError(
                f"pack takes the variables {', '.join(self.variables)}"
                + (f"; missing {', '.join(missing)}" if missing else "")
                + (f"; not variables: {', '.join(extra)}" if extra else "")
            )
        parts = []
        for v in self.variables:
            value = np.asarray(arrays[v], dtype=float)
            if value.ndim != len(self.symbolic[v]):
                raise ValueError(
                    f"{v} has {value.ndim} axes; the block declares shape {self.symbolic[v]}"
                )
            self.bind({v: value})
            parts.append(self._to_free(v, value))
        return np.concatenate(parts) if parts else np.zeros(0)

    def unpack(self, flat) -> dict:
        """The packed vector -> {variable: array shaped like the variable}."""
        flat = np.asarray(flat)
        if flat.ndim != 1:
            raise ValueError(f"the packed vector must be 1-D, got shape {flat.shape}")
        shapes = self.shapes(flat.size)
        return {v: self._from_free(v, flat[sl], shapes[v]) for v, sl in self.slices(shapes).items()}

    def flat_gradient(self, grads) -> np.ndarray:
        """Gradients shaped like the variables (a tuple in wrt order) -> the packed gradient."""
        return np.concatenate(
            [self._cotangent_to_free(v, g) for v, g in zip(self.variables, grads)]
        )


class Objective:
    """`obj(flat, *args) -> (value, packed gradient)` for `scipy.optimize.minimize(jac=True)`.

    Constants are fixed when the objective is made (`derivation.objective(X=X, y=y)`), or named
    in `args` and then passed positionally after the vector, as `minimize(..., args=(X, y))`
    passes them. `obj.hess(flat, *args)` and `obj.hessp(flat, p, *args)` serve `hess=` and
    `hessp=`; `obj.pack(...)` and `obj.unpack(flat)` convert (see `Layout` for the order).

    >>> from gradwright import derive
    >>> d = derive("X: (n, p)\\nw: (p,)\\ny: (n,)\\nf = sum((X @ w - y)**2)", wrt="w")
    >>> obj = d.objective(args=("X", "y"))
    >>> X, y = np.eye(2), np.array([1.0, 2.0])
    >>> value, grad = obj(obj.pack(w=[0.0, 0.0]), X, y)
    >>> value, grad.tolist()
    (5.0, [-2.0, -4.0])
    """

    def __init__(self, derivation, args=(), constants: dict | None = None):
        d = derivation
        if not d.is_scalar:
            d.gradient(d.variables[0])  # the explanatory error for array targets
        if isinstance(args, str):
            args = tuple(args.replace(",", " ").split())
        self.derivation = d
        self.args = tuple(args)
        self.constants = dict(constants or {})
        self.layout = Layout(d)
        accepted = [n for n in d.block.declarations if n not in d.variables]
        for name in list(self.args) + list(self.constants):
            if name in d.variables:
                raise FormulaError(f"{name} is a variable: it is packed, not passed as a constant")
            if name not in accepted:
                raise FormulaError(
                    f"{name!r} is not a constant of this block (constants: "
                    f"{', '.join(accepted) or 'none'})"
                )
        both = set(self.args) & set(self.constants)
        if both:
            raise FormulaError(f"{', '.join(sorted(both))} given both in args and as constants")
        self.layout.bind(self.constants)
        self._vg = d.value_and_gradient_function()
        self._hvp = None

    # --- conversion -----------------------------------------------------------------------------

    def pack(self, *values, **variables) -> np.ndarray:
        return self.layout.pack(*values, **variables)

    def unpack(self, flat) -> dict:
        return self.layout.unpack(flat)

    def describe(self) -> str:
        """The layout of the packed vector in words."""
        return self.layout.describe()

    def _arrays(self, flat, args) -> dict:
        if len(args) != len(self.args):
            raise TypeError(
                f"expected {len(self.args)} constants after the vector "
                f"({', '.join(self.args) or 'none'}), got {len(args)}"
            )
        arrays = dict(self.constants)
        arrays.update(zip(self.args, args))
        self.layout.bind(arrays)
        arrays.update(self.layout.unpack(flat))
        return arrays

    # --- the numbers ----------------------------------------------------------------------------

    def __call__(self, flat, *args):
        value, grads = self._vg(**self._arrays(flat, args))
        if len(self.layout.variables) == 1:
            grads = (grads,)
        return float(value), self.layout.flat_gradient(grads)

    def value(self, flat, *args) -> float:
        return self(flat, *args)[0]

    def gradient(self, flat, *args) -> np.ndarray:
        return self(flat, *args)[1]

    def _block_hvp(self):
        if self._hvp is None:
            self._hvp = self.derivation._block_hvp()
        return self._hvp

    def _hvp_with(self, arrays, direction_flat) -> np.ndarray:
        from .calculus.hessian import direction_names

        dirs = direction_names(self.derivation)
        lay = self.layout
        shapes = lay.shapes()
        pieces = {
            dirs[v]: lay._from_free(v, np.asarray(direction_flat, dtype=float)[sl], shapes[v])
            for v, sl in lay.slices(shapes).items()
        }
        out = self._block_hvp()(**arrays, **pieces)
        return lay.flat_gradient(out)

    def hessp(self, flat, p, *args) -> np.ndarray:
        """The block Hessian (over the packed vector) times `p`."""
        arrays = self._arrays(flat, args)
        p = np.asarray(p, dtype=float)
        if p.shape != np.shape(flat):
            raise ValueError(f"p has shape {p.shape}; the packed vector has {np.shape(flat)}")
        return self._hvp_with(arrays, p)

    def hess(self, flat, *args) -> np.ndarray:
        """The dense block Hessian over the packed vector, cross blocks included."""
        arrays = self._arrays(flat, args)
        n = np.size(flat)
        out = np.empty((n, n))
        for k in range(n):
            e = np.zeros(n)
            e[k] = 1.0
            out[:, k] = self._hvp_with(arrays, e)
        return (out + out.T) / 2  # exact in exact arithmetic; removes rounding asymmetry

    def __repr__(self):
        return (
            f"<Objective of {self.derivation.target} over ({', '.join(self.layout.variables)})"
            + (f", args=({', '.join(self.args)})" if self.args else "")
            + ">"
        )


def standard_errors(derivation, arrays: dict) -> dict:
    """Standard errors from the inverse block Hessian of a negative log-likelihood."""
    d = derivation
    missing = [v for v in d.variables if v not in arrays]
    if missing:
        raise FormulaError(f"standard_errors needs the estimates of {', '.join(missing)}")
    constants = {k: v for k, v in arrays.items() if k not in d.variables}
    obj = Objective(d, constants=constants)
    flat = obj.pack(**{v: arrays[v] for v in d.variables})
    h = obj.hess(flat)
    if not np.all(np.isfinite(h)):
        raise FormulaError("the Hessian at this point has entries that are not finite")
    try:
        chol = np.linalg.cholesky(h)
    except np.linalg.LinAlgError:
        low = np.linalg.eigvalsh(h)[0] if h.size else 0.0
        raise FormulaError(
            "the block Hessian at this point is not positive definite (smallest eigenvalue "
            f"{low:.3g}): it is not a minimum of the negative log-likelihood, or the model is "
            "not identified; no standard errors"
        ) from None
    inv_chol = np.linalg.solve(chol, np.eye(len(flat)))
    var = np.sum(inv_chol**2, axis=0)  # diag(H^-1) = column sums of squares of L^-1
    se = np.sqrt(var)
    out = {}
    lay = obj.layout
    shapes = lay.shapes()
    for v, sl in lay.slices(shapes).items():
        out[v] = lay._from_free(v, se[sl], shapes[v])
        if isinstance(out[v], np.ndarray) and out[v].ndim == 0:
            out[v] = float(out[v])
    return out


def values_source(derivation) -> str:
    """A generated module with `values(**arrays) -> tuple`, one entry per definition in block
    order (the target last); shared subexpressions are computed once."""
    from .printing import numpy_code as C

    d = derivation
    named = list(d.block.definitions.values())
    used = set()
    for node in named:
        used |= set(node.symbols)
    required = [n for n in d.block.declarations if n in used or n in d.arguments()]
    cost = C.CostModel(C.guess_sizes(d.expr, d.size_hints))
    gen = C.CodeGen(dict(d.block.declarations), required, cost, use_cholesky=True)
    outputs = [
        C.Output(f"_v{i}", C.lower(node, cost), node.shape, f"the value of {node.name}")
        for i, node in enumerate(named)
    ]
    rets = ", ".join(
        f"np.asarray(_v{i})[()]" if E.is_scalar_shape(node.shape) else f"_v{i}"
        for i, node in enumerate(named)
    )
    spec = C.FunctionSpec(
        "values",
        f"The value of every definition of the block ({d.target} last).",
        outputs,
        f"({rets},)",
    )
    fn = gen.function(spec)
    return C.module('"""Generated by gradwright: values."""', [fn], gen.helpers, gen.uses_scipy)


def values_function(derivation):
    """`values(**arrays) -> {definition: value}`, the target included."""
    ns: dict = {}
    # our own printer wrote this text from the tree; no user text is executed
    source = values_source(derivation)
    exec(compile(source, "<gradwright values>", "exec"), ns)  # noqa: S102
    raw = ns["values"]
    names = list(derivation.block.definitions)

    def values(**arrays):
        return dict(zip(names, raw(**arrays)))

    values.__doc__ = raw.__doc__
    return values


def _packed_objective(derivation, vars_):
    for v in vars_:
        derivation._check_var(v)
    if tuple(vars_) != tuple(derivation.variables):
        raise NotSupportedError(
            "not supported yet: a block Hessian over some of the variables only; name all of "
            f"them ({', '.join(derivation.variables)}) in order, or none"
        )
    return Objective(derivation)


def packed_hvp_function(derivation, vars_):
    """hvp(v, **arrays) -> the block Hessian over the packed variables times the packed v."""
    obj = _packed_objective(derivation, vars_)

    def hvp(direction, /, **arrays):
        missing = [v for v in obj.layout.variables if v not in arrays]
        if missing:
            raise TypeError(f"hvp needs the variables {', '.join(missing)}")
        flat = obj.pack(**{v: arrays.pop(v) for v in obj.layout.variables})
        return _with(obj, arrays).hessp(flat, direction)

    hvp.__doc__ = (
        f"The block Hessian of {derivation.target} over the packed "
        f"({', '.join(derivation.variables)}) times a packed direction."
    )
    return hvp


def packed_hessian_function(derivation, vars_):
    """h(**arrays) -> the dense block Hessian over the packed variables."""
    obj = _packed_objective(derivation, vars_)

    def hessian(**arrays):
        missing = [v for v in obj.layout.variables if v not in arrays]
        if missing:
            raise TypeError(f"hessian needs the variables {', '.join(missing)}")
        flat = obj.pack(**{v: arrays.pop(v) for v in obj.layout.variables})
        return _with(obj, arrays).hess(flat)

    hessian.__doc__ = (
        f"The dense block Hessian of {derivation.target} over the packed "
        f"({', '.join(derivation.variables)}), cross blocks included."
    )
    return hessian


def _with(obj: Objective, constants: dict) -> Objective:
    """The same objective with other constants (sharing the generated functions)."""
    new = Objective.__new__(Objective)
    new.__dict__.update(obj.__dict__)
    new.constants = dict(constants)
    new.layout.bind(constants)
    return new
