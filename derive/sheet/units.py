"""Numbers with SI prefixes, IEC 60062 codes and unit words, all exact; engineering format.

Everything here works on text and returns :class:`fractions.Fraction` values, so ``4.7u``
is exactly 47/10000000.  Errors are :class:`UnitError` (a :class:`~derive.errors.SheetError`
without a location); ``part`` ('number' or 'word') and ``offset`` say where in the text the
problem is, so the parser can point at it.

>>> parse_number("4k7").value
Fraction(4700, 1)
>>> parse_quantity("10", "kohm")
(Fraction(10000, 1), 'ohm')
>>> parse_quantity("4.7uF")
(Fraction(47, 10000000), 'F')
"""
from __future__ import annotations

import math
import re
from dataclasses import dataclass
from fractions import Fraction
from typing import Optional

from derive.errors import SheetError

# SI prefixes (SI Brochure, 9th edition, Table 7), the subset the sheet language accepts.
PREFIXES = {
    "f": Fraction(1, 10**15),
    "p": Fraction(1, 10**12),
    "n": Fraction(1, 10**9),
    "u": Fraction(1, 10**6),
    "\u00b5": Fraction(1, 10**6),   # MICRO SIGN
    "\u03bc": Fraction(1, 10**6),   # GREEK SMALL LETTER MU
    "m": Fraction(1, 10**3),
    "k": Fraction(10**3),
    "M": Fraction(10**6),
    "G": Fraction(10**9),
    "T": Fraction(10**12),
}

# unit words -> canonical unit
UNITS = {
    "ohm": "ohm", "ohms": "ohm", "\u03a9": "ohm", "\u2126": "ohm",
    "S": "S", "F": "F", "H": "H", "V": "V", "A": "A", "Hz": "Hz",
}

# letters of the IEC 60062 code (the letter stands for the decimal point): R for ohms,
# k M G T for resistors, p n u µ m for capacitors.
CODE_LETTERS = {"R": Fraction(1), **{k: v for k, v in PREFIXES.items() if k != "f"}}

_NUMBER_RE = re.compile(r"(\d+(?:\.\d*)?|\.\d+)([eE][+-]?\d+)?(.*)\Z", re.S)
_CODE_RE = re.compile(r"([A-Za-z\u00b5\u03bc])(\d+)(.*)\Z", re.S)
_CASE_HINTS = {"ohm": "ohm", "siemens": "S", "f": "F", "h": "H", "v": "V", "a": "A",
               "hz": "Hz", "s": "S"}


class UnitError(SheetError):
    """A bad number suffix or unit word.

    ``kind`` is 'unknown' (the text is no prefix or unit at all, e.g. the ``R`` of ``2R``)
    or 'bad' (a known mistake such as ``K`` or ``meg``).
    """

    def __init__(self, message: str, *, kind: str = "bad", part: str = "number",
                 offset: int = 0, hint: Optional[str] = None, text: str = ""):
        super().__init__(message, hint=hint)
        self.kind = kind
        self.part = part
        self.offset = offset
        self.text = text


@dataclass(frozen=True)
class Number:
    """A parsed number token.

    ``form`` is 'plain' (``4.7``), 'prefix' (``10k``), 'unit' (``5V``, ``10kohm``),
    'code' (``4k7``, ``2R2``) or 'rcode' (``47R``: an IEC code that is also a number
    followed by the name ``R``).
    """
    value: Fraction
    unit: Optional[str]
    form: str
    number_text: str
    suffix: str


def parse_decimal(text: str) -> Fraction:
    """Decimal text (``4.7``, ``.5``, ``1e-3``) as an exact fraction.

    >>> parse_decimal("4.7") * Fraction(1, 10**6) == Fraction(47, 10**7)
    True
    """
    return Fraction(text)


def _hint_for(word: str) -> tuple[str, Optional[str]]:
    """The message and hint for a word that is neither a prefix nor a unit."""
    if word.startswith("meg") or word.startswith("Meg"):
        return f"'{word[:3]}' is not an SI prefix", "use M for mega (1M, 1 Mohm)"
    if word.startswith("K"):
        return "'K' is not an SI prefix", "use k for kilo (10k, 10 kohm, 4k7)"
    low = word.lower()
    for candidate in (low, low[1:] if len(low) > 1 and word[0] in PREFIXES else None):
        if candidate and candidate in _CASE_HINTS:
            unit = _CASE_HINTS[candidate]
            pre = word[0] if candidate != low else ""
            return (f"'{word}' is not a unit",
                    f"unit words are case-sensitive: write {pre}{unit}")
    return f"'{word}' is not a unit or SI prefix", None


def split_unit(word: str, *, attached: bool) -> tuple[Fraction, Optional[str], str]:
    """Split a prefix/unit word into (factor, canonical unit or None, form).

    ``attached`` says the word was written right after the digits; only then may it be a
    prefix alone (``10k``).  Raises :class:`UnitError`.

    >>> split_unit("kohm", attached=False)
    (Fraction(1000, 1), 'ohm', 'unit')
    >>> split_unit("mS", attached=True)
    (Fraction(1, 1000), 'S', 'unit')
    """
    if word in UNITS:
        return Fraction(1), UNITS[word], "unit"
    if word in PREFIXES:
        if attached:
            return PREFIXES[word], None, "prefix"
        raise UnitError(f"'{word}' is not a unit", kind="unknown", part="word", text=word,
                        hint=f"write the prefix right after the number (10{word}), "
                             f"or give a unit ({word}ohm, {word}F, ...)")
    if len(word) > 1 and word[0] in PREFIXES and word[1:] in UNITS:
        return PREFIXES[word[0]], UNITS[word[1:]], "unit"
    message, hint = _hint_for(word)
    known = word.startswith(("K", "meg", "Meg")) or hint is not None
    raise UnitError(message, kind="bad" if known else "unknown",
                    part="number" if attached else "word", text=word, hint=hint)


def parse_number(text: str) -> Number:
    """Parse a number token: digits, optional exponent, optional suffix written after them.

    >>> parse_number("10k").value, parse_number("2R2").value, parse_number("1M5").value
    (Fraction(10000, 1), Fraction(11, 5), Fraction(1500000, 1))
    >>> parse_number("5V").unit
    'V'
    """
    m = _NUMBER_RE.match(text)
    if not m:
        raise UnitError(f"'{text}' is not a number", kind="unknown", text=text)
    digits, exponent, suffix = m.group(1), m.group(2) or "", m.group(3)
    number_text = digits + exponent
    value = parse_decimal(number_text)
    if not suffix:
        return Number(value, None, "plain", number_text, "")
    offset = len(number_text)
    code = _CODE_RE.match(suffix)
    if code and code.group(1) in CODE_LETTERS and not exponent:
        letter, tail, rest = code.groups()
        if "." in digits:
            raise UnitError(f"the resistor code '{text}' cannot have a decimal point",
                            offset=offset, text=text,
                            hint="the code letter is the decimal point: 4k7 = 4.7k")
        value = parse_decimal(f"{digits}.{tail}") * CODE_LETTERS[letter]
        unit = None
        if rest:
            if rest not in UNITS:
                message, hint = _hint_for(rest)
                raise UnitError(message, offset=offset + 1 + len(tail), text=rest, hint=hint)
            unit = UNITS[rest]
        return Number(value, unit, "code", number_text, suffix)
    if suffix == "R" and not exponent and "." not in digits:
        return Number(value, None, "rcode", number_text, suffix)
    try:
        factor, unit, form = split_unit(suffix, attached=True)
    except UnitError as e:
        e.offset, e.part = offset, "number"
        raise
    return Number(value * factor, unit, form, number_text, suffix)


def parse_quantity(number: str, word: Optional[str] = None) -> tuple[Fraction, Optional[str]]:
    """A number token and an optional separate unit word -> (exact value, canonical unit).

    >>> parse_quantity("100", "nF")
    (Fraction(1, 10000000), 'F')
    >>> parse_quantity("10k", "ohm")
    (Fraction(10000, 1), 'ohm')
    """
    n = parse_number(number)
    if word is None:
        return n.value, n.unit
    if n.form in ("unit", "rcode") or (n.form == "code" and n.unit):
        raise UnitError(f"'{word}' follows a number that already has a unit or code",
                        part="word", text=word)
    factor, unit, _ = split_unit(word, attached=False)
    if n.form in ("prefix", "code") and factor != 1:
        raise UnitError(f"two prefixes: '{n.suffix}' and '{word[0]}'", part="word", text=word)
    return n.value * factor, unit


# ------------------------------------------------------------------ design-review units
# SHEET.md section 5: the unit words of element attributes, settings, targets and bands.
# W is only known here (not in UNITS), so a resistor's value given in W stays an error and
# no symbol ever gets a unit the dimension checks do not know.
ATTRIBUTE_UNITS = {**UNITS, "W": "W"}
ROOT_HZ = ("rtHz", "\u221aHz")           # the denominators of a noise density
PPM = Fraction(1, 10**6)
KELVIN_AT_ZERO_CELSIUS = Fraction(27315, 100)   # 0 deg C = 273.15 K, exact by definition


def _split_number(text: str):
    m = _NUMBER_RE.match(text)
    if not m:
        raise UnitError(f"'{text}' is not a number", kind="unknown", text=text)
    number_text = m.group(1) + (m.group(2) or "")
    return Fraction(number_text), number_text, m.group(3)


def parse_attribute(number: str, word: Optional[str] = None,
                    per: Optional[str] = None) -> tuple[Fraction, Optional[str]]:
    """A number token, an optional unit word and an optional ``/ denominator`` -> (exact
    value, canonical unit).  Units: those of :data:`UNITS` and ``W`` with SI prefixes,
    ``ppm/K`` (a temperature coefficient, returned per kelvin as unit '1/K'), and the noise
    densities ``V/rtHz`` and ``A/rtHz`` (also ``/√Hz``; returned as 'V/rtHz', 'A/rtHz').
    Errors are :class:`UnitError` with ``part`` 'number', 'word' or 'per'.

    >>> parse_attribute("0.25", "W")
    (Fraction(1, 4), 'W')
    >>> parse_attribute("100", "ppm", "K")
    (Fraction(1, 10000), '1/K')
    >>> parse_attribute("4", "nV", "\u221aHz")
    (Fraction(1, 250000000), 'V/rtHz')
    >>> parse_attribute("10k")
    (Fraction(10000, 1), None)
    """
    value, number_text, suffix = _split_number(number)
    offset = len(number_text)
    factor = Fraction(1)
    if suffix and word is not None:
        if suffix not in PREFIXES:
            raise UnitError(f"'{word}' follows a number that already has a unit",
                            part="word", text=word)
        factor, suffix = PREFIXES[suffix], ""       # 10k W: prefix on the number
        if word[:1] in PREFIXES and word[1:] in ATTRIBUTE_UNITS:
            raise UnitError(f"two prefixes: '{number[offset:]}' and '{word[0]}'", part="word",
                            text=word)
    unit_text, part = (suffix, "number") if suffix else (word, "word")
    where = {"part": part, "offset": offset if part == "number" else 0}
    if unit_text is None:
        if per is not None:
            raise UnitError(f"'/{per}' needs a unit before it", part="per", text=per)
        return value, None
    if unit_text == "ppm":
        if per != "K":
            raise UnitError("a temperature coefficient is written in ppm/K",
                            part="per" if per else part, text=per or unit_text,
                            offset=0 if per else where["offset"],
                            hint="for example: tc 100 ppm/K (a step of 1 K is a step of 1 C)")
        return value * factor * PPM, "1/K"
    if unit_text in ATTRIBUTE_UNITS:
        scale, unit = Fraction(1), ATTRIBUTE_UNITS[unit_text]
    elif unit_text in PREFIXES and part == "number":
        scale, unit = PREFIXES[unit_text], None
    elif len(unit_text) > 1 and unit_text[0] in PREFIXES and unit_text[1:] in ATTRIBUTE_UNITS:
        scale, unit = PREFIXES[unit_text[0]], ATTRIBUTE_UNITS[unit_text[1:]]
    else:
        message, hint = _hint_for(unit_text)
        raise UnitError(message, text=unit_text, hint=hint, **where)
    value = value * factor * scale
    if per is None:
        return value, unit
    if per in ROOT_HZ and unit in ("V", "A"):
        return value, f"{unit}/rtHz"
    raise UnitError(f"'{unit_text}/{per}' is not a unit here", part="per", text=per,
                    hint="noise densities are written nV/rtHz (or nV/\u221aHz) and pA/rtHz")


def parse_temperature(number: str, word: Optional[str] = None,
                      negative: bool = False) -> Fraction:
    """A temperature in C or K (unit written after the number or attached to it) -> exact
    degrees Celsius.  ``negative`` is a minus sign written before the number.

    >>> parse_temperature("25", "C"), parse_temperature("40", "C", negative=True)
    (Fraction(25, 1), Fraction(-40, 1))
    >>> parse_temperature("300K")
    Fraction(537, 20)
    """
    value, number_text, suffix = _split_number(number)
    if negative:
        value = -value
    offset = len(number_text)
    if suffix and word is not None:
        raise UnitError(f"'{word}' follows a number that already has a unit", part="word",
                        text=word)
    unit, where = (suffix, {"part": "number", "offset": offset}) if suffix else \
        (word, {"part": "word"})
    if unit is None:
        raise UnitError("a temperature needs a unit: C (degrees Celsius) or K (kelvin)",
                        part="number", offset=offset, text=number,
                        hint="for example: temperature 25 C from -40 C to 85 C")
    if unit == "C":
        celsius = value
    elif unit == "K":
        celsius = value - KELVIN_AT_ZERO_CELSIUS
    else:
        hint = "write C for degrees Celsius or K for kelvin"
        if len(unit) > 1 and unit[0] in PREFIXES and unit[1:] in ("C", "K"):
            hint = "a temperature takes no SI prefix; " + hint
        raise UnitError(f"'{unit}' is not a temperature unit", text=unit, hint=hint, **where)
    if celsius < -KELVIN_AT_ZERO_CELSIUS:
        raise UnitError("the temperature is below absolute zero (-273.15 C, 0 K)",
                        part="number", offset=0, text=number)
    return celsius


# ------------------------------------------------------------------ formatting
_ENG_PREFIX = {-15: "f", -12: "p", -9: "n", -6: "\u00b5", -3: "m", 0: "", 3: "k", 6: "M",
               9: "G", 12: "T"}
_UNIT_SHOWN = {"ohm": "\u03a9"}


def format_eng(value, unit: Optional[str] = None, digits: int = 3) -> str:
    """``value`` in engineering notation with ``digits`` significant digits and a prefix.

    >>> format_eng(4700, 'ohm')
    '4.70 kΩ'
    >>> format_eng(0.0125, 'V')
    '12.5 mV'
    >>> format_eng(-1e-7, 'F')
    '-100 nF'
    >>> format_eng(999.96, 'Hz')
    '1.00 kHz'
    >>> format_eng(0, 'A')
    '0.00 A'
    >>> format_eng(2.2e5, None)
    '220k'
    >>> format_eng(3e20, 'V')
    '3.00e+20 V'
    """
    digits = max(int(digits), 1)
    shown_unit = _UNIT_SHOWN.get(unit, unit) if unit else ""
    x = float(value)
    sep = " " if shown_unit else ""
    if math.isnan(x) or math.isinf(x):
        return f"{x}{sep}{shown_unit}"
    if x == 0:
        return f"{0:.{digits - 1}f}{sep}{shown_unit}"
    sign = "-" if x < 0 else ""
    x = abs(x)
    # round to the significant digits first (999.96 -> 1.00e+03), then move the point
    mant_text, exp_text = f"{x:.{digits - 1}e}".split("e")
    exp10 = int(exp_text)
    exp3 = 3 * (exp10 // 3)
    if exp3 not in _ENG_PREFIX:
        return f"{sign}{mant_text}e{exp_text}{sep}{shown_unit}"
    all_digits = mant_text.replace(".", "")
    int_digits = exp10 - exp3 + 1                   # 1, 2 or 3 digits before the point
    all_digits = all_digits.ljust(int_digits, "0")
    head, tail = all_digits[:int_digits], all_digits[int_digits:]
    number = f"{head}.{tail}" if tail else head
    prefix = _ENG_PREFIX[exp3]
    unit_part = f" {prefix}{shown_unit}" if shown_unit else prefix
    return f"{sign}{number}{unit_part}"


# The number of significant figures of computed values in a record (``--digits``).
DEFAULT_DIGITS = 4
MAX_DIGITS = 15          # binary64 carries 15 to 17 significant decimal digits


def check_digits(digits) -> int:
    """``digits`` if it is a whole number from 1 to :data:`MAX_DIGITS`, else ``ValueError``.

    >>> check_digits(6)
    6
    >>> check_digits(0)
    Traceback (most recent call last):
    ...
    ValueError: the number of significant figures must be a whole number from 1 to 15, not 0
    """
    if isinstance(digits, bool) or not isinstance(digits, int) or not 1 <= digits <= MAX_DIGITS:
        raise ValueError(f"the number of significant figures must be a whole number from 1 to "
                         f"{MAX_DIGITS}, not {digits!r}")
    return digits


def format_value(value, unit: Optional[str] = None, digits: int = DEFAULT_DIGITS) -> str:
    """A computed value for a record: with a unit, engineering notation with its SI prefix
    (:func:`format_eng`); without one, plain significant figures (an exponent where the
    plain number needs one, never a bare prefix letter). ``None`` is ``'n/a'``.

    >>> format_value(0.00500499, 'V'), format_value(-0.00750250, 'V', 6)
    ('5.005 mV', '-7.50250 mV')
    >>> format_value(-0.4995, None), format_value(1, None), format_value(1.5e-7, None, 3)
    ('-0.4995', '1.000', '1.50e-07')
    >>> format_value(None), format_value(1234.6, None)
    ('n/a', '1235')
    >>> format_value(2.5e-11, 'V^2')
    '2.500e-11 V²'

    """
    if value is None:
        return "n/a"
    if isinstance(value, complex):
        if value.imag == 0:
            value = value.real
        else:
            sign = "+" if value.imag >= 0 else "-"
            return (f"{format_value(value.real, None, digits)} {sign} "
                    f"{format_value(abs(value.imag), None, digits)}j"
                    + (f" {_UNIT_SHOWN.get(unit, unit)}" if unit else ""))
    if unit and ("²" in unit or "^" in unit):      # no prefix on a squared unit (µV² is 1e-12 V²)
        return f"{float(value):.{digits - 1}e} {unit.replace('^2', '²')}"
    if unit:
        return format_eng(value, unit, digits)
    x = float(value)
    t = f"{x:#.{digits}g}"                  # keeps its trailing zeros: 1.000, like 1.000 V
    if "e" in t:                            # no bare prefix letter: 4.917e+11, not 491.7G
        return f"{x:.{digits - 1}e}"
    return t[:-1] if t.endswith(".") else t


def format_bound(value, digits: int = DEFAULT_DIGITS) -> str:
    """An upper bound (a non-negative number) with ``digits`` significant figures, rounded
    up so that it stays a bound.

    >>> format_bound(0.02240012, 2), format_bound(0.0224, 4), format_bound(0)
    ('0.023', '0.02240', '0')
    """
    from decimal import ROUND_CEILING, Decimal
    x = float(value)
    if not math.isfinite(x) or x <= 0:
        return format_value(x, None, digits) if x else "0"
    d = Decimal(repr(x))
    q = Decimal(1).scaleb(d.adjusted() - digits + 1)
    up = d.quantize(q, rounding=ROUND_CEILING)
    if up.adjusted() > d.adjusted():                    # 0.0999 -> 0.10: one digit fewer
        up = up.quantize(q.scaleb(1), rounding=ROUND_CEILING)
    t = format(up, "f") if -6 <= up.adjusted() < 15 else f"{float(up):.{digits - 1}e}"
    return t


def format_exact(value, unit: Optional[str] = None) -> str:
    """An entered (exact rational) value in engineering notation with all of its digits and
    no rounding: 350.7 ohm stays 350.7 Ω, 4.7k stays 4.7 kΩ. A value with no finite decimal
    expansion (an entered fraction such as 1/3) falls back to 4 significant figures.

    >>> format_exact(Fraction(3507, 10), 'ohm'), format_exact(Fraction(1, 10**7), 'F')
    ('350.7 Ω', '100 nF')
    >>> format_exact(Fraction(-47, 1000000), 'A'), format_exact(Fraction(1, 3), 'V')
    ('-47 µA', '333.3 mV')
    """
    q = Fraction(value)
    d = q.denominator
    for p in (2, 5):
        while d % p == 0:
            d //= p
    if d != 1 or q == 0:
        return format_eng(float(q), unit, digits=4)
    sign = "-" if q < 0 else ""
    q = abs(q)
    k = 0                                           # exact decimal digits: q = digits * 10**-k
    while (q * 10 ** k).denominator != 1:
        k += 1
    digits = str(int(q * 10 ** k))
    exp10 = len(digits) - 1 - k                     # position of the leading digit
    exp3 = 3 * (exp10 // 3)
    if exp3 not in _ENG_PREFIX:
        return format_eng(float(q) * (-1 if sign else 1), unit, digits=max(len(digits), 3))
    shift = k + exp3                                # the number is digits * 10**-shift
    if shift <= 0:
        number = digits + "0" * (-shift)
    else:
        digits = digits.rjust(shift + 1, "0")
        head, tail = digits[:-shift], digits[-shift:].rstrip("0")
        number = head + ("." + tail if tail else "")
    shown = _UNIT_SHOWN.get(unit, unit) if unit else ""
    prefix = _ENG_PREFIX[exp3]
    return f"{sign}{number} {prefix}{shown}" if shown else f"{sign}{number}{prefix}"
