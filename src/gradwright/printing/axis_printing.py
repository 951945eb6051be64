"""Printing reductions over an axis, softmax over an axis, maximum/minimum and the entrywise
functions of `gradwright.entrywise`: mixins for the text, LaTeX and NumPy printers.

Axes in nodes are internal (see `expr_axis`); for a matrix they are NumPy's, for a vector the
only axis is implied, so no `axis=` is printed.
"""

from __future__ import annotations

from .. import expr as E
from ..entrywise import EXTRA_ENTRYWISE

_LATEX_REDUCERS = {"max": r"\max", "min": r"\min", "logsumexp": r"\operatorname{logsumexp}"}
_LATEX_WISE = {0: r"_{\text{col-wise}}", 1: r"_{\text{row-wise}}"}


def _axis_keywords(a: E.Expr, axis, keepdims=False) -> str:
    parts = []
    if axis is not None and E.is_matrix_shape(a.shape):
        parts.append(f"axis={axis}")
    if keepdims:
        parts.append("keepdims=True")
    return "".join(", " + p for p in parts)


class TextAxisMixin:
    """Text (formula language) for the nodes of `expr_axis`: the output parses back."""

    def _print_AxisReduce(self, e):
        op, a, axis, keepdims = e.args
        return f"{op}({self._print(a)}{_axis_keywords(a, axis, keepdims)})"

    def _print_TieWeights(self, e):
        op, a, axis = e.args
        return f"{op}_weights({self._print(a)}{_axis_keywords(a, axis)})"

    def _print_AxisSoftmax(self, e):
        kind, a, axis = e.args
        # a matrix without axis= is refused (libraries disagree on it): None is written out
        given = ", axis=None" if axis is None and E.is_matrix_shape(a.shape) else ""
        return f"{kind}({self._print(a)}{_axis_keywords(a, axis)}{given})"

    def _print_Extremum(self, e):
        op, a, b = e.args
        return f"{op}({self._print(a)}, {self._print(b)})"

    def extra_func(self, e) -> str:
        return EXTRA_ENTRYWISE[e.name].text.format(self._print(e.arg))


def _wise(a: E.Expr, axis) -> str:
    return _LATEX_WISE[axis] if axis is not None and E.is_matrix_shape(a.shape) else ""


class LatexAxisMixin:
    """LaTeX: `max_row-wise(Z)`, `softmax_row-wise(Z)`, `maximum(A, B)`."""

    def _print_AxisReduce(self, e):
        op, a, axis, _keepdims = e.args
        return self.call(_LATEX_REDUCERS[op] + _wise(a, axis), a)

    def _print_TieWeights(self, e):
        op, a, axis = e.args
        return self.call(rf"\operatorname{{ties}}^{{{_LATEX_REDUCERS[op]}}}{_wise(a, axis)}", a)

    def _print_AxisSoftmax(self, e):
        kind, a, axis = e.args
        name = r"\operatorname{softmax}" if kind == "softmax" else r"\log\operatorname{softmax}"
        return self.call(name + _wise(a, axis), a)

    def _print_Extremum(self, e):
        op, a, b = e.args
        return rf"\operatorname{{{op}}}\left({self._print(a)},\, {self._print(b)}\right)"

    def extra_func(self, e) -> str:
        return EXTRA_ENTRYWISE[e.name].latex.format(self._print(e.arg))


# runtime helpers of the generated module: every one max-shifted, so logits of any size stay
# finite (the shift by the slice's maximum is the standard stable form, common practice)
AXIS_HELPERS = {
    "_gw_logsumexp_axis": """
def _gw_logsumexp_axis(a, axis, keepdims):
    m = np.max(np.real(a), axis=axis, keepdims=True)
    m = np.where(np.isfinite(m), m, 0.0)
    out = m + np.log(np.sum(np.exp(a - m), axis=axis, keepdims=True))
    return out if keepdims else np.squeeze(out, axis=axis)
""",
    "_gw_softmax_axis": """
def _gw_softmax_axis(a, axis):
    z = a - np.max(np.real(a), axis=axis, keepdims=True)  # a new array: computed in place
    np.exp(z, out=z)
    z /= np.sum(z, axis=axis, keepdims=True)
    return z
""",
    "_gw_softmax_axis_into": """
def _gw_softmax_axis_into(a, axis):
    \"\"\"softmax over an axis computed in `a`: an array of the caller nothing else reads.\"\"\"
    if type(a) is not np.ndarray or a.dtype.kind not in "fc":
        return _gw_softmax_axis(a, axis)
    a -= np.max(np.real(a), axis=axis, keepdims=True)
    np.exp(a, out=a)
    a /= np.sum(a, axis=axis, keepdims=True)
    return a
""",
    "_gw_log_softmax_axis": """
def _gw_log_softmax_axis(a, axis):
    shifted = a - np.max(np.real(a), axis=axis, keepdims=True)  # a new array
    shifted -= np.log(np.sum(np.exp(shifted), axis=axis, keepdims=True))
    return shifted
""",
    "_gw_tie_weights": """
def _gw_tie_weights(a, axis, op):
    best = (np.max if op == "max" else np.min)(a, axis=axis, keepdims=True)
    hits = (a == best).astype(float)
    return hits / np.sum(hits, axis=axis, keepdims=True)
""",
}


class NumpyAxisMixin:
    """NumPy code; `self.use(name)` adds a helper of AXIS_HELPERS or HELPERS to the module."""

    def _axis_arg(self, a, axis) -> str:
        return "None" if axis is None or not E.is_matrix_shape(a.shape) else str(axis)

    def _print_AxisReduce(self, e):
        op, a, axis, keepdims = e.args
        text = self._print(a)
        if op == "logsumexp":
            self.use("_gw_logsumexp_axis")
            return f"_gw_logsumexp_axis({text}, {self._axis_arg(a, axis)}, {bool(keepdims)})"
        return f"np.{op}({text}{_axis_keywords(a, axis, keepdims)})"

    def _print_TieWeights(self, e):
        op, a, axis = e.args
        self.use("_gw_tie_weights")
        return f'_gw_tie_weights({self._print(a)}, {self._axis_arg(a, axis)}, "{op}")'

    def _print_AxisSoftmax(self, e):
        kind, a, axis = e.args
        helper = f"_gw_{kind}_axis"
        self.use(helper)
        return f"{helper}({self._print(a)}, {self._axis_arg(a, axis)})"

    def _print_Extremum(self, e):
        op, a, b = e.args
        return f"np.{op}({self._print(a)}, {self._print(b)})"

    def extra_func(self, e) -> str:
        spec = EXTRA_ENTRYWISE[e.name]
        if spec.helper is not None:
            self.use(spec.helper[0])
        return spec.code.format(self._print(e.arg))
