"""Printers of the spectral, factorization and matrix-equation nodes (`matrix_functions.py`).

The methods are attached to the LaTeX, text and NumPy printers here, so that the family stays
in its own module; the NumPy runtime helpers are in `matrix_runtime.py`.
"""

from __future__ import annotations

from .. import expr as E
from .. import matrix_functions as M
from . import precedence as P
from . import shared_eigh
from .latex import LatexPrinter
from .matrix_runtime import DEPENDS
from .matrix_runtime import HELPERS as _RUNTIME_HELPERS
from .numpy_code import HELPERS, NumpyPrinter
from .text import TextPrinter

HELPERS.update(_RUNTIME_HELPERS)

# --- text: the formula language; internal linear maps print as calls that do not read back -------

_TEXT_NAMES = {
    M.Eigvalsh: "eigvalsh",
    M.EigvalshJvp: "eigvalsh_jvp",
    M.EigvalshVjp: "eigvalsh_vjp",
    M.EigvalshVjpJvp: "eigvalsh_vjp_jvp",
    M.TrilHalf: "tril_half",
    M.Cholesky: "cholesky",
    M.CholeskyJvp: "cholesky_jvp",
    M.CholeskyVjp: "cholesky_vjp",
    M.ExpmFrechet: "expm_frechet",
    M.ExpmFrechet2: "expm_frechet2",
    M.LogmFrechet: "logm_frechet",
    M.SolveSylvester: "solve_sylvester",
    M.SolveContinuousLyapunov: "solve_continuous_lyapunov",
    M.SolveDiscreteLyapunov: "solve_discrete_lyapunov",
}


def _text_call(self, e):
    args = [self._print(a) for a in e.args if isinstance(a, E.Expr)]
    return f"{_TEXT_NAMES[type(e)]}({', '.join(args)})"


def _text_matrix_function(self, e):
    return f"{e.args[0]}({self._print(e.args[1])})"


def _text_spectral_frechet(self, e):
    name, s, d = e.args
    return f"{name}_frechet({self._print(s)}, {self._print(d)})"


for _cls in _TEXT_NAMES:
    setattr(TextPrinter, f"_print_{_cls.__name__}", _text_call)
TextPrinter._print_MatrixFunction = _text_matrix_function
TextPrinter._print_SpectralFrechet = _text_spectral_frechet


# --- LaTeX ----------------------------------------------------------------------------------------


def _basis(self, s: E.Expr) -> str:
    """U_S: the orthonormal eigenvectors of a symmetric S (as columns, eigenvalues ascending)."""
    inner = self._print(s)
    if type(s) in (E.Symbol, E.Named):
        return rf"U_{{{inner}}}"
    return rf"U_{{\left({inner}\right)}}"


def _latex_eigvalsh(self, e):
    return self.call(r"\lambda", e.args[0])


def _latex_eigvalsh_jvp(self, e):
    s, d = e.args
    u = _basis(self, s)
    return rf"\operatorname{{diag}}\left({u}^{{\top}} {self.paren(d, P.PRODUCT + 1)} {u}\right)"


def _latex_eigvalsh_vjp(self, e):
    s, g = e.args
    u = _basis(self, s)
    return rf"{u} \operatorname{{Diag}}\left({self._print(g)}\right) {u}^{{\top}}"


def _latex_eigvalsh_vjp_jvp(self, e):
    s, g, d = e.args
    u = _basis(self, s)
    g1 = rf"\left({self._print(g)}\right)^{{[1]}}"
    inner = rf"{u}^{{\top}} {self.paren(d, P.PRODUCT + 1)} {u}"
    return rf"{u} \left({g1} \circ \left({inner}\right)\right) {u}^{{\top}}"


def _latex_tril_half(self, e):
    return rf"\Phi\left({self._print(e.args[0])}\right)"


def _latex_cholesky(self, e):
    return self.call(r"\operatorname{chol}", e.args[0])


def _latex_cholesky_jvp(self, e):
    chol, d = e.args
    el = self.paren(chol, P.POSTFIX + 1)
    sym = rf"\operatorname{{sym}}\left({self._print(d)}\right)"
    return rf"{el}\, \Phi\left({el}^{{-1}} {sym}\, {el}^{{-\top}}\right)"


def _latex_cholesky_vjp(self, e):
    chol, g = e.args
    el = self.paren(chol, P.POSTFIX + 1)
    inner = rf"{el}^{{\top}} {self.paren(g, P.PRODUCT + 1)}"
    return rf"\operatorname{{sym}}\left({el}^{{-\top}} \Phi\left({inner}\right) {el}^{{-1}}\right)"


_MATFUNC_LATEX = {"expm": r"\operatorname{expm}", "logm": r"\operatorname{logm}"}


def _latex_matrix_function(self, e):
    name, a = e.args
    if name == "sqrtm":
        return self.paren(a, P.POSTFIX + 1) + r"^{1/2}"
    return self.call(_MATFUNC_LATEX[name], a)


_DIVIDED = {"expm": r"\exp", "logm": r"\log", "sqrtm": r"\sqrt{\cdot}"}


def _latex_spectral_frechet(self, e):
    name, s, d = e.args
    u = _basis(self, s)
    f1 = rf"{_DIVIDED[name]}^{{[1]}}\left(\lambda({self._print(s)})\right)"
    inner = rf"{u}^{{\top}} {self.paren(d, P.PRODUCT + 1)} {u}"
    return rf"{u} \left({f1} \circ \left({inner}\right)\right) {u}^{{\top}}"


def _latex_expm_frechet(self, e):
    a, d = e.args
    return rf"L_{{\exp}}\left({self._print(a)}, {self._print(d)}\right)"


def _latex_expm_frechet2(self, e):
    a, d1, d2 = (self._print(x) for x in e.args)
    return rf"L^{{(2)}}_{{\exp}}\left({a}; {d1}, {d2}\right)"


def _latex_logm_frechet(self, e):
    a, d = e.args
    return rf"L_{{\log}}\left({self._print(a)}, {self._print(d)}\right)"


def _latex_sylvester(self, e):
    return r"\operatorname{sylv}\left(" + ", ".join(self._print(a) for a in e.args) + r"\right)"


def _latex_lyapunov(self, e):
    return r"\operatorname{lyap}\left(" + ", ".join(self._print(a) for a in e.args) + r"\right)"


def _latex_dlyapunov(self, e):
    return r"\operatorname{dlyap}\left(" + ", ".join(self._print(a) for a in e.args) + r"\right)"


# S^{1/2} is a superscript already
M.MatrixFunction.latex_precedence = property(
    lambda self: P.POSTFIX if self.args[0] == "sqrtm" else None
)

# the forms written as products (U ... Uᵀ, L Φ(...)) take parentheses before a superscript
for _cls in (M.EigvalshVjp, M.EigvalshVjpJvp, M.CholeskyJvp, M.SpectralFrechet):
    _cls.latex_precedence = P.PRODUCT

for _cls, _fn in {
    M.Eigvalsh: _latex_eigvalsh,
    M.EigvalshJvp: _latex_eigvalsh_jvp,
    M.EigvalshVjp: _latex_eigvalsh_vjp,
    M.EigvalshVjpJvp: _latex_eigvalsh_vjp_jvp,
    M.TrilHalf: _latex_tril_half,
    M.Cholesky: _latex_cholesky,
    M.CholeskyJvp: _latex_cholesky_jvp,
    M.CholeskyVjp: _latex_cholesky_vjp,
    M.MatrixFunction: _latex_matrix_function,
    M.SpectralFrechet: _latex_spectral_frechet,
    M.ExpmFrechet: _latex_expm_frechet,
    M.ExpmFrechet2: _latex_expm_frechet2,
    M.LogmFrechet: _latex_logm_frechet,
    M.SolveSylvester: _latex_sylvester,
    M.SolveContinuousLyapunov: _latex_lyapunov,
    M.SolveDiscreteLyapunov: _latex_dlyapunov,
}.items():
    setattr(LatexPrinter, f"_print_{_cls.__name__}", _fn)


# --- NumPy code: calls of the runtime helpers -----------------------------------------------------


def _use(self, helper: str) -> None:
    self.use(helper)
    for dep in DEPENDS.get(helper, ()):
        self.use(dep)


def _code_helper(helper: str, *, label: bool = False):
    def method(self, e):
        _use(self, helper)
        args = [repr(a) if isinstance(a, str) else self._print(a) for a in e.args]
        if label:
            args.append(self.label(e.args[0] if isinstance(e.args[0], E.Expr) else e.args[1]))
        return f"{helper}({', '.join(args)})"

    return method


def _code_matrix_function(self, e):
    name, a = e.args
    _use(self, "_gw_matrix_function")
    sym = "True" if E.is_symmetric(a) else "False"
    return f"_gw_matrix_function({name!r}, {self._print(a)}, {self.label(a)}, {sym})"


for _cls, _method in {
    M.Eigvalsh: _code_helper("_gw_eigvalsh", label=True),
    M.EigvalshJvp: _code_helper("_gw_eigvalsh_jvp", label=True),
    M.EigvalshVjp: _code_helper("_gw_eigvalsh_vjp", label=True),
    M.EigvalshVjpJvp: _code_helper("_gw_eigvalsh_vjp_jvp", label=True),
    M.TrilHalf: _code_helper("_gw_tril_half"),
    M.Cholesky: _code_helper("_gw_cholesky", label=True),
    M.CholeskyJvp: _code_helper("_gw_cholesky_jvp"),
    M.CholeskyVjp: _code_helper("_gw_cholesky_vjp"),
    M.MatrixFunction: _code_matrix_function,
    M.SpectralFrechet: _code_helper("_gw_spectral_frechet", label=True),
    M.ExpmFrechet: _code_helper("_gw_expm_frechet"),
    M.ExpmFrechet2: _code_helper("_gw_expm_frechet2"),
    M.LogmFrechet: _code_helper("_gw_logm_frechet"),
    M.SolveSylvester: _code_helper("_gw_solve_sylvester"),
    M.SolveContinuousLyapunov: _code_helper("_gw_solve_continuous_lyapunov"),
    M.SolveDiscreteLyapunov: _code_helper("_gw_solve_discrete_lyapunov"),
}.items():
    setattr(NumpyPrinter, f"_print_{_cls.__name__}", _method)

# one eigh per matrix a function needs the spectrum of twice (wraps the methods just attached)
shared_eigh.attach(NumpyPrinter)
