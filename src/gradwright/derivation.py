"""A derivation: the block, its differential, identified derivatives, steps and NumPy functions.

Everything is computed from the one differential value `d(f)`, lazily, and cached.
"""

from __future__ import annotations

import functools
import itertools
import linecache
from dataclasses import dataclass

from . import expr as E
from .calculus import adjoint, differential, expand_once, has_pending, kronecker_form
from .calculus.symmetric_gradient import symmetric_as_is
from .derivation_functions import DerivationFunctions
from .errors import FormulaError, NotSupportedError, ShapeError, frame_named
from .function_specs import ALONE, MAX_HESSIAN_GRADIENT, build_specs  # noqa: F401
from .language import Block
from .matrix_checks import adjust_samples
from .matrix_functions import NODES as _MATRIX_NODES
from .printing import latex, symbol_latex, text
from .printing import numpy_code as C
from .printing.latex import differential_latex
from .printing.structure import cholesky_ok
from .sampling import default_sizes, needs_positive, sample_inputs
from .simplify import simplify

MAX_STEPS = 40
#: the widest line of a printed step, in ems, before it breaks at an operator (with the rule
#: column beside it, a line fits an A4 page with 1.5 cm margins: to_latex is checked by pdflatex)
LINE_BUDGET = 30.0


def _memoized(method):
    """Cache a method's results on its instance (freed with the derivation)."""

    @functools.wraps(method)
    def wrapper(self, *args):
        memo = self.__dict__.setdefault("_memo", {})
        key = (method.__name__, args)
        if key not in memo:
            memo[key] = method(self, *args)
        return memo[key]

    return wrapper


@dataclass(frozen=True)
class SymbolInfo:
    name: str
    shape: tuple  # NumPy's shape: (), ("n",), ("m", "n")
    structure: tuple
    role: str  # "variable", "constant", "defined", "target"


@dataclass(frozen=True)
class Step:
    """One line of the derivation: `lhs = expr`, produced by `rule`."""

    kind: str  # "differential", "gradient", "jacobian"
    expr: E.Expr
    rule: str
    lhs_latex: str
    var: str | None = None

    def latex(self) -> str:
        return latex(self.expr)

    def text(self) -> str:
        return text(self.expr)


class Derivation(DerivationFunctions):
    """The result of `derive()`; see docs in README for the full tour.

    >>> from gradwright import derive
    >>> d = derive("X: (n, p)\\nW: (p, k)\\nY: (n, k)\\nf = sum((X @ W - Y)**2)", wrt="W")
    >>> d.gradient("W").key() == d.gradient("W").key()
    True
    >>> print(text(d.gradient("W")))
    2 * (X.T @ (X @ W - Y))
    """

    def __init__(self, block: Block, wrt: tuple[str, ...], sizes: dict | None = None):
        self.block = block
        self.text_block = block.text
        self.variables = wrt
        self.expr = block.expr
        self.target = block.target
        self.size_hints = dict(sizes or {})
        self._vars = {v: block.declarations[v] for v in wrt}
        self._functions: dict | None = None
        self._source: str | None = None
        self._warn_nonfinite = False

    @property
    def warn_nonfinite(self) -> bool:
        """Whether generated functions warn on an array result with inf or nan entries (a
        number result always warns); settable, also after functions were made."""
        return self._warn_nonfinite

    @warn_nonfinite.setter
    def warn_nonfinite(self, on: bool) -> None:
        self._warn_nonfinite = bool(on)
        spaces = [
            self._functions,
            *self.__dict__.get("_alone_namespaces", {}).values(),
            *self.__dict__.get("_array_api_namespaces", {}).values(),
        ]
        for ns in spaces:
            if ns is not None and "_GW_WARN_NONFINITE" in ns:
                ns["_GW_WARN_NONFINITE"] = self._warn_nonfinite

    # --- description -----------------------------------------------------------------------------

    @property
    def text(self) -> str:
        return self.text_block

    @property
    def target_shape(self) -> tuple:
        return E.user_shape(self.expr.shape)

    @property
    def is_scalar(self) -> bool:
        return self.expr.is_scalar

    @property
    def dims(self) -> dict:
        return {k: list(v) for k, v in self.block.dims.items()}

    @functools.cached_property
    def symbols(self) -> dict:
        out = {}
        for name, sym in self.block.declarations.items():
            role = "variable" if name in self.variables else "constant"
            out[name] = SymbolInfo(name, E.user_shape(sym.shape), _words(sym), role)
        for name, named in self.block.definitions.items():
            role = "target" if name == self.target else "defined"
            out[name] = SymbolInfo(name, E.user_shape(named.shape), (), role)
        return out

    def shape_table(self) -> list[dict]:
        """Every declared and defined symbol with shape, structure and role."""
        rows = []
        for info in self.symbols.values():
            rows.append(
                {
                    "symbol": info.name,
                    "shape": _shape_text(info.shape),
                    "structure": ", ".join(info.structure),
                    "role": info.role,
                }
            )
        return rows

    def arguments(self) -> list[str]:
        """The symbols every generated function requires (in block order): those the target
        uses, and every variable (a gradient is shaped like its variable)."""
        used = set(self.expr.symbols) | set(self.variables)
        bound = {
            name for n in used for d in self.block.declarations[n].shape if d for name in d.names
        }
        for node in E.walk(self.expr):  # dims the target needs (eye(n), ones(n)) from any symbol
            for d in node.shape:
                for name in d.names if d is not None else ():
                    if name not in bound and name in self.block.dims:
                        used.add(self.block.dims[name][0][0])
                        bound.add(name)
        return [n for n in self.block.declarations if n in used]

    def __repr__(self):
        return f"<Derivation of {self.target} with respect to {', '.join(self.variables)}>"

    # --- the calculus --------------------------------------------------------------------------

    @_memoized
    def _differential(self, vars_: tuple) -> E.Expr:
        return simplify(differential(self.expr, frozenset(vars_)))

    def differential(self) -> E.Expr:
        """d(target) with respect to all variables, linear in their differentials."""
        return self._differential(self.variables)

    def _check_var(self, var: str | None) -> str:
        if var is None:
            if len(self.variables) != 1:
                raise FormulaError(
                    f"name the variable: this derivation has {len(self.variables)} "
                    f"({', '.join(self.variables)})"
                )
            return self.variables[0]
        if var not in self._vars:
            raise FormulaError(
                f"{var!r} is not a variable of this derivation "
                f"(variables: {', '.join(self.variables)})"
            )
        return var

    @_memoized
    def _raw_gradient(self, var: str, seed_is_cotangent: bool = False) -> E.Expr:
        lin = self._differential((var,))
        seed = E.ONE if not seed_is_cotangent else _cotangent(self.expr.shape)
        g = adjoint(lin, seed).get(var)
        sym = self._vars[var]
        if g is None:
            return E.zero_like(sym.shape)
        return simplify(g)

    @_memoized
    def _gradient(self, var: str) -> E.Expr:
        if not self.is_scalar:
            raise FormulaError(
                f"the target {self.target} is a {E.describe(self.expr)}, not a scalar: use "
                "jacobian(), jvp_function() or vjp_function()"
            )
        g = self._raw_gradient(var)
        return _project(g, self._vars[var])

    def gradient(self, var: str | None = None) -> E.Expr:
        """The gradient of a scalar target, shaped like the variable."""
        return self._gradient(self._check_var(var))

    @_memoized
    def _jacobian(self, var: str) -> E.Expr:
        return simplify(kronecker_form(self._differential((var,)), self._vars[var]))

    def jacobian(self, var: str | None = None) -> E.Expr:
        """d vec(F) / d vec(X)^T in compact Kronecker form (raises NotSupportedError if none)."""
        return self._jacobian(self._check_var(var))

    @_memoized
    def _hvp_expr(self, var: str) -> E.Expr:
        g = self._gradient(var)
        return simplify(differential(g, frozenset([var])))

    # --- steps ---------------------------------------------------------------------------------

    @functools.cached_property
    def steps(self) -> list[Step]:
        wrt = frozenset(self.variables)
        lhs = differential_latex(_name_latex(self.target))
        steps = [Step("differential", E.D(E.Named(self.target, self.expr)), "", lhs)]
        current = (
            E.D(self.expr)
            if not (self.expr.symbols & wrt) == set()
            else E.zero_like(self.expr.shape)
        )
        steps.append(Step("differential", current, "write d in front", lhs))
        guard = 0
        while has_pending(current) and guard < MAX_STEPS:
            names: list[str] = []
            while True:
                current, rules, substantive = expand_once(current, wrt)
                names += [r for r in rules if r not in names]
                if substantive or not has_pending(current):
                    break
            guard += 1
            steps.append(Step("differential", current, "; ".join(names), lhs))
        simple = simplify(current)
        if simple != current:
            steps.append(Step("differential", simple, "collect terms", lhs))
        if self.is_scalar:
            forms = []
            for v in self.variables:
                forms.append(_pairing(self._gradient(v), self._vars[v]))
            form = E.add(*forms)
            rule = "rearrange under the trace: tr(A B) = tr(B A), tr(A) = tr(Aᵀ)"
            if all(self._vars[v].is_scalar for v in self.variables):
                rule = "collect the coefficient of each differential"
            if form != steps[-1].expr:
                steps.append(Step("differential", form, rule, lhs))
            for v in self.variables:
                sym = self._vars[v]
                why = "read off the gradient"
                raw = self._raw_gradient(v)
                if "lower" in sym.structure and E.tril(raw) != raw:
                    why = f"keep the lower triangle, since {v} is lower-triangular"
                elif E.is_matrix_shape(sym.shape) and (sym.structure & E.SYMMETRIC_WORDS):
                    if "diagonal" in sym.structure:
                        why = f"keep the diagonal, since {v} is diagonal"
                    elif not E.is_symmetric(raw):
                        why = f"symmetric part, since {v} is symmetric"
                steps.append(
                    Step(
                        "gradient",
                        self._gradient(v),
                        why,
                        _partial(self.target, v),
                        v,
                    )
                )
        else:
            parts = []
            jac = {}
            for v in self.variables:
                try:
                    jac[v] = self._jacobian(v)
                except NotSupportedError:
                    jac = None
                    break
            if jac is not None:
                for v in self.variables:
                    dv = E.Differential(self._vars[v])
                    parts.append(E.matmul(jac[v], dv if dv.is_scalar else E.vec(dv)))
                steps.append(
                    Step(
                        "differential",
                        E.add(*parts),
                        "vectorize: vec(A dX B) = (Bᵀ ⊗ A) vec(dX)",
                        r"\operatorname{vec}(" + differential_latex(_name_latex(self.target)) + ")",
                    )
                )
                for v in self.variables:
                    steps.append(
                        Step(
                            "jacobian",
                            jac[v],
                            "read off the Jacobian",
                            rf"\frac{{\partial \operatorname{{vec}} {_name_latex(self.target)}}}"
                            rf"{{\partial (\operatorname{{vec}} {symbol_latex(v)})^{{\top}}}}",
                            v,
                        )
                    )
        return steps

    def latex(self) -> str:
        """The derivation as one aligned environment, rule names beside each line."""
        from .printing.layout import broken_lines, rule_stack

        lines = []
        prev_lhs = None
        for step in self.steps[1:]:
            lhs = step.lhs_latex if step.lhs_latex != prev_lhs else ""
            rule = f" && {rule_stack(step.rule)}" if step.rule else ""  # wrapped to fit a page
            first, *rest = broken_lines(step.expr, LINE_BUDGET)
            lines.append(f"{lhs} &= {first}{rule}")
            lines.extend(rf"&\qquad {more}" for more in rest)
            prev_lhs = step.lhs_latex
        return "\\begin{aligned}\n" + " \\\\\n".join(lines) + "\n\\end{aligned}"

    def text_steps(self) -> str:
        out = []
        for step in self.steps[1:]:
            lhs = _plain_lhs(step, self.target)
            out.append(f"{lhs} = {step.text()}" + (f"    [{step.rule}]" if step.rule else ""))
        return "\n".join(out)

    def result_latex(self) -> str:
        lines = []
        from .printing.layout import broken_lines

        for step in self.steps:
            if step.kind in ("gradient", "jacobian"):
                first, *rest = broken_lines(step.expr, LINE_BUDGET)
                lines.append(f"{step.lhs_latex} &= {first}")
                lines.extend(rf"&\qquad {more}" for more in rest)
        return "\\begin{aligned}\n" + " \\\\\n".join(lines) + "\n\\end{aligned}"

    def to_latex(self) -> str:
        """A LaTeX fragment for a paper: the shape table and the derivation."""
        rows = "\n".join(
            rf"${symbol_latex(r['symbol'])}$ & ${_latex_shape(r['shape'])}$ & "
            rf"{r['structure'] or '--'} & {r['role']} \\"
            for r in self.shape_table()
        )
        table = (
            "\\begin{tabular}{llll}\n\\hline\nsymbol & shape & structure & role \\\\\n\\hline\n"
            + rows
            + "\n\\hline\n\\end{tabular}"
        )
        return f"{table}\n\n\\[\n{self.latex()}\n\\]\n"

    def to_notebook(self, path) -> None:
        """A standalone notebook with the block, the derivation, the code and a check cell."""
        from .notebook.export import write_notebook  # the face is imported only when asked

        write_notebook(self, path)

    # --- numbers -------------------------------------------------------------------------------

    def sample_inputs(self, sizes: dict | None = None, seed: int = 0) -> dict:
        """Random arrays for every declared symbol, honoring shape and structure."""
        all_sizes = default_sizes(self.block.dims)
        all_sizes.update(sizes or {})
        missing = [d for d in self.block.dims if d not in all_sizes]
        if missing:  # pragma: no cover - default_sizes covers every dim
            raise FormulaError(f"no size for dims {', '.join(missing)}")
        drawn = sample_inputs(
            self.block.declarations, all_sizes, seed, positive=needs_positive(self.expr)
        )
        # spectral functions and matrix equations need more than the structure words say
        return adjust_samples(self.expr, self.block.declarations, drawn, seed)

    @functools.cached_property
    def supports_complex_step(self) -> bool:
        for node in E.walk(self.expr):
            t = type(node)
            # |x + ih| and sign(x + ih) are not analytic: the complex step would read 0
            nonanalytic = ("softplus", "abs", "sign")
            if t in (E.LogDet, E.Norm, E.Abs) or (t is E.Func and node.name in nonanalytic):
                return False
            if t in (E.Solve, E.Inverse) and cholesky_ok(node.args[0]):  # Cholesky: not analytic
                return False
            if t in _MATRIX_NODES:  # eigh, cholesky and SciPy's solvers: no complex step
                return False
        return True

    def _cost(self, sizes: dict | None = None) -> C.CostModel:
        # dims found large at call time (chunked Dask axes) yield to the user's own hints
        hints = {**(sizes or {}), **self.size_hints}
        return C.CostModel(C.guess_sizes(self.expr, hints), hinted=hints)

    # the hooks of the shared builder of generated functions (function_specs.py)
    _code_dense = True  # dense Jacobians and Hessians

    @property
    def _code_has_gradients(self) -> bool:
        return self.is_scalar

    def _code_value(self) -> E.Expr:
        return self.expr

    def _code_vjp(self, v: str) -> E.Expr:
        return _project(self._raw_gradient(v, True), self._vars[v])

    def _code_doc(self, kind: str, v: str | None) -> str:
        t = self.target
        if kind == "gradient":
            return f"The gradient of {t} with respect to {v} (shaped like {v})."
        if kind == "value_and_gradient":
            several = len(self.variables) > 1
            return f"The value of {t} and its gradient" + (
                " (a tuple, in the order of the variables)." if several else "."
            )
        if kind == "jvp":
            return f"d{t} along the direction d{v} (shaped like {t})."
        if kind == "vjp":
            return (
                f"The vector-Jacobian product with a cotangent shaped like {t} "
                f"(result shaped like {v})."
            )
        return f"The Hessian of {t} with respect to {v} applied to a direction shaped like {v}."

    def _specs(self, sizes: dict | None = None) -> tuple:
        return build_specs(self, sizes)

    def source(self, backend: str = "numpy", sizes: dict | None = None) -> str:
        """The generated Python module: NumPy (SciPy only for spd Cholesky factors), or with
        `backend="torch"`, `"jax"`, `"cupy"`, `"dask"` or `"array_api"` (any of them, chosen by
        the arguments) a module computing with that library through array-api-compat.
        `sizes` (dim -> typical size) steers the order of products, like derive's `sizes`.

        >>> from gradwright import derive
        >>> d = derive("X: (n, p)\\nw: (p,)\\ny: (n,)\\nf = sum((X @ w - y)**2)", wrt="w")
        >>> "def gradient_w(" in d.source(backend="torch")
        True
        """
        if backend != "numpy" or sizes:
            from .backends import module_source

            return module_source(self, backend, sizes)
        if self._source is None:
            self._source = self._numpy_source()
        return self._source

    def _numpy_source(self, sizes: dict | None = None, only: str | None = None) -> str:
        try:
            gen, specs = build_specs(self, sizes, only) if only else self._specs(sizes)
            funcs = [gen.function(s) for s in specs]
        except ShapeError as err:  # a safety net: no internal error reaches the user
            raise NotSupportedError(
                f"not supported yet: generating NumPy code for this block ({err})"
            ) from None
        header = (
            '"""NumPy code generated by gradwright from the block:\n\n'
            + "\n".join(
                "    " + line
                for line in self.text_block.strip("\n")
                .replace("\\", "\\\\")
                .replace('"""', "'''")
                .split("\n")
            )
            + (f'\n\nVariables: {", ".join(self.variables)}. Arrays are passed by keyword.\n"""')
        )
        return C.module(header, funcs, gen.helpers, gen.uses_scipy)

    def _run(self, source: str) -> dict:
        ns: dict = {"__name__": f"gradwright_generated_{self.target}"}
        filename = f"<gradwright {self.target} #{next(_GENERATED)}>"
        # tracebacks and inspect.getsource show the generated lines, not "no source"
        linecache.cache[filename] = (len(source), None, source.splitlines(True), filename)
        # our own printer wrote this text from the tree; no user text is executed
        exec(compile(source, filename, "exec"), ns)  # noqa: S102
        if "_GW_WARN_NONFINITE" in ns:
            ns["_GW_WARN_NONFINITE"] = self._warn_nonfinite
        return ns

    def _namespace(self) -> dict:
        if self._functions is None:
            self._functions = self._run(self.source())
        return self._functions

    def _alone(self, name: str) -> dict | None:
        """A module of the one function `name` (the value, a gradient, value-and-gradient),
        while the whole module is not made yet: a first call after derive() generates one
        function, not every JVP, VJP and HVP too."""
        if self._functions is not None or not name.startswith(ALONE):
            return None
        cache = self.__dict__.setdefault("_alone_namespaces", {})
        if name not in cache:
            cache[name] = self._run(self._numpy_source(only=name))
        return cache[name]

    def _fn(self, name: str):
        ns = self._alone(name)
        if ns is None or name not in ns:
            ns = self._namespace()
        if name not in ns:
            raise NotSupportedError(f"not supported yet: {name.replace('_', ' ')} for this target")
        from .backends import dispatching  # NumPy arguments go straight to ns[name]

        return dispatching(self, name, ns)  # (arrays by position refused there, in words)


def _api_boundary(method):
    """No internal error type reaches the user: a `ShapeError` or a broken internal invariant
    raised while deriving becomes a `NotSupportedError` that says what was being done."""

    @functools.wraps(method)
    def wrapper(self, *args, **kwargs):
        try:
            return method(self, *args, **kwargs)
        except FormulaError as err:  # the user's message without gradwright's frames behind it
            raise err.with_traceback(None) from None
        except (ShapeError, AssertionError) as err:
            what = method.__name__.replace("_", " ")
            raise NotSupportedError(f"not supported yet: {what} for this block ({err})") from None

    return frame_named(wrapper, f"Derivation.{method.__name__}")


for _name in (
    "differential", "gradient", "jacobian", "latex", "text_steps", "result_latex", "to_latex",
    "source", "function", "gradient_function", "value_and_gradient_function", "jvp_function",
    "vjp_function", "jacobian_function", "hvp_function", "hessian_function", "stationary_point",
    "objective", "second_derivative", "values", "standard_errors", "sample_inputs",
    "to_notebook",
):  # fmt: skip
    setattr(Derivation, _name, _api_boundary(getattr(Derivation, _name)))
Derivation.steps = functools.cached_property(_api_boundary(Derivation.steps.func))
Derivation.steps.__set_name__(Derivation, "steps")


# ---------------------------------------------------------------------------------------------


_GENERATED = itertools.count(1)


def _words(sym: E.Symbol) -> tuple:
    implied = set()
    if "spd" in sym.structure:
        implied |= {"symmetric", "invertible", "square"}
    if "orthogonal" in sym.structure:
        implied |= {"invertible", "square"}
    order = (
        "symmetric", "spd", "diagonal", "lower", "positive", "orthogonal", "square", "invertible",
    )  # fmt: skip
    return tuple(w for w in order if w in sym.structure and w not in implied)


def _shape_text(shape: tuple) -> str:
    if not shape:
        return "()"
    if len(shape) == 1:
        return f"({shape[0]},)"
    return f"({shape[0]}, {shape[1]})"


def _latex_shape(shape_text: str) -> str:
    return shape_text.replace("*", r" \cdot ")


def _partial(target: str, var: str) -> str:
    return rf"\frac{{\partial {_name_latex(target)}}}{{\partial {symbol_latex(var)}}}"


def _name_latex(name: str) -> str:
    return symbol_latex(name)


def _plain_lhs(step: Step, target: str) -> str:
    if step.kind == "gradient":
        return f"∂{target}/∂{step.var}"
    if step.kind == "jacobian":
        return f"∂vec({target})/∂vec({step.var})ᵀ"
    if step.lhs_latex.startswith(r"\operatorname{vec}"):
        return f"vec(d{target})"
    return f"d{target}"


def _project(g: E.Expr, sym: E.Symbol) -> E.Expr:
    """The gradient in the space the variable lives in (symmetric or diagonal matrices)."""
    if not E.is_matrix_shape(sym.shape):
        return g
    if "diagonal" in sym.structure:
        return simplify(E.diagm(E.diag(g)))
    if "lower" in sym.structure:
        return simplify(E.tril(g))
    if sym.structure & E.SYMMETRIC_WORDS:
        if symmetric_as_is(g):  # (G + Gᵀ)/2 = G: not a second product for nothing
            return g
        return simplify(E.sym_part(g))
    return g


def _pairing(g: E.Expr, sym: E.Symbol) -> E.Expr:
    """<G, dX>: tr(Gᵀ dX) for matrices, gᵀ dx for vectors, g dx for scalars."""
    dx = E.Differential(sym)
    if sym.is_scalar:
        return E.mul(g, dx)
    if E.is_col(sym.shape):
        return E.matmul(E.transpose(g), dx)
    return E.trace(E.matmul(E.transpose(g), dx))


def _cotangent(shape) -> E.Expr:
    return E.Differential(E.Symbol("_cotangent", shape, frozenset()))
