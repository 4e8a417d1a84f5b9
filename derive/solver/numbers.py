"""Conversions between the exact number types the pipeline meets: ``fractions.Fraction``,
python-flint ``fmpq`` and sympy ``Rational`` (never a float)."""
from __future__ import annotations

from fractions import Fraction

import flint
import sympy


def fraction_of(v) -> Fraction:
    """An exact rational (Fraction, fmpq, int, sympy Rational) as a ``Fraction``.

    >>> fraction_of(flint.fmpq(3, 4)), fraction_of(sympy.Rational(-1, 3))
    (Fraction(3, 4), Fraction(-1, 3))
    """
    if isinstance(v, Fraction):
        return v
    if isinstance(v, flint.fmpq):
        return Fraction(int(v.p), int(v.q))
    v = sympy.Rational(v)
    return Fraction(int(v.p), int(v.q))


def fmpq_of(v) -> flint.fmpq:
    """An exact rational as a python-flint ``fmpq``.

    >>> fmpq_of(Fraction(5, 2))
    5/2
    """
    v = fraction_of(v)
    return flint.fmpq(v.numerator, v.denominator)
