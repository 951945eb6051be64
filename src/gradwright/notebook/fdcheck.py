"""The numbers behind the check panel: a generated derivative against finite differences.

Pure NumPy (no widgets, no plotting), so that the comparison is testable on its own.
"""

from __future__ import annotations

import inspect
import math
import time
from dataclasses import dataclass, field

import numpy as np

from ..matrix_checks import derivative_notes

__all__ = [
    "METHODS",
    "CheckResult",
    "VariableCheck",
    "default_step",
    "default_tolerance",
    "fit_namespace",
    "run_check",
]

EPS = float(np.finfo(float).eps)
METHODS = ("central", "forward", "complex step")
DEFAULT_DIRECTIONS = 3
ENTRYWISE_LIMIT = 144  # independent entries per variable checked one by one (2 evaluations each)
SWEEP_EXPONENTS = np.linspace(-13.0, -1.0, 25)


#: said wherever a complex block is checked
COMPLEX_STEP_UNAVAILABLE = (
    "the complex step is unavailable for complex inputs (it needs a real function of real "
    "inputs); complex variables are checked with central or forward differences along real "
    "and imaginary directions"
)


def default_step(method: str) -> float:
    """Step relative to the variable's scale, max(1, rms of its entries).

    Nocedal and Wright, *Numerical Optimization*, 2nd ed., section 8.1 (from memory): forward
    differences are most accurate near h = eps^(1/2) * scale, central near h = eps^(1/3) * scale.
    The complex step has no subtractive cancellation, so a tiny step is common practice.
    """
    if method == "central":
        return EPS ** (1.0 / 3.0)
    if method == "forward":
        return EPS**0.5
    if method == "complex step":
        return 1e-20
    raise ValueError(f"unknown method {method!r}; expected one of {', '.join(METHODS)}")


def default_tolerance(method: str) -> float:
    """Relative error accepted as agreement (common practice: a few digits above the method's
    expected error, eps^(2/3) for central, eps^(1/2) for forward, eps for the complex step)."""
    return {"central": 1e-6, "forward": 1e-4, "complex step": 1e-9}[method]


@dataclass
class VariableCheck:
    """The comparison for one variable."""

    variable: str
    shape: tuple
    directional: list = field(default_factory=list)  # (label, analytic, numeric, rel_error)
    entrywise: np.ndarray | None = None  # rel error per entry, NaN where not checked
    sweep: tuple | None = None  # (steps, {method: errors}) along the first direction
    step: float = 0.0  # absolute step used

    @property
    def max_rel_error(self) -> float:
        values = [e for *_, e in self.directional]
        if self.entrywise is not None and np.isfinite(self.entrywise).any():
            values.append(float(np.nanmax(self.entrywise)))
        return max(values) if values else math.nan


@dataclass
class CheckResult:
    """What a run of the check found; `passed` is False on any error."""

    method: str
    step: float
    tolerance: float
    seed: int
    sizes: dict
    sources: dict  # input name -> "sampled" | "namespace"
    checks: list = field(default_factory=list)
    error: str | None = None
    notes: list = field(default_factory=list)
    elapsed: float = 0.0

    @property
    def max_rel_error(self) -> float:
        values = [c.max_rel_error for c in self.checks]
        values = [v for v in values if not math.isnan(v)]
        return max(values) if values else math.nan

    @property
    def passed(self) -> bool:
        error = self.max_rel_error
        return self.error is None and not math.isnan(error) and error <= self.tolerance

    @property
    def verdict(self) -> str:
        if self.error is not None:
            return "ERROR"
        return "PASS" if self.passed else "FAIL"

    def summary(self) -> str:
        """One line: verdict, largest relative error against the tolerance, how it was measured."""
        if self.error is not None:
            return f"ERROR: {self.error}"
        names = ", ".join(c.variable for c in self.checks)
        relation = "<=" if self.passed else ">"
        sizes = ", ".join(f"{k}={v}" for k, v in self.sizes.items())
        return (
            f"{self.verdict}: largest relative error {self.max_rel_error:.2e} {relation} "
            # the tolerance and step as the panel's boxes show them (three significant digits)
            f"tolerance {self.tolerance:.3g} ({self.method} differences, step {self.step:.3g}, "
            f"wrt {names}; {sizes or 'no dims'}; seed {self.seed})"
        )


# --- inputs -------------------------------------------------------------------------------


def _is_complex(derivation, name: str) -> bool:
    """True for a symbol of a complex block declared complex (complex, hermitian or hpd)."""
    field = getattr(derivation, "field", None)
    return field is not None and field(name) == "complex"


def _structure_fits(value: np.ndarray, structure: tuple) -> bool:
    if not np.all(np.isfinite(value)):
        return False
    for word in structure:
        if word in ("hermitian", "hpd") and (
            value.ndim != 2 or not np.allclose(value, np.conj(value).T)
        ):
            return False
        if word == "hpd":
            try:
                np.linalg.cholesky(value)
            except np.linalg.LinAlgError:
                return False
        if word in ("symmetric", "spd") and (value.ndim != 2 or not np.allclose(value, value.T)):
            return False
        if word == "spd":
            try:
                np.linalg.cholesky(value)
            except np.linalg.LinAlgError:
                return False
        if word == "positive" and not np.all(value > 0):
            return False
        if word == "diagonal" and (value.ndim != 2 or np.any(value - np.diag(np.diag(value)))):
            return False
        if word == "orthogonal" and (
            value.ndim != 2 or not np.allclose(value.T @ value, np.eye(value.shape[1]))
        ):
            return False
    return True


def _dims_words(shape) -> str:
    inner = ", ".join(str(d) for d in shape)
    return f"({inner},)" if len(shape) == 1 else f"({inner})"


def _misfit_words(actual, declared, bound: dict, set_by: dict) -> str:
    """'has shape (5,), which does not fit (n,): n = 7 from X' (a predicate after the name)."""
    known = [f"{d} = {bound[d]} from {set_by[d]}" for d in dict.fromkeys(declared) if d in set_by]
    why = f": {', '.join(known)}" if known else ""
    return f"has shape {_dims_words(actual)}, which does not fit {_dims_words(declared)}{why}"


def fit_namespace(derivation, namespace: dict, names) -> tuple[dict, dict, dict]:
    """Arrays of `namespace` named as the block's inputs whose shapes and structure fit.

    Returns (arrays, bound dims, reasons for the ones refused); dims bound by an earlier array
    must agree with later ones.
    """
    arrays: dict = {}
    bound: dict = {}
    set_by: dict = {}  # dim -> the array that fixed its size, for the message
    refused: dict = {}
    for name in names:
        if name not in namespace:
            continue
        info = derivation.symbols.get(name)
        if info is None:
            continue
        is_complex = _is_complex(derivation, name)
        if np.iscomplexobj(namespace[name]) and not is_complex:
            # casting would drop the imaginary part and check a different point
            refused[name] = (
                f"is a complex array, but {name} is declared real (declare it complex, or pass "
                f"{name}.real)"
            )
            continue
        try:
            value = np.asarray(namespace[name], dtype=complex if is_complex else float)
        except (TypeError, ValueError):
            refused[name] = "is not a numeric array"
            continue
        shape = tuple(info.shape)
        if value.ndim != len(shape):
            refused[name] = f"has {value.ndim} axes, the block says {len(shape)}"
            continue
        trial = dict(bound)
        ok = True
        for dim, size in zip(shape, value.shape):
            if isinstance(dim, int) or str(dim).isdigit():
                ok = int(dim) == size
            elif dim in trial:
                ok = trial[dim] == size
            else:
                trial[dim] = size
            if not ok:
                refused[name] = _misfit_words(value.shape, shape, bound, set_by)
                break
        if not ok:
            continue
        if not _structure_fits(value, tuple(info.structure)):
            refused[name] = f"is not {' '.join(info.structure)}"
            continue
        for dim in trial:
            set_by.setdefault(dim, name)
        bound = trial
        arrays[name] = value if value.ndim else float(value)
    return arrays, bound, refused


# --- directions ---------------------------------------------------------------------------


def _direction(rng: np.random.Generator, value, structure: tuple, k: int = 0) -> np.ndarray:
    value = np.asarray(value)
    raw = rng.standard_normal(value.shape)
    if np.iscomplexobj(value):
        # a complex variable: real and imaginary directions in turn (∂/∂Re, then ∂/∂Im)
        raw = raw + 0j if k % 2 == 0 else 1j * raw
        if value.ndim == 2 and ("hermitian" in structure or "hpd" in structure):
            return (raw + np.conj(raw).T) / 2.0
        return raw
    if value.ndim == 2 and ("symmetric" in structure or "spd" in structure):
        return (raw + raw.T) / 2.0
    if value.ndim == 2 and "diagonal" in structure:
        return np.diag(np.diag(raw))
    if value.ndim == 2 and "orthogonal" in structure:
        # Stay tangent to the orthogonal group: X K with K skew.
        return value @ ((raw - raw.T) / 2.0)
    return raw


def _basis(value, structure: tuple):
    """Unit perturbations of each independent entry, with the index they report to."""
    value = np.asarray(value)
    if value.ndim == 0:
        yield (), np.ones(()), False
        return
    if value.ndim == 2 and "orthogonal" in structure:
        return
    symmetric = value.ndim == 2 and ("symmetric" in structure or "spd" in structure)
    diagonal = value.ndim == 2 and "diagonal" in structure
    for index in np.ndindex(value.shape):
        if diagonal and index[0] != index[1]:
            continue
        if symmetric and index[0] > index[1]:
            continue
        basis = np.zeros(value.shape)
        if symmetric and index[0] != index[1]:
            # (E_ij + E_ji) / 2: the directional derivative along it is G_ij for a symmetric G.
            basis[index] = basis[index[::-1]] = 0.5
        else:
            basis[index] = 1.0
        yield index, basis, symmetric and index[0] != index[1]


# --- the comparison -----------------------------------------------------------------------


class _Evaluator:
    def __init__(self, derivation, arrays: dict, variable: str):
        self.function = derivation.function()
        self.arrays = arrays
        self.variable = variable
        x0 = np.asarray(arrays[variable])
        self.x0 = x0 if np.iscomplexobj(x0) else np.asarray(x0, dtype=float)

    def at(self, offset) -> np.ndarray:
        point = dict(self.arrays)
        moved = self.x0 + offset
        point[self.variable] = moved if moved.ndim else moved[()]
        return np.asarray(self.function(**point))

    def finite_difference(self, direction, h: float, method: str, f0=None) -> np.ndarray:
        if method == "central":
            return (self.at(h * direction) - self.at(-h * direction)) / (2.0 * h)
        if method == "forward":
            base = self.at(0.0 * direction) if f0 is None else f0
            return (self.at(h * direction) - base) / h
        if method == "complex step":
            # the generated functions refuse complex arrays for real-declared symbols; the
            # complex step is the one place where a complex input is meant
            inner = inspect.unwrap(self.function)  # the generated function behind wrappers
            flag = getattr(inner, "__globals__", {}).get("_GW_COMPLEX_STEP")
            if flag is not None:
                flag.append(True)
            try:
                return np.imag(self.at(1j * h * direction)) / h
            finally:
                if flag is not None:
                    flag.pop()
        raise ValueError(f"unknown method {method!r}")


def _noise(method: str, f0: np.ndarray, h: float) -> float:
    """Rounding noise of a difference quotient, about eps*|f|/h (Nocedal and Wright, 8.1, from
    memory); the complex step has none beyond the function's own rounding."""
    magnitude = 1.0 + float(np.max(np.abs(f0))) if np.size(f0) else 1.0
    if method == "complex step":
        return EPS * magnitude
    return EPS * magnitude / h


def _rel(diff: float, scale: float, floor: float) -> float:
    return float(diff / max(scale, floor, np.finfo(float).tiny))


def run_check(
    derivation,
    variables,
    arrays: dict,
    *,
    method: str = "central",
    step: float | None = None,
    tolerance: float | None = None,
    seed: int = 0,
    sizes: dict | None = None,
    sources: dict | None = None,
    directions: int = DEFAULT_DIRECTIONS,
    entrywise_limit: int = ENTRYWISE_LIMIT,
    sweep: bool = True,
) -> CheckResult:
    """Compare the generated gradient (scalar targets) or JVP/VJP (array targets) of each variable
    with finite differences along random directions, and entry by entry for small variables.

    Relative errors are taken against the size of the terms compared, with a floor of 100x the
    difference quotient's rounding noise, so that exact zeros in a gradient do not divide by zero.
    """
    if method not in METHODS:
        raise ValueError(f"unknown method {method!r}; expected one of {', '.join(METHODS)}")
    if method == "complex step" and getattr(derivation, "is_complex", False):
        raise ValueError(COMPLEX_STEP_UNAVAILABLE)
    step = default_step(method) if step is None else float(step)
    tolerance = default_tolerance(method) if tolerance is None else float(tolerance)
    result = CheckResult(
        method=method,
        step=step,
        tolerance=tolerance,
        seed=int(seed),
        sizes=dict(sizes or {}),
        sources=dict(sources or {}),
    )
    started = time.perf_counter()
    rng = np.random.default_rng(seed)
    try:
        for variable in variables:
            result.checks.append(
                _check_variable(
                    derivation,
                    variable,
                    arrays,
                    method,
                    step,
                    rng,
                    directions,
                    entrywise_limit,
                    sweep,
                )
            )
    except Exception as err:  # shown in the panel, never raised through it
        result.error = f"{type(err).__name__}: {err}"
    result.elapsed = time.perf_counter() - started
    # said whether or not the check went through: it explains failures near such points
    result.notes.extend(derivative_notes(derivation.expr, arrays))
    if result.error is None:
        for check in result.checks:
            tiny = [abs(a) for _, a, _, _ in check.directional]
            if tiny and max(tiny) == 0.0:
                result.notes.append(
                    f"The derivative with respect to {check.variable} is zero at this point: "
                    "relative errors say little here; try another seed or other inputs."
                )
    return result


def _check_variable(derivation, variable, arrays, method, step, rng, directions, limit, sweep):
    info = derivation.symbols[variable]
    structure = tuple(info.structure)
    evaluator = _Evaluator(derivation, arrays, variable)
    x0 = evaluator.x0
    scale = max(1.0, float(np.sqrt(np.mean(np.abs(x0) ** 2)))) if x0.size else 1.0
    h = step * scale
    check = VariableCheck(variable=variable, shape=tuple(x0.shape), step=h)
    f0 = evaluator.at(np.zeros_like(x0))
    floor = 100.0 * _noise(method, f0, h)
    scalar_target = bool(derivation.is_scalar)
    if scalar_target:
        gradient = np.asarray(derivation.gradient_function(variable)(**arrays))
        if not np.iscomplexobj(x0):
            gradient = np.asarray(gradient, dtype=float)
        if gradient.shape != x0.shape:
            raise ValueError(
                f"the gradient with respect to {variable} has shape {gradient.shape}, "
                f"the variable {x0.shape}"
            )
    else:
        jvp = derivation.jvp_function(variable)
        vjp = derivation.vjp_function(variable)

    first = None
    for k in range(directions):
        v = _direction(rng, x0, structure, k)
        numeric = evaluator.finite_difference(v, h, method, f0)
        if scalar_target:
            # Re <G, v>: the directional derivative promised by G = ∂f/∂Re + i ∂f/∂Im
            analytic = float(np.real(np.sum(np.conj(gradient) * v)))
            scale_terms = float(np.sum(np.abs(gradient * v)))
            numeric = float(numeric)
            rel = _rel(abs(analytic - numeric), max(scale_terms, abs(numeric)), floor)
            check.directional.append((f"direction {k + 1}", analytic, numeric, rel))
        else:
            analytic_arr = np.asarray(jvp(v if v.ndim else v[()], **arrays))
            diff = float(np.max(np.abs(analytic_arr - numeric))) if numeric.size else 0.0
            size = max(float(np.max(np.abs(analytic_arr))), float(np.max(np.abs(numeric))))
            rel = _rel(diff, size, floor)
            check.directional.append(
                (
                    f"JVP direction {k + 1}",
                    float(np.linalg.norm(analytic_arr)),
                    float(np.linalg.norm(numeric)),
                    rel,
                )
            )
            # The VJP through its defining identity Re <W, J v> = Re <J* W, v>.
            w = rng.standard_normal(np.shape(f0))
            if np.iscomplexobj(f0):
                w = w + 1j * rng.standard_normal(np.shape(f0))
            back = np.asarray(vjp(w if w.ndim else w[()], **arrays))
            left = float(np.real(np.sum(np.conj(back) * v)))
            right = float(np.real(np.sum(np.conj(w) * numeric)))
            terms = float(np.sum(np.abs(back * v)))
            rel_vjp = _rel(abs(left - right), max(terms, abs(right)), floor * np.sum(np.abs(w)))
            check.directional.append((f"VJP direction {k + 1}", left, right, rel_vjp))
        if first is None:
            first = v

    if first is not None and sweep:
        check.sweep = _sweep(
            derivation,
            evaluator,
            first,
            scale,
            f0,
            arrays,
            variable,
            gradient if scalar_target else None,
            None if scalar_target else jvp,
        )

    basis = list(_basis(x0, structure)) if not np.iscomplexobj(x0) else []
    if basis and len(basis) <= limit:
        errors = np.full(x0.shape, np.nan)
        if scalar_target:
            top = max(float(np.max(np.abs(gradient))), 0.0)
            rows = []
            for index, e, mirror in basis:
                numeric = float(evaluator.finite_difference(e, h, method, f0))
                rows.append((index, mirror, float(np.sum(gradient * e)), numeric))
            top = max([top] + [abs(n) for *_, n in rows])
            for index, mirror, analytic, numeric in rows:
                errors[index] = _rel(abs(analytic - numeric), top, floor)
                if mirror:
                    errors[index[::-1]] = errors[index]
        else:
            columns = []
            for index, e, mirror in basis:
                numeric = evaluator.finite_difference(e, h, method, f0)
                analytic = np.asarray(jvp(e if e.ndim else e[()], **arrays))
                diff = float(np.max(np.abs(analytic - numeric), initial=0.0))
                columns.append((index, mirror, diff, float(np.max(np.abs(analytic), initial=0.0))))
            top = max([c[3] for c in columns] + [0.0])
            for index, mirror, diff, _ in columns:
                errors[index] = _rel(diff, top, floor)
                if mirror:
                    errors[index[::-1]] = errors[index]
        check.entrywise = errors
    return check


def _sweep(derivation, evaluator, v, scale, f0, arrays, variable, gradient, jvp):
    """Error against step size along one direction, for every method the formula allows."""
    methods = ["central", "forward"]
    if getattr(derivation, "supports_complex_step", False):
        methods.append("complex step")
    if gradient is not None:
        analytic = np.asarray(np.real(np.sum(np.conj(gradient) * v)))
        terms = float(np.sum(np.abs(gradient * v)))
    else:
        analytic = np.asarray(jvp(v if v.ndim else v[()], **arrays))
        terms = float(np.max(np.abs(analytic), initial=0.0))
    steps = scale * 10.0**SWEEP_EXPONENTS
    curves = {}
    for method in methods:
        errors = []
        for h in steps:
            try:
                with np.errstate(all="ignore"):
                    numeric = evaluator.finite_difference(v, h, method, f0)
                diff = float(np.max(np.abs(analytic - numeric), initial=0.0))
                errors.append(diff / max(terms, np.finfo(float).tiny))
            except Exception:  # the step left the formula's domain (e.g. spd); no point
                errors.append(math.nan)
        curves[method] = np.array(errors)
    return steps, curves
