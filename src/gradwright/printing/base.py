"""Printer base: dispatch to `_print_<Class>` along the class hierarchy, declared settings.

Parentheses come from a precedence table (`precedence.py`), never from the callers.
"""

from __future__ import annotations

from fractions import Fraction

from .. import expr as E


class Printer:
    """Subclasses declare `default_settings`; unknown setting keys are refused."""

    default_settings: dict = {}

    def __init__(self, settings: dict | None = None):
        settings = dict(settings or {})
        unknown = set(settings) - set(self.default_settings)
        if unknown:
            raise TypeError(f"unknown printer settings: {', '.join(sorted(unknown))}")
        self.settings = {**self.default_settings, **settings}

    #: the largest expression (counted as a tree, shared parts as often as they occur)
    #: that a printer writes out in full; larger ones print as a short placeholder
    max_tree_size = 20_000

    def doprint(self, e: E.Expr) -> str:
        size = tree_size(e, self.max_tree_size)
        if size > self.max_tree_size:
            return self.too_large(size)
        return self._print(e)

    def too_large(self, size: int) -> str:
        return f"<expression too large to show: more than {self.max_tree_size:,} parts>"

    def _print(self, e: E.Expr) -> str:
        for cls in type(e).__mro__:
            method = getattr(self, f"_print_{cls.__name__}", None)
            if method is not None:
                return method(e)
        raise NotImplementedError(f"{type(self).__name__} cannot print {type(e).__name__}")


def join_terms(texts) -> str:
    """a + b, with a term that starts with a minus joined as a - b."""
    out = ""
    for i, text in enumerate(texts):
        if i == 0:
            out = text
        elif text.startswith("-"):
            out += " - " + text[1:]
        else:
            out += " + " + text
    return out


def chain_segments(factors) -> list[list]:
    """Split a product chain where the inner axis is the unit axis (an outer product)."""
    segments = [[factors[0]]]
    for a, b in zip(factors, factors[1:]):
        if a.shape[1] is None and b.shape[0] is None:
            segments.append([b])
        else:
            segments[-1].append(b)
    return segments


def segment_shape(seg) -> tuple:
    return (seg[0].shape[0], seg[-1].shape[1])


def split_numerator(e: E.Mul):
    """(coefficient, numerator factors, denominator factors) of a product."""
    coef = Fraction(1)
    num, den = [], []
    for f in e.args:
        if type(f) is E.Const:
            coef *= f.value
        elif type(f) is E.Power and type(f.args[1]) is E.Const and f.args[1].value < 0:
            k = -f.args[1].value
            den.append(f.args[0] if k == 1 else E.Power(f.args[0], E.Const(k)))
        else:
            num.append(f)
    return coef, num, den


def fraction_text(v: Fraction) -> str | None:
    """An exact short decimal for v when there is one, else None."""
    if v.denominator == 1:
        return str(v.numerator)
    d = v.denominator
    while d % 2 == 0:
        d //= 2
    while d % 5 == 0:
        d //= 5
    if d != 1:
        return None
    text = f"{float(v):.12g}"
    return text if Fraction(text) == v else None


def tree_size(e: E.Expr, limit: int) -> int:
    """The size of e printed as a tree (linear time on the DAG); stops counting past limit."""
    memo: dict = {}
    stack: list = [(e, False)]
    while stack:
        x, done = stack.pop()
        if done:
            kids = () if type(x) is E.Named else x.children  # definitions print by name
            memo[id(x)] = min(limit + 1, 1 + sum(memo[id(c)] for c in kids))
            continue
        if id(x) in memo:
            continue
        memo[id(x)] = 0  # in progress
        stack.append((x, True))
        if type(x) is not E.Named:
            stack.extend((c, False) for c in x.children if id(c) not in memo)
    return memo[id(e)]


#: a rational whose denominator is at most this (and not a power of ten) prints as a fraction
SMALL_DENOMINATOR = 100


def is_small_fraction(v: Fraction) -> bool:
    """True for 1/2, 2/3, 7/12: shown as a fraction (N/2), not as 0.5N or 0.6666666666666666."""
    q = v.denominator
    if q == 1 or q > SMALL_DENOMINATOR or abs(v.numerator) > 10 * SMALL_DENOMINATOR:
        return False
    while q % 10 == 0:
        q //= 10
    return q != 1


def fraction_parts(v: Fraction) -> tuple[str, int] | None:
    """(numerator text, denominator) for a positive constant best shown as a fraction:
    1/2 -> ("1", 2), 2/3 -> ("2", 3), 1.5e-7/7 -> ("1.5e-7", 7); None for a plain decimal.

    >>> fraction_parts(Fraction(3, 140000000))
    ('1.5e-7', 7)
    """
    if is_small_fraction(v):
        return str(v.numerator), v.denominator
    q = v.denominator
    while q % 2 == 0:
        q //= 2
    while q % 5 == 0:
        q //= 5
    if q == 1 or q > 10 * SMALL_DENOMINATOR:
        return None
    top = v * q  # a terminating decimal: the number as it was written, before the division
    text = number_text(top)
    return (text, q) if Fraction(text) == top else None


def number_text(v: Fraction) -> str:
    """A non-negative constant as a decimal with no more digits than it needs.

    Exact when the decimal terminates within 15 significant digits; otherwise the shortest
    text that reads back as the same float (what NumPy computes from the written literals),
    so that 0.9189385332046727 * 3 shows 2.756815599614018, never a 17-digit fraction.

    >>> number_text(Fraction(27568155996140181, 10000000000000000))
    '2.756815599614018'
    """
    if v.denominator == 1:
        return str(v.numerator)
    exact = fraction_text(v)
    if exact is None:
        text = f"{float(v):.15g}"
        exact = text if Fraction(text) == v else None
    text = exact if exact is not None else repr(float(v))
    if exact is None and significant_digits(text) > 16:  # a float holds about 16 digits
        text = f"{float(v):.16g}"
    if "e" in text or "E" in text:
        mantissa, _, exponent = text.lower().partition("e")
        return f"{mantissa}e{int(exponent)}"
    return text


def significant_digits(number: str) -> int:
    """Significant digits of a decimal literal: '0.00120' -> 3, '2.5e-3' -> 2, '300' -> 1."""
    mantissa = number.lower().split("e")[0].replace("-", "").replace("+", "")
    digits = mantissa.replace(".", "").lstrip("0")
    if "." not in mantissa:
        digits = digits.rstrip("0")
    return max(1, len(digits))
