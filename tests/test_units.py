"""Numbers, SI prefixes, IEC 60062 codes, unit words and the engineering formatter."""
import doctest
from fractions import Fraction

import pytest
from hypothesis import given, strategies as st

from derive.sheet import units
from derive.sheet.units import PREFIXES, UnitError, format_eng, parse_number, parse_quantity, split_unit


def test_doctests():
    result = doctest.testmod(units)
    assert result.failed == 0 and result.attempted > 10


# Prefix factors from the SI Brochure, 9th edition (BIPM 2019), Table 7 (SI prefixes).
@pytest.mark.parametrize("prefix, factor", [
    ("f", Fraction(1, 10**15)), ("p", Fraction(1, 10**12)), ("n", Fraction(1, 10**9)),
    ("u", Fraction(1, 10**6)), ("\u00b5", Fraction(1, 10**6)), ("\u03bc", Fraction(1, 10**6)),
    ("m", Fraction(1, 10**3)), ("k", Fraction(10**3)), ("M", Fraction(10**6)),
    ("G", Fraction(10**9)), ("T", Fraction(10**12)),
])
def test_si_prefixes(prefix, factor):
    assert PREFIXES[prefix] == factor
    assert parse_number("3" + prefix).value == 3 * factor
    assert parse_quantity("3", prefix + "F") == (3 * factor, "F")


def test_decimal_text_is_exact():
    assert parse_number("4.7u").value == Fraction(47, 10**7)
    assert parse_number("4.7u").value == Fraction("4.7") * Fraction(1, 10**6)
    assert parse_number("0.1").value == Fraction(1, 10)
    assert parse_number("1e-3").value == Fraction(1, 1000)
    assert parse_number("2.5E3k").value == Fraction(2500000)
    assert parse_number(".5").value == Fraction(1, 2)


@pytest.mark.parametrize("text, value", [
    ("4k7", Fraction(4700)), ("2R2", Fraction(22, 10)), ("1M5", Fraction(1500000)),
    ("0R47", Fraction(47, 100)), ("4n7", Fraction(47, 10**10)), ("10k0", Fraction(10000)),
    ("1G2", Fraction(1200000000)),
])
def test_iec_60062_codes(text, value):
    n = parse_number(text)
    assert n.value == value and n.form == "code" and n.unit is None


def test_code_with_unit_and_trailing_r():
    assert parse_number("4k7ohm").value == 4700 and parse_number("4k7ohm").unit == "ohm"
    n = parse_number("47R")
    assert (n.value, n.form) == (47, "rcode")


@pytest.mark.parametrize("number, word, value, unit", [
    ("10", "kohm", Fraction(10000), "ohm"), ("10kohm", None, Fraction(10000), "ohm"),
    ("4.7", "uF", Fraction(47, 10**7), "F"), ("100", "nF", Fraction(1, 10**7), "F"),
    ("5", "V", Fraction(5), "V"), ("1", "mA", Fraction(1, 1000), "A"),
    ("2", "mS", Fraction(1, 500), "S"), ("10", "uH", Fraction(1, 10**5), "H"),
    ("350", "ohms", Fraction(350), "ohm"), ("350", "\u03a9", Fraction(350), "ohm"),
    ("350", "\u2126", Fraction(350), "ohm"), ("1", "k\u2126", Fraction(1000), "ohm"),
    ("1", "kHz", Fraction(1000), "Hz"), ("5V", None, Fraction(5), "V"),
    ("10k", "ohm", Fraction(10000), "ohm"), ("4.7", "\u00b5F", Fraction(47, 10**7), "F"),
    ("2", None, Fraction(2), None),
])
def test_quantities(number, word, value, unit):
    assert parse_quantity(number, word) == (value, unit)


def test_bad_prefixes_have_hints():
    with pytest.raises(UnitError) as e:
        parse_number("10K")
    assert e.value.message == "'K' is not an SI prefix" and "use k for kilo" in e.value.hint
    with pytest.raises(UnitError) as e:
        parse_quantity("1", "megohm")
    assert e.value.message == "'meg' is not an SI prefix" and "use M for mega" in e.value.hint
    with pytest.raises(UnitError) as e:
        parse_number("1meg")
    assert "use M for mega" in e.value.hint and e.value.offset == 1
    with pytest.raises(UnitError) as e:
        parse_quantity("10", "uf")
    assert "case-sensitive" in e.value.hint


def test_unknown_suffix_and_bare_prefix_word():
    with pytest.raises(UnitError) as e:
        parse_number("3x")
    assert e.value.kind == "unknown" and e.value.offset == 1
    with pytest.raises(UnitError) as e:
        split_unit("k", attached=False)
    assert e.value.message == "'k' is not a unit"
    with pytest.raises(UnitError):
        parse_quantity("5V", "V")
    with pytest.raises(UnitError):
        parse_number("4.7k2")


@pytest.mark.parametrize("value, unit, text", [
    (4700, "ohm", "4.70 k\u03a9"), (0.0125, "V", "12.5 mV"), (1e-7, "F", "100 nF"),
    (-2.2e-6, "H", "-2.20 \u00b5H"), (1.5, "A", "1.50 A"), (999.96, "Hz", "1.00 kHz"),
    (123456, "V", "123 kV"), (0, "V", "0.00 V"), (2.2e5, None, "220k"),
    (1e20, "V", "1.00e+20 V"),
])
def test_format_eng(value, unit, text):
    assert format_eng(value, unit) == text


def test_format_eng_digits():
    assert format_eng(4712.3, "ohm", digits=4) == "4.712 k\u03a9"
    assert format_eng(4712.3, "ohm", digits=1) == "5 k\u03a9"


@given(st.integers(min_value=1, max_value=999), st.integers(min_value=0, max_value=99),
       st.sampled_from(sorted(PREFIXES)))
def test_prefixed_decimals_exact(whole, frac, prefix):
    text = f"{whole}.{frac:02d}"
    assert parse_number(text + prefix).value == Fraction(text) * PREFIXES[prefix]


@given(st.floats(min_value=1e-14, max_value=1e14, allow_nan=False))
def test_format_eng_round_trips_within_rounding(x):
    shown = format_eng(x, "V")
    number, word = shown.split(" ")
    value, unit = parse_quantity(number, word) if word != "V" else parse_quantity(number, "V")
    assert unit == "V"
    assert abs(float(value) - x) <= 0.005 * x + 1e-300
