"""Preferred-number series E3 … E192 (IEC 60063) as exact tables.

The tables hold the standard's mantissas as integers: two significant digits for E3 … E24
(``10`` stands for 1.0), three for E48 … E192 (``100`` stands for 1.00). They are the
standard's values, not the rounding formula 10^(i/n): E24 (and E12, E6 taken from it) keeps
the historic values 27, 30, 33, 36, 39, 43, 47 and 82, and E192 has 920 where the formula
gives 919. Every value returned is a :class:`fractions.Fraction`; inputs must be exact
(``int``, ``Fraction``, or any rational with ``numerator``/``denominator`` or ``p``/``q``),
never ``float``.

>>> values("E12", 1000, 10000)
[Fraction(1000, 1), Fraction(1200, 1), Fraction(1500, 1), Fraction(1800, 1), Fraction(2200, 1), Fraction(2700, 1), Fraction(3300, 1), Fraction(3900, 1), Fraction(4700, 1), Fraction(5600, 1), Fraction(6800, 1), Fraction(8200, 1), Fraction(10000, 1)]
>>> nearest("E24", Fraction(4990))
Fraction(5100, 1)
>>> neighbours("E96", 1234)
(Fraction(1210, 1), Fraction(1240, 1))
"""
from __future__ import annotations

from bisect import bisect_left, bisect_right
from fractions import Fraction
from numbers import Rational

from derive.errors import DeriveError

__all__ = ["SeriesError", "SERIES", "TOLERANCE", "mantissas", "values", "nearest", "neighbours"]


class SeriesError(DeriveError, ValueError):
    """An unknown series name, or a value a series lookup cannot take."""


_E24 = (10, 11, 12, 13, 15, 16, 18, 20, 22, 24, 27, 30,
        33, 36, 39, 43, 47, 51, 56, 62, 68, 75, 82, 91)

_E192 = (100, 101, 102, 104, 105, 106, 107, 109, 110, 111, 113, 114,
         115, 117, 118, 120, 121, 123, 124, 126, 127, 129, 130, 132,
         133, 135, 137, 138, 140, 142, 143, 145, 147, 149, 150, 152,
         154, 156, 158, 160, 162, 164, 165, 167, 169, 172, 174, 176,
         178, 180, 182, 184, 187, 189, 191, 193, 196, 198, 200, 203,
         205, 208, 210, 213, 215, 218, 221, 223, 226, 229, 232, 234,
         237, 240, 243, 246, 249, 252, 255, 258, 261, 264, 267, 271,
         274, 277, 280, 284, 287, 291, 294, 298, 301, 305, 309, 312,
         316, 320, 324, 328, 332, 336, 340, 344, 348, 352, 357, 361,
         365, 370, 374, 379, 383, 388, 392, 397, 402, 407, 412, 417,
         422, 427, 432, 437, 442, 448, 453, 459, 464, 470, 475, 481,
         487, 493, 499, 505, 511, 517, 523, 530, 536, 542, 549, 556,
         562, 569, 576, 583, 590, 597, 604, 612, 619, 626, 634, 642,
         649, 657, 665, 673, 681, 690, 698, 706, 715, 723, 732, 741,
         750, 759, 768, 777, 787, 796, 806, 816, 825, 835, 845, 856,
         866, 876, 887, 898, 909, 920, 931, 942, 953, 965, 976, 988)

#: series name -> mantissas of one decade, ascending (E12/E6/E3 are every 2nd/4th/8th E24
#: value, E96/E48 every 2nd/4th E192 value, as the standard builds them).
SERIES: dict[str, tuple[int, ...]] = {
    "E3": _E24[::8],
    "E6": _E24[::4],
    "E12": _E24[::2],
    "E24": _E24,
    "E48": _E192[::4],
    "E96": _E192[::2],
    "E192": _E192,
}

#: the tolerance the standard associates with each series (IEC 60063, from memory); E3 is
#: "wider than 20 %", given here as the 40 % it is usually quoted with (from memory).
TOLERANCE: dict[str, Fraction] = {
    "E3": Fraction(40, 100),
    "E6": Fraction(20, 100),
    "E12": Fraction(10, 100),
    "E24": Fraction(5, 100),
    "E48": Fraction(2, 100),
    "E96": Fraction(1, 100),
    "E192": Fraction(5, 1000),
}


def mantissas(series: str) -> tuple[int, ...]:
    """The integer mantissas of one decade of ``series``; unknown names fail closed.

    >>> mantissas("E6")
    (10, 15, 22, 33, 47, 68)
    >>> mantissas("E7")
    Traceback (most recent call last):
    ...
    derive.analyses.eseries.SeriesError: unknown E series 'E7'; known: E3, E6, E12, E24, E48, E96, E192
    """
    if not isinstance(series, str) or series.upper() not in SERIES:
        known = ", ".join(SERIES)
        raise SeriesError(f"unknown E series {series!r}; known: {known}")
    return SERIES[series.upper()]


def _scale(series: str) -> int:
    """The integer that stands for 1.0 in the series' mantissas (10 or 100)."""
    return 10 if len(mantissas(series)) <= 24 else 100


def _exact(x, what: str = "value") -> Fraction:
    """An exact positive rational from ``x``; floats and non-numbers are refused."""
    if isinstance(x, bool) or isinstance(x, float):
        raise SeriesError(f"{what} must be an exact rational, not {type(x).__name__} {x!r}")
    if isinstance(x, Rational):
        q = Fraction(x.numerator, x.denominator)
    elif hasattr(x, "p") and hasattr(x, "q"):          # flint.fmpq, sympy.Rational
        q = Fraction(int(x.p), int(x.q))
    elif hasattr(x, "numerator") and hasattr(x, "denominator"):
        q = Fraction(int(x.numerator), int(x.denominator))
    else:
        raise SeriesError(f"{what} must be an exact rational, not {type(x).__name__} {x!r}")
    if q <= 0:
        raise SeriesError(f"{what} must be positive, got {q}")
    return q


def decade(x: Fraction) -> int:
    """The integer k with 10**k <= x < 10**(k+1)."""
    k = len(str(x.numerator)) - len(str(x.denominator))
    while Fraction(10) ** k > x:
        k -= 1
    while Fraction(10) ** (k + 1) <= x:
        k += 1
    return k


def _around(series: str, x: Fraction) -> list[Fraction]:
    """The series values of x's decade and the first value of the next, ascending."""
    m, scale = mantissas(series), _scale(series)
    unit = Fraction(10) ** decade(x) / scale
    return [v * unit for v in m] + [m[0] * unit * 10]


def values(series: str, low, high) -> list[Fraction]:
    """Every value of ``series`` in any decade within the closed range [low, high].

    >>> values("E6", Fraction(1, 10), 1)
    [Fraction(1, 10), Fraction(3, 20), Fraction(11, 50), Fraction(33, 100), Fraction(47, 100), Fraction(17, 25), Fraction(1, 1)]
    >>> len(values("E96", 1, 10**6))
    577
    """
    m, scale = mantissas(series), _scale(series)
    lo, hi = _exact(low, "low"), _exact(high, "high")
    if lo > hi:
        raise SeriesError(f"empty range: low {lo} > high {hi}")
    out = []
    for k in range(decade(lo), decade(hi) + 1):
        unit = Fraction(10) ** k / scale
        out.extend(v * unit for v in m if lo <= v * unit <= hi)
    return out


def neighbours(series: str, x) -> tuple[Fraction, Fraction]:
    """The largest series value <= x and the smallest >= x (both x when x is in the series).

    >>> neighbours("E12", 5000)
    (Fraction(4700, 1), Fraction(5600, 1))
    >>> neighbours("E12", Fraction(47, 10))
    (Fraction(47, 10), Fraction(47, 10))
    >>> neighbours("E24", 95)
    (Fraction(91, 1), Fraction(100, 1))
    """
    q = _exact(x)
    row = _around(series, q)                 # row[0] <= q < row[-1]
    below = row[bisect_right(row, q) - 1]
    above = row[bisect_left(row, q)]
    return below, above


def nearest(series: str, x) -> Fraction:
    """The series value closest to x on a log scale; a tie goes to the lower value.

    x lies between ``b`` and ``a`` (its neighbours); b is nearer on a log scale when
    x/b < a/x, that is x**2 < a*b, and the geometric mean sqrt(a*b) is the tie.

    No two neighbours of any table have a product that is the square of a rational, so for
    an exact x the tie cannot happen; the rule only fixes the comparison.

    >>> nearest("E12", 4000)           # sqrt(3900*4700) = 4281.3... > 4000
    Fraction(3900, 1)
    >>> nearest("E12", 4300)
    Fraction(4700, 1)
    >>> nearest("E6", Fraction(22, 10))  # a member is its own nearest value
    Fraction(11, 5)
    """
    below, above = neighbours(series, x)
    q = _exact(x)
    return below if q * q <= below * above else above
