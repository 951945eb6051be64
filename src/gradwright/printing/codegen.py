"""The code generator: one generated function at a time (argument checks, temporaries shared
across outputs, transposed duplicates, the in-place pass) and the whole module text. The
expressions themselves are printed by `NumpyPrinter` (numpy_code.py)."""

from __future__ import annotations

import keyword
from dataclasses import dataclass, field

from .. import expr as E
from ..complex_nodes import COMPLEX_WORDS
from .calltime import CallTimeChoice
from .checks import check_code, finite_lines
from .costmodel import CostModel
from .inplace import rewrite_function
from .numpy_code import HELPERS, NumpyPrinter, _is_square
from .shared_eigh import shared_matrices
from .structure import known_gram, known_spd


@dataclass
class Output:
    name: str  # local name of the result
    expr: E.Expr
    shape: tuple  # internal shape of the result
    what: str  # words for warnings ("the value", "the gradient of U")


@dataclass
class FunctionSpec:
    name: str
    doc: str
    outputs: list  # [Output]
    returns: str  # the return expression in terms of output names
    direction: tuple | None = None  # (param name, symbol name or None, internal shape)
    loop: str | None = None  # for dense Jacobians/Hessians: template of the body
    extra: dict = field(default_factory=dict)


class CodeGen:
    """Emits one function: argument checks, temporaries, outputs."""

    def __init__(self, symbols: dict, required: list, cost: CostModel, use_cholesky=True):
        self.symbols = symbols  # name -> Symbol (declared)
        self.required = required  # names every function requires (block order)
        self.cost = cost
        self.use_cholesky = use_cholesky
        self.helpers: set = set()
        self.uses_scipy = False
        self.temps: dict = {}
        self.directions: dict = {}
        self.lines: list[str] = []
        self.cholesky: dict = {}
        self.module_lines: list[str] = []
        #: complex blocks: directions and cotangents may be complex arrays
        self.complex_directions = False
        #: elementwise arithmetic written into the arrays the code owns (printing/inplace.py)
        self.in_place = True

    def arg_name(self, name: str) -> str:
        if keyword.iskeyword(name) or name.startswith("_"):  # pragma: no cover - parser refuses
            raise AssertionError(name)
        return name

    def cholesky_for(self, a: E.Expr, printer: NumpyPrinter) -> str:
        if type(a) is E.Transpose:  # an spd matrix is its transpose: one factor for both
            a = a.args[0]
        name = self.cholesky.get(a)
        if name is None:
            name = f"_chol{len(self.cholesky)}"
            self.cholesky[a] = name
            self.uses_scipy = True
            declared = (
                ""
                if E.is_spd(a)
                else ", False"
                if known_spd(a)
                else ", 'gram'"
                if known_gram(a)
                else ", False"
            )
            factor = f"_gw_cho({printer._print(a)}, {printer.label(a)}{declared})"
            self.lines.append(f"    {name} = {factor}")
        return name

    def signature(self, direction: str | None) -> str:
        # required arguments default to a marker: a missing or positional one is named by the
        # slow path of the argument check (see printing/checks.py), the fast path pays nothing
        req = [f"{self.arg_name(n)}=_GW_UNSET" for n in self.required]
        opt = [f"{self.arg_name(n)}=None" for n in self.symbols if n not in self.required]
        star = "*_gw_pos" if req else "*"
        params = ([direction, "/"] if direction else []) + [star] + req + opt
        if params == ["*"]:
            return ""
        return ", ".join(params)

    def spec_of(self, shape) -> str:
        dims = [d for d in shape if d is not None]
        parts = []
        for d in dims:
            parts.append(str(d.coef) if d.is_literal else repr(str(d)))
        if len(parts) == 1:
            return f"({parts[0]},)"
        return "(" + ", ".join(parts) + ")"

    def check_lines(self, direction, fname: str = "f") -> list[str]:
        """The argument checks of one function; their module-level cache goes to self.module."""
        entries = [
            (n, n, self.spec_of(self.symbols[n].shape), *_field(self.symbols[n]))
            for n in self.required
        ]
        if direction is not None:
            pname, _sym, shape = direction
            marker = ("complex",) if self.complex_directions else ()
            entries.append((_direction_label(direction), pname, self.spec_of(shape), *marker))
        self.helpers.add("_gw_check")
        keywords = (*self.required, *(n for n in self.symbols if n not in self.required))
        lead = direction[0] if direction is not None else None
        module_lines, body = check_code(fname, entries, keywords, lead)
        self.module_lines = module_lines
        return body

    def function(self, spec: FunctionSpec) -> str:
        self.temps, self.lines, self.cholesky = {}, [], {}
        # one eigh per matrix whose spectrum the function needs twice (printing/shared_eigh.py)
        self.eighs, self.eigh_shared = {}, shared_matrices(o.expr for o in spec.outputs)
        printer = NumpyPrinter(self)
        direction = spec.direction
        if direction is not None:
            pname, sym, _shape = direction
            if sym is not None:
                self.directions = {sym: pname}
        head = [f"def {spec.name}({self.signature(direction[0] if direction else None)}):"]
        head.append(f'    """{spec.doc}"""')
        head += self.check_lines(direction, spec.name)
        exprs = [o.expr for o in spec.outputs]
        shared = _shared_nodes(exprs)
        counter = [0]

        def temp_name(node):
            if type(node) is E.Named and node.name not in self.symbols:
                base = node.name
                if base in self.temps.values() or base in self.required:
                    base = f"{base}_{counter[0]}"
                return base
            counter[0] += 1
            return f"_t{counter[0]}"

        visited: set = set()

        def remember(node, name):
            self.temps[node] = name
            # (AB)ᵀ and BᵀAᵀ are one computation: the transposed form reads the temporary
            if E.is_matrix_shape(node.shape) and type(node) not in (E.Symbol, E.Transpose):
                flipped = E.transpose(node)
                if flipped != node and flipped not in self.temps:
                    self.temps[flipped] = f"{name}.T"

        def emit(node):
            if id(node) in visited:
                return
            visited.add(id(node))
            if type(node) is E.Named and node.name not in self.symbols:
                body = node.body  # a definition is one temporary under its own name
                visited.add(id(body))
                for c in body.children:
                    emit(c)
                if node not in self.temps:
                    known = self.temps.get(body)
                    if known is None:
                        known = temp_name(node)
                        self.lines.append(f"    {known} = {printer._print(body)}")
                        remember(body, known)
                    remember(node, known)
                return
            for c in node.children:
                emit(c)
            if node in shared and node not in self.temps:
                text = printer._print(node)
                name = temp_name(node)
                self.lines.append(f"    {name} = {text}")
                remember(node, name)

        for o in spec.outputs:
            emit(o.expr)
            text = printer._print(o.expr)
            self.lines.append(f"    {o.name} = {text}")
            self.helpers.add("_gw_finite")
            self.lines += finite_lines(o.name, o.shape, o.what)
        tail = [spec.loop] if spec.loop else []
        tail.append(f"    return {spec.returns}")
        if self.in_place:  # arithmetic written into the arrays this function owns
            known = [(n, s.shape) for n, s in self.symbols.items()]
            known += [(v, k.shape) for k, v in self.temps.items() if "." not in v]
            known += [(o.name, o.shape) for o in spec.outputs]
            if direction is not None:  # the direction or cotangent parameter
                known.append((direction[0], direction[2]))
            scalars = {n for n, shape in known if E.is_scalar_shape(shape)}
            # a new vector is cheaper than a helper call: operations whose result is a vector
            # keep the plain operators (per operation, so a matrix inside a vector line is not)
            ndims = {n: 2 - [d is None for d in shape].count(True) for n, shape in known}
            self.lines, used = rewrite_function(self.lines, "\n".join(tail), scalars, ndims)
            self.helpers.update(used)
        body = head + self.lines + tail
        self.directions = {}
        return "\n".join([*self.module_lines, "", ""] * bool(self.module_lines) + body)


def _field(sym) -> tuple:
    """The marker that lets a complex-declared symbol take complex arrays."""
    return ("complex",) if sym.structure & COMPLEX_WORDS else ()


def _direction_label(direction) -> str:
    pname, sym, _shape = direction
    if pname == "_direction":
        return f"the direction d{sym}" if sym else "the direction"
    return "the cotangent (shaped like the target)"


def _shared_nodes(exprs) -> set:
    """Nodes worth a temporary: used more than once, or definitions of the block."""
    count: dict = {}
    stack = list(exprs)
    visited: set = set()
    for e in exprs:
        count[e] = count.get(e, 0)
    inside: set = set()  # below a call-time choice: computed only if its branch is taken
    parent: dict = {}
    while stack:
        x = stack.pop()
        if x in visited:
            continue
        visited.add(x)
        if type(x) is CallTimeChoice:
            inside.update(n for c in x.children for n in E.walk(c))
            continue
        for c in x.children:
            count[c] = count.get(c, 0) + 1
            parent[c] = x
            if c not in visited:
                stack.append(c)
        if type(x) is E.Sum and _is_square(x.args[0]) and not x.args[0].is_scalar:
            # printed as a product with itself
            base = x.args[0].args[0]
            count[base] = count.get(base, 0) + 1
    out = set()
    for node, k in count.items():
        if _trivial(node):
            continue
        if type(node) is E.Named or k > 1 or node in inside:
            out.add(node)
    # a node whose transpose is used too is one computation (the other reads `name.T`)
    flippable = [
        x
        for x in count
        if type(x) in (E.Add, E.Mul, E.MatMul, E.Func, E.Power)
        and E.is_matrix_shape(x.shape)
        and x not in out
    ]
    if len(flippable) <= MAX_FLIP_CHECKS:
        flipped = {x for x in flippable if E.transpose(x) in count}
        # only the outermost of them: the inner ones are computed once inside it anyway
        out.update(x for x in flipped if parent.get(x) not in flipped and parent.get(x) not in out)
    return out


#: transposed duplicates are looked for only among this many candidate nodes (bounded work)
MAX_FLIP_CHECKS = 400


def _trivial(node) -> bool:
    t = type(node)
    if t in (E.Symbol, E.Const, E.Differential, E.Identity, E.Ones, E.Zero, E.SizeOf, E.Pi):
        return True
    if t is E.Transpose and type(node.args[0]) in (E.Symbol, E.Named):
        return True
    if t is E.Mul and len(node.args) == 2 and type(node.args[0]) is E.Const:
        return type(node.args[1]) in (E.Symbol,)
    return False


def module(header: str, functions: list[str], helpers: set, uses_scipy: bool) -> str:
    """The whole generated module text (runs with NumPy; SciPy is imported on the first call
    that factors an spd matrix)."""
    lines = [header, "import cmath", "import warnings", "", "import numpy as np"]
    lines.append("")
    if any(h.startswith("_gw_cho") for h in helpers):  # the LAPACK look-up they all use
        helpers = {*helpers, "_gw_lapack"}
    for name in sorted(helpers):
        lines.append(HELPERS[name].rstrip())
        lines.append("")
    names = []
    for f in functions:
        lines.append("")
        lines.append(f)
        lines.append("")
        at = f.index("def ") + 4
        names.append(f[at : f.index("(", at)])
    # the dense Jacobian and Hessian loops call the products through this table, so that no
    # user symbol of the same name can shadow them
    lines.append("")
    lines.append("_gw_functions = {" + ", ".join(f'"{n}": {n}' for n in names) + "}")
    return "\n".join(lines).rstrip() + "\n"
