"""The standard simplifications a reader expects in a result, each keeping values equal.

exp(a) / (1 + exp(a))  ->  sigmoid(a)      (the logistic loss's gradient reads σ(η) − y)
2 sigmoid(2u) - 1      ->  tanh(u)
"""

from __future__ import annotations

from fractions import Fraction

from . import expr as E


def _one_plus_exp(e: E.Expr):
    """a for `1 + exp(a)`, else None."""
    if type(e) is not E.Add or len(e.args) != 2:
        return None
    ones = [t for t in e.args if type(t) is E.Const and t.value == 1]
    exps = [t for t in e.args if type(t) is E.Func and t.name == "exp"]
    return exps[0].arg if ones and exps else None


def _logistic(m: E.Mul) -> E.Expr:
    fs = list(m.args)
    for i, f in enumerate(fs):
        if not (type(f) is E.Power and f.args[1] == E.Const(-1)):
            continue
        a = _one_plus_exp(f.args[0])
        if a is None or E.Func("exp", a) not in fs:
            continue
        j = fs.index(E.Func("exp", a))
        rest = [x for k, x in enumerate(fs) if k not in (i, j)]
        return E.mul(*rest, E.Func("sigmoid", a))
    return m


def _twice_sigmoid(t: E.Expr):
    """u for `2 sigmoid(2u)`, else None."""
    if type(t) is not E.Mul or len(t.args) != 2 or t.args[0] != E.Const(2):
        return None
    f = t.args[1]
    if type(f) is not E.Func or f.name != "sigmoid":
        return None
    c, rest = E.split_coef(f.arg)
    if c != 2 or rest is None:
        return None
    return rest


def _tanh(s: E.Add) -> E.Expr:
    terms = list(s.args)
    for i, t in enumerate(terms):
        u = _twice_sigmoid(t)
        if u is None:
            continue
        for j, c in enumerate(terms):
            if type(c) is E.Const and c.value == Fraction(-1):
                rest = [x for k, x in enumerate(terms) if k not in (i, j)]
                return E.add(*rest, E.Func("tanh", u)) if rest else E.Func("tanh", u)
    return s


def standard_form(e: E.Expr) -> E.Expr:
    """One node rewritten to its standard form (children already simplified).

    >>> a = E.Symbol("a", E.SCALAR)
    >>> standard_form(E.mul(E.Func("exp", a), E.power(E.add(E.ONE, E.Func("exp", a)), E.Const(-1))))
    Func(sigmoid,Symbol(a,(_,_),{}))
    """
    if type(e) is E.Mul:
        return _logistic(e)
    if type(e) is E.Add:
        return _tanh(e)
    return e
