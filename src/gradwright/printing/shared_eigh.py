"""One symmetric eigendecomposition per matrix per generated function.

The spectral helpers of `matrix_runtime.py` each take the matrix and decompose it themselves:
a value-and-gradient of `sum(eigvalsh(S)**2)` would run `eigvalsh(S)` for the value and
`eigh(S)` again for the gradient, a Hessian-vector product four times. Where one function
needs the spectrum of the same matrix at least twice, the code computes `eigh` once
(`_eigh0 = _gw_eigh(S, ...)`) and calls variants of the helpers that take the decomposition
(`_gw_eigvalsh_vjp_of(_eigh0, g, label)`); the eigenvalues alone are `_eigh0[0]`. A matrix
decomposed only once keeps the plain helper (and `eigvalsh`, cheaper than `eigh`).

The `_of` variants are the helpers of `matrix_runtime.py` with their first line,
`w, u = _gw_eigh(a, label, ...)`, replaced by `w, u = wu`: one text, so the two never differ
in their checks and warnings.
"""

from __future__ import annotations

import ast
import re

from .. import expr as E
from .. import matrix_functions as M
from .matrix_runtime import DEPENDS as _BASE_DEPENDS
from .matrix_runtime import HELPERS as _BASE

#: node class -> (helper taking the matrix, index of the matrix among the node's args)
_SPECTRAL = {
    M.Eigvalsh: ("_gw_eigvalsh", 0),
    M.EigvalshJvp: ("_gw_eigvalsh_jvp", 0),
    M.EigvalshVjp: ("_gw_eigvalsh_vjp", 0),
    M.EigvalshVjpJvp: ("_gw_eigvalsh_vjp_jvp", 0),
    M.SpectralFrechet: ("_gw_spectral_frechet", 1),
    M.MatrixFunction: ("_gw_matrix_function", 1),
}


def _variant(name: str) -> str | None:
    """The text of `name`_of: the helper computing from a decomposition `wu`, or None when
    the helper's text does not have the expected shape (the plain helper is used then)."""
    text = _BASE.get(name, "")
    head = re.search(rf"def {name}\(([^)]*)\):", text)
    if head is None:
        return None
    params = [p.strip() for p in head.group(1).split(",")]
    if "a" not in params:
        return None
    eigh = re.compile(r"\n(\s+)w, u = _gw_eigh\(a, label, [^)]*\)\n")
    body = text[head.start() :]
    if len(eigh.findall(body)) != 1:
        return None
    params[params.index("a")] = "wu"
    out = body.replace(head.group(0), f"def {name}_of({', '.join(params)}):", 1)
    out = eigh.sub(lambda m: f"\n{m.group(1)}w, u = wu\n", out, count=1)
    if any(isinstance(n, ast.Name) and n.id == "a" for n in ast.walk(ast.parse(out))):
        return None  # the matrix is used for more than its decomposition
    prefix = text[: head.start()]  # helpers defined before it in the same text
    return prefix + out


#: the `_of` variants (added to the module's helpers by numpy_code)
HELPERS: dict = {}
DEPENDS: dict = {}
_NAMES = ("_gw_eigvalsh_jvp", "_gw_eigvalsh_vjp", "_gw_eigvalsh_vjp_jvp", "_gw_spectral_frechet")
for _name in _NAMES:
    _text = _variant(_name)
    if _text is not None:
        HELPERS[f"{_name}_of"] = _text
        DEPENDS[f"{_name}_of"] = tuple(_BASE_DEPENDS.get(_name, ()))

HELPERS["_gw_matrix_function_of"] = '''
def _gw_matrix_function_of(name, wu, label):
    """expm, logm or sqrtm of a symmetric matrix from its decomposition (w, u)."""
    w, u = wu
    if name == "expm":
        return (u * np.exp(w)) @ u.T
    if w[0] <= 0 and (name == "logm" or w[0] < 0):
        raise ValueError(
            f"{label} is not positive definite (smallest eigenvalue {w[0]:.6g}): {name} of "
            "it is not a real matrix"
        )
    return (u * (np.log(w) if name == "logm" else np.sqrt(w))) @ u.T
'''
DEPENDS["_gw_matrix_function_of"] = ()


def _matrix_of(node) -> E.Expr | None:
    entry = _SPECTRAL.get(type(node))
    if entry is None:
        return None
    a = node.args[entry[1]]
    if type(node) is M.MatrixFunction and not E.is_symmetric(a):
        return None  # a general matrix goes to SciPy, not to eigh
    return a


def shared_matrices(exprs) -> set:
    """The matrices whose spectrum at least two different nodes of `exprs` need."""
    uses: dict = {}
    for e in exprs:
        for node in E.walk(e):
            a = _matrix_of(node)
            if a is not None:
                uses.setdefault(a, set()).add(node)
    return {a for a, nodes in uses.items() if len(nodes) > 1}


def _decomposition(printer, a, what: str) -> str:
    gen = printer.gen
    name = gen.eighs.get(a)
    if name is None:
        name = f"_eigh{len(gen.eighs)}"
        gen.eighs[a] = name
        printer.use("_gw_eigh")
        printer.use("_gw_symmetric")
        line = f"    {name} = _gw_eigh({printer._print(a)}, {printer.label(a)}, {what!r})"
        gen.lines.append(line)
    return name


def attach(printer_class) -> None:
    """Wrap the NumPy printer's methods of the spectral nodes: shared decomposition where the
    function needs it twice, the plain helper otherwise."""
    for cls, (helper, at) in _SPECTRAL.items():
        plain = getattr(printer_class, f"_print_{cls.__name__}")

        def method(self, e, plain=plain, helper=helper, at=at):
            a = _matrix_of(e)
            if a is None or a not in getattr(self.gen, "eigh_shared", ()):
                return plain(self, e)
            what = "eigvalsh" if helper.startswith("_gw_eigvalsh") else e.args[0]
            wu = _decomposition(self, a, what)
            if type(e) is M.Eigvalsh:
                return f"{wu}[0]"
            variant = f"{helper}_of"
            if variant not in HELPERS:
                return plain(self, e)
            self.use(variant)
            for dep in DEPENDS[variant]:
                self.use(dep)
            args = [repr(x) if isinstance(x, str) else self._print(x) for x in e.args]
            args[at] = wu
            args.append(self.label(a))
            return f"{variant}({', '.join(args)})"

        setattr(printer_class, f"_print_{cls.__name__}", method)
