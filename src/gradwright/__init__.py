"""gradwright: matrix differential calculus for the notebook.

Write a matrix formula with its shapes; get the derivation, the gradient or Jacobian, and
fast NumPy code for them.

>>> from gradwright import derive
>>> d = derive("sum((X @ w - y)**2)", wrt="w", shapes={"X": ("n", "p"), "w": ("p",), "y": ("n",)})
>>> d.gradient_function()(X=[[1.0, 0.0], [0.0, 2.0]], w=[1.0, 1.0], y=[0.0, 0.0]).tolist()
[2.0, 8.0]
"""

from __future__ import annotations

import numbers

from .derivation import Derivation, Step, SymbolInfo
from .errors import FormulaError, NotSupportedError, at_the_boundary

__all__ = [
    "Derivation",
    "FormulaError",
    "NotSupportedError",
    "Step",
    "SymbolInfo",
    "derive",
    "load_ipython_extension",
]
__version__ = "0.1.0"

#: the largest target, with its definitions written out, that derive() accepts (docs/limits.md)
MAX_EXPANDED_SIZE = 100_000


@at_the_boundary
def derive(
    text: str,
    wrt,
    *,
    shapes: dict | None = None,
    sizes: dict | None = None,
    parameterize: dict | None = None,
    warn_nonfinite: bool = False,
) -> Derivation:
    """Derive a block (or one expression with `shapes`) with respect to the variables `wrt`.

    `wrt` is a name or a list of names of declared symbols; every other symbol is a constant.
    `sizes` optionally gives typical dim sizes for the generated code's cost model.
    `parameterize` fits variables through unconstrained ones: `{"S": "cholesky"}` makes the
    variable `S_chol` (lower-triangular, S = S_chol S_cholᵀ), `{"s": "log"}` makes `log_s`
    (s = exp(log_s)); the derivation then shows the chain rule through S or s.
    `warn_nonfinite=True` makes the generated functions warn when an array result (a gradient,
    a product) has an inf or nan entry; a number result (a value) is always checked. Off by
    default, like NumPy, which propagates a nan it is given without a word: the test costs one
    BLAS call per result, which shows on small problems.
    """
    from .expr import expanded_size
    from .language import parse_block

    if isinstance(wrt, str):
        wrt_list = [w for w in wrt.replace(",", " ").split()]
    elif isinstance(wrt, (list, tuple)):
        wrt_list = list(wrt)
    else:
        raise FormulaError(f"wrt must be a name or a list of names, got {type(wrt).__name__}")
    if parameterize:
        from .parameterize import rewrite

        text, wrt_list = rewrite(text, shapes, wrt_list, parameterize)
        shapes = None
    block = parse_block(text, shapes=shapes)
    size = expanded_size(block.expr, MAX_EXPANDED_SIZE)
    if size > MAX_EXPANDED_SIZE:
        raise NotSupportedError(
            f"not supported yet: the target expands to more than {MAX_EXPANDED_SIZE:,} parts "
            "when its definitions are written out (a definition used twice counts twice); "
            "this is more than gradwright derives in a second or two"
        )
    if not wrt_list:
        raise FormulaError("name at least one variable to differentiate with respect to")
    seen = []
    for w in wrt_list:
        if not isinstance(w, str):
            raise FormulaError(f"variable names must be text, got {w!r}")
        if w in seen:
            raise FormulaError(f"variable {w} is named twice")
        if w in block.definitions:
            line = block.lines.get(w)
            src = block.text.split("\n")[line - 1] if line else None
            col = src.find(w) + 1 if src else None
            raise FormulaError(
                f"{w} is defined in the block, not declared: derivatives are taken with respect "
                "to declared symbols",
                line=line if src else None,
                column=col if src and col > 0 else None,
                source_line=src,
                width=len(w),
            )
        if w not in block.declarations:
            known = ", ".join(block.declarations) or "none"
            raise FormulaError(
                f"unknown variable {w!r}: declare it in the block (declared: {known})"
            )
        seen.append(w)
    if sizes is not None:
        if not isinstance(sizes, dict):
            raise FormulaError(
                f"sizes must be a mapping from dim names to integers, like {{'n': 1000}}, "
                f"got {type(sizes).__name__}"
            )
        checked = {}
        for k, v in sizes.items():
            if isinstance(v, bool) or not isinstance(v, numbers.Integral) or v <= 0:
                raise FormulaError(f"sizes[{k!r}] must be a positive integer, got {v!r}")
            checked[k] = int(v)
        sizes = checked
    from .complex_derivation import ComplexDerivation, is_complex_block

    kind = ComplexDerivation if is_complex_block(block) else Derivation
    out = kind(block, tuple(seen), sizes)
    out.warn_nonfinite = bool(warn_nonfinite)
    return out


def load_ipython_extension(ipython):  # pragma: no cover - exercised by the notebook tests
    """`%load_ext gradwright`."""
    from .notebook.magics import load_ipython_extension as load

    load(ipython)
