"""Array-API modules from the NumPy module: the same functions, computing with the arguments'
own library (NumPy, PyTorch, JAX, CuPy, Dask) through a per-call namespace object `xp`.

The NumPy printer stays the one place where formulas become code; this module rewrites its
output tree (`np.f` -> `xp.f`, helpers -> methods of `xp`, Fortran-order reshapes -> `reshape_f`)
and prepends the runtime of `xp_runtime.py`. Dense Jacobian and Hessian loops fill arrays in
place, which JAX cannot: they stay NumPy-only.
"""

from __future__ import annotations

import ast
import sys
from pathlib import Path

#: libraries a module can be written for; "array_api" dispatches on the arguments
BACKENDS = ("numpy", "array_api", "torch", "jax", "cupy", "dask")

#: functions of the NumPy module that have no array-API counterpart (they fill arrays in place)
NUMPY_ONLY_PREFIXES = ("jacobian_", "hessian_")

#: the runtime's pieces, one concern each, joined in this order into one self-contained text;
#: each piece imports only from the pieces before it (those imports vanish in the join)
RUNTIME_PIECES = (
    "xp_runtime.py",
    "xp_runtime_linalg.py",
    "xp_runtime_spectral.py",
    "xp_runtime_namespace.py",
    "xp_runtime_dims.py",
    "xp_runtime_check.py",
)


def runtime_source() -> str:
    """The text of the runtime copied into every array-API module: the first piece's docstring,
    the imports of all pieces (from outside gradwright) once, then the pieces' code in order.

    >>> "def _gw_check(" in runtime_source() and "from .xp_runtime" not in runtime_source()
    True
    """
    doc, imports, bodies = "", [], []
    for name in RUNTIME_PIECES:
        text = Path(__file__).with_name(name).read_text(encoding="utf-8")
        lines = text.split("\n")
        head_end = 0
        for stmt in ast.parse(text).body:
            if isinstance(stmt, ast.Expr) and isinstance(stmt.value, ast.Constant):
                doc = doc or "\n".join(lines[: stmt.end_lineno])  # the pieces' docstrings
            elif isinstance(stmt, ast.Import) or (
                isinstance(stmt, ast.ImportFrom) and stmt.level == 0
            ):
                line = "\n".join(lines[stmt.lineno - 1 : stmt.end_lineno])
                imports += [] if line in imports else [line]
            elif not isinstance(stmt, ast.ImportFrom):  # `from .xp_runtime ...`: dropped
                break
            head_end = stmt.end_lineno
        bodies.append("\n".join(lines[head_end:]).strip("\n"))
    stdlib = [line for line in imports if line.split()[1].split(".")[0] in sys.stdlib_module_names]
    others = [line for line in imports if line not in stdlib]
    head = "\n\n".join(["\n".join(group) for group in (stdlib, others) if group])
    return "\n\n\n".join([doc + "\n\n" + head, *bodies]) + "\n"


class _ToArrayApi(ast.NodeTransformer):
    """Rewrites one generated function for the per-call namespace `xp`."""

    def __init__(self, imported: set, modules: set):
        self.imported = imported  # names the NumPy module imports from SciPy (cho_solve, ...)
        self.modules = modules  # other modules it imports by name (scipy.linalg as ...)

    def visit_Attribute(self, node):
        root = node
        while isinstance(root, ast.Attribute):
            root = root.value
        if isinstance(root, ast.Name) and root.id in self.modules:
            # a SciPy function by its module: the library's own, or a clear refusal, via xp
            return ast.copy_location(
                ast.Attribute(ast.Name("xp", ast.Load()), node.attr, node.ctx), node
            )
        return self.generic_visit(node)

    def visit_Name(self, node):
        if node.id == "np":
            return ast.copy_location(ast.Name("xp", node.ctx), node)
        return node

    def visit_Return(self, node):
        self.generic_visit(node)

        def wrap(e):
            if isinstance(e, ast.Tuple):
                return ast.Tuple([wrap(x) for x in e.elts], ast.Load())
            if (
                isinstance(e, ast.IfExp)
                and isinstance(e.test, ast.Call)
                and getattr(e.test.func, "id", None) == "isinstance"
            ):  # the NumPy module's scalar fast path: the library's own conversion serves
                return wrap(e.orelse)
            if isinstance(e, ast.Name):  # a result that may be a Python number (a constant)
                xp = ast.Attribute(ast.Name("xp", ast.Load()), "result", ast.Load())
                return ast.Call(xp, [e], [])
            return e

        node.value = wrap(node.value)
        return node

    def visit_Try(self, node):
        # the NumPy module skips its checks when the arguments' types, shapes and dtypes repeat
        # those of the last call (a per-function cache); here the check runs on every call,
        # since it also picks the namespace
        for stmt in ast.walk(node):
            if (
                isinstance(stmt, ast.Assign)
                and isinstance(stmt.value, ast.Call)
                and isinstance(stmt.value.func, ast.Name)
                and stmt.value.func.id == "_gw_check"
            ):
                stmt.value.args = stmt.value.args[:1]
                return self.visit_Assign(stmt)
        if any(isinstance(n, ast.Name) and n.id == "_hit" for n in ast.walk(node)):
            return None  # the cache look-up of the NumPy module's fast path
        return self.generic_visit(node)

    def visit_If(self, node):
        if ast.unparse(node.test) == "_dims is None":  # the NumPy module's slow path
            return self.visit_Try(ast.Try(node.body, [], [], []))
        # `if not cmath.isfinite(v): _gw_finite(v, ...)` reads a number now: for a Dask graph or
        # a JAX trace that is wrong, so the namespace decides (gw_finite skips what is lazy)
        if any(isinstance(n, ast.Name) and n.id == "cmath" for n in ast.walk(node.test)):
            body = [self.visit(stmt) for stmt in node.body]
            test = node.test
            if isinstance(test, ast.BoolOp) and isinstance(test.values[0], ast.Name):
                node.test, node.body = test.values[0], body  # warn on arrays only when asked
                return node
            return body
        return self.generic_visit(node)

    def visit_FunctionDef(self, node):
        # the NumPy module's marker defaults and `*_gw_pos` let its slow path name a missing or
        # positional argument; here Python's own keyword-only parameters do that
        node.args.vararg = None
        node.args.kw_defaults = [
            None if isinstance(d, ast.Name) and d.id == "_GW_UNSET" else d
            for d in node.args.kw_defaults
        ]
        return self.generic_visit(node)

    def visit_Assign(self, node):
        self.generic_visit(node)
        call = node.value
        if (
            isinstance(call, ast.Call)
            and isinstance(call.func, ast.Name)
            and call.func.id == "_gw_check"
            and len(node.targets) == 1
            and isinstance(node.targets[0], ast.Tuple)
        ):
            # (a, b), _dims = _gw_check(...)  ->  (a, b), _dims, xp = _gw_check(...)
            node.targets[0].elts.append(ast.Name("xp", ast.Store()))
        elif (
            len(node.targets) == 1
            and isinstance(node.targets[0], ast.Name)
            and node.targets[0].id == "_dims"
            and isinstance(node.value, ast.Dict)
        ):
            # a function without arguments: the namespace of NumPy (or of the export's library)
            check = ast.parse("_, _dims, xp = _gw_check(())").body[0]
            return ast.copy_location(check, node)
        return node

    def visit_Call(self, node):
        self.generic_visit(node)
        f = node.func
        order_f = [k for k in node.keywords if k.arg == "order"]
        if isinstance(f, ast.Name) and f.id.startswith("_gw_") and f.id != "_gw_check":
            node.func = ast.Attribute(ast.Name("xp", ast.Load()), "gw_" + f.id[4:], ast.Load())
        elif isinstance(f, ast.Name) and f.id in self.imported:
            node.func = ast.Attribute(ast.Name("xp", ast.Load()), f.id, ast.Load())
        elif isinstance(f, ast.Attribute) and f.attr == "reshape":
            on_xp = isinstance(f.value, ast.Name) and f.value.id == "xp"
            args = list(node.args) if on_xp else [f.value, *node.args]
            if not on_xp and len(args) > 2:  # a.reshape(r, c) -> reshape(a, (r, c))
                args = [args[0], ast.Tuple(args[1:], ast.Load())]
            name = "reshape_f" if order_f and _is_f(order_f[0].value) else "reshape"
            node.func = ast.Attribute(ast.Name("xp", ast.Load()), name, ast.Load())
            node.args, node.keywords = args, [k for k in node.keywords if k.arg != "order"]
        return node


def _is_f(value) -> bool:
    return isinstance(value, ast.Constant) and value.value == "F"


def translate(numpy_source: str, backend: str = "array_api") -> str:
    """The array-API module for `backend` from the NumPy module text `numpy_source`."""
    if backend not in BACKENDS or backend == "numpy":
        raise ValueError(f"backend must be one of {', '.join(BACKENDS[1:])}, got {backend!r}")
    tree = ast.parse(numpy_source)
    imported = {
        a.asname or a.name for s in tree.body if isinstance(s, ast.ImportFrom) for a in s.names
    }
    first = tree.body[0]
    doc = ast.get_source_segment(numpy_source, first) if isinstance(first, ast.Expr) else '""""""'
    doc = doc[3:-3]  # the literal as written (its backslashes escaped), without the quotes
    functions = [
        s
        for s in tree.body
        if isinstance(s, ast.FunctionDef)
        and not s.name.startswith("_gw")
        and not s.name.startswith(NUMPY_ONLY_PREFIXES)
    ]
    modules = {
        a.asname or a.name.split(".")[0]
        for s in tree.body
        if isinstance(s, ast.Import)
        for a in s.names
        if (a.asname or a.name) not in ("np", "warnings")
    }
    rewrite = _ToArrayApi(imported, modules)
    body = [ast.fix_missing_locations(rewrite.visit(f)) for f in functions]
    library = "the arguments' library" if backend == "array_api" else backend
    doc = doc.replace("NumPy code generated by gradwright", "Code generated by gradwright", 1)
    header = (
        '"""' + doc.rstrip() + f"\n\nComputes with {library} arrays through the array API standard "
        "(array-api-compat);\nthe dense Jacobian and Hessian functions exist in the NumPy module "
        'only.\n"""'
    )
    runtime = runtime_source()
    runtime = runtime[runtime.index('"""', 3) + 3 :].lstrip("\n")  # without its own docstring
    if backend != "array_api":
        runtime = runtime.replace("_GW_BACKEND = None", f"_GW_BACKEND = {backend!r}", 1)
    table = "_gw_functions = {" + ", ".join(f'"{f.name}": {f.name}' for f in body) + "}"
    parts = [header, runtime.rstrip(), "_GW_WARN_NONFINITE = False  # see derive(warn_nonfinite=)"]
    parts += [ast.unparse(f) for f in body]
    parts.append(table)
    return "\n\n\n".join(parts) + "\n"
