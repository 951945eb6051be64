"""The entrywise functions beyond the first eight (exp, log, ...): how each is spelled and computed.

One table, read by the evaluator, the printers and the code generator; the derivatives live in
`calculus/rules_entrywise.py`. Names are NumPy's (SciPy's for erf, gammaln, digamma). Two
functions exist only as derivatives, with the spelling that parses back: `heaviside(x, 0.5)` (the
tie weight of maximum/minimum) and `polygamma(n, x)` for n = 1, 2, 3 (derivatives of digamma).

This module imports nothing from the rest of the package, so `expr.py` can read its names.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np


def _special(name: str):
    """A scipy.special function, imported on first use (SciPy is needed only by these)."""

    def call(x):
        import scipy.special

        return getattr(scipy.special, name)(x)

    call.__name__ = name
    return call


def _polygamma(order: int):
    def call(x):
        import scipy.special

        return scipy.special.polygamma(order, x)

    return call


@dataclass(frozen=True)
class Entrywise:
    """How one entrywise function is evaluated, printed as text, LaTeX and NumPy code.

    `text`, `latex` and `code` are templates with `{}` for the argument; `helper` names a
    function of the generated module (`_gw_...`) that `code` calls, with its source.
    """

    evaluate: object
    text: str
    latex: str
    code: str
    helper: tuple[str, str] | None = None


def _scipy_helper(name: str, call: str) -> tuple[str, str]:
    # imported inside the helper: a generated module needs SciPy only when it uses these
    return (
        f"_gw_{name}",
        f"\ndef _gw_{name}(x):\n    from scipy import special\n\n    return special.{call}\n",
    )


#: polygamma(n, x) for the orders that derivatives of gammaln reach (n = 0 is digamma)
POLYGAMMA = {1: "trigamma", 2: "tetragamma", 3: "pentagamma"}

EXTRA_ENTRYWISE: dict[str, Entrywise] = {
    "abs": Entrywise(np.abs, "abs({})", r"\left\lvert {} \right\rvert", "np.abs({})"),
    "sign": Entrywise(np.sign, "sign({})", r"\operatorname{{sign}}\left({}\right)", "np.sign({})"),
    "cosh": Entrywise(np.cosh, "cosh({})", r"\cosh\left({}\right)", "np.cosh({})"),
    "sinh": Entrywise(np.sinh, "sinh({})", r"\sinh\left({}\right)", "np.sinh({})"),
    "arctan": Entrywise(np.arctan, "arctan({})", r"\arctan\left({}\right)", "np.arctan({})"),
    "log1p": Entrywise(np.log1p, "log1p({})", r"\log\left(1 + {}\right)", "np.log1p({})"),
    "expm1": Entrywise(np.expm1, "expm1({})", r"\left(e^{{{}}} - 1\right)", "np.expm1({})"),
    "erf": Entrywise(
        _special("erf"),
        "erf({})",
        r"\operatorname{{erf}}\left({}\right)",
        "_gw_erf({})",
        _scipy_helper("erf", "erf(x)"),
    ),
    "gammaln": Entrywise(
        _special("gammaln"),
        "gammaln({})",
        r"\log\Gamma\left({}\right)",
        "_gw_gammaln({})",
        _scipy_helper("gammaln", "gammaln(x)"),
    ),
    "digamma": Entrywise(
        _special("digamma"),
        "digamma({})",
        r"\psi\left({}\right)",
        "_gw_digamma({})",
        _scipy_helper("digamma", "digamma(x)"),
    ),
    # derivatives only (their text is NumPy's/SciPy's spelling, which the language reads back)
    **{
        name: Entrywise(
            _polygamma(order),
            f"polygamma({order}, {{}})",
            r"\psi^{(" + str(order) + r")}\left({}\right)",
            f"_gw_{name}({{}})",
            _scipy_helper(name, f"polygamma({order}, x)"),
        )
        for order, name in POLYGAMMA.items()
    },
    "heaviside": Entrywise(
        lambda x: np.heaviside(x, 0.5),
        "heaviside({}, 0.5)",
        r"H\left({}\right)",
        # exactly 0, 1/2 or 1, in any array library (np.heaviside has no array-API twin)
        "(0.5 + 0.5 * np.sign({}))",
    ),
}

#: functions written in the language by a spelling of their own (see `calls_entrywise.py`)
SPELLED_APART = ("heaviside", *POLYGAMMA.values())
