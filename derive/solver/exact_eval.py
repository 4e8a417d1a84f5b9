"""Exact value of a rational sympy expression at a rational point, in python-flint ``fmpq``.

``expr.xreplace(point)`` rebuilds every node of the tree as a new sympy object (and sympy
normalises each one); for the large closed forms of a ladder that is seconds per point.
:func:`value` walks the tree once, bottom up, with exact flint rationals, sharing repeated
subtrees. It handles numbers, symbols, sums, products and integer powers -- every rational
function -- and returns None for anything else (roots, functions, floats), so callers fall
back to sympy there.

>>> import sympy
>>> a, b = sympy.symbols("a b")
>>> value(a*b/(a + b) - 1/a**2, {a: flint.fmpq(1, 2), b: flint.fmpq(3)})
-25/7
>>> value(sympy.sqrt(a), {a: flint.fmpq(4)}) is None
True
"""
from __future__ import annotations

import flint
import sympy


class _NotRational(Exception):
    pass


def fmpq_of(x) -> flint.fmpq:
    """A sympy Rational (or int / Fraction) as an fmpq."""
    if isinstance(x, flint.fmpq):
        return x
    if isinstance(x, int):
        return flint.fmpq(x)
    if hasattr(x, "numerator") and not isinstance(x, sympy.Basic):
        return flint.fmpq(int(x.numerator), int(x.denominator))
    return flint.fmpq(int(x.p), int(x.q))


def value(expr, point: dict, memo: dict | None = None):
    """Exact value of ``expr`` with ``point`` (Symbol -> fmpq/Rational/int) substituted.

    Raises ZeroDivisionError where a denominator vanishes; None when ``expr`` is not a
    rational function of its symbols or a symbol has no value."""
    memo = {} if memo is None else memo
    pt = {k: fmpq_of(v) for k, v in point.items()}
    try:
        return _val(expr, pt, memo)
    except _NotRational:
        return None


def _val(x, pt, memo):
    r = memo.get(x)
    if r is not None:
        return r
    if x.is_Symbol:
        r = pt.get(x)
        if r is None:
            raise _NotRational
    elif x.is_Rational:
        r = flint.fmpq(int(x.p), int(x.q))
    elif x.is_Add:
        r = flint.fmpq(0)
        for a in x.args:
            r += _val(a, pt, memo)
    elif x.is_Mul:
        r = flint.fmpq(1)
        for a in x.args:
            r *= _val(a, pt, memo)
    elif x.is_Pow and x.exp.is_Integer:
        b = _val(x.base, pt, memo)
        k = int(x.exp)
        if k < 0:
            if b == 0:
                raise ZeroDivisionError("a denominator vanishes")
            r = (1 / b) ** (-k)
        else:
            r = b ** k
    else:
        raise _NotRational
    memo[x] = r
    return r


def values_in_order(defs, point: dict):
    """``point`` extended by named intermediates ``defs`` ((Symbol, expr) pairs or a dict,
    each using only the names before it), evaluated exactly; None if one is not rational.
    Raises ZeroDivisionError where a denominator vanishes.

    >>> x, y = sympy.symbols("x y")
    >>> values_in_order([(y, 1/(x + 1))], {x: 1})[y]
    1/2
    """
    env = {k: fmpq_of(v) for k, v in point.items()}
    items = defs.items() if isinstance(defs, dict) else defs
    memo: dict = {}                 # shared: the intermediates repeat subtrees
    try:
        for k, e in items:
            env[k] = _val(e, env, memo)
    except _NotRational:
        return None
    return env
