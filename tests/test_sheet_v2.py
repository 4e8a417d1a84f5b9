"""The design-review statements of SHEET.md section 5 (contract v2), parsing side: element
attributes, the temperature and derating settings, and the new requests, with their exact
model values and their located errors; and the clean refusal of the requests whose
analyses are not built yet (exit 2, FILE:LINE:COL, through the command line).

Reference values are the definitions written out by hand as exact fractions: SI prefixes
(SI Brochure, 9th edition, Table 7), 1 ppm = 1e-6, 0 deg C = 273.15 K exactly (SI
definition of the degree Celsius), 60% = 60/100.
"""
from fractions import Fraction

import pytest

import derive
from derive.cli import main
from derive.errors import SheetError
from derive.sheet.model import DEFAULT_TEMPERATURE, Loc, Quantity
from derive.sheet.parser import parse_sheet

BASE = ("voltage source Vin between top and gnd = 5 V\n"
        "resistor R1 between top and out = 10 kohm\n"
        "resistor R2 between out and gnd = 10 kohm\n"
        "current source Iq from top to gnd = 1 mA\n"
        "port out between out and gnd\n")
BASE_LINES = BASE.count("\n")


def sheet(text):
    return parse_sheet(BASE + text + "\n")


def element(line):
    return parse_sheet(line + "\n").elements[0]


def request(line):
    return sheet(line).requests[0]


def error(text, prefix=BASE):
    """The SheetError of ``prefix + text``; its line is counted within ``text`` (1-based)."""
    with pytest.raises(SheetError) as e:
        parse_sheet(prefix + text + "\n")
    err = e.value
    return err, err.line - prefix.count("\n"), err.col


def col(line, sub, nth=0):
    """1-based column of the ``nth`` occurrence of ``sub`` in ``line``."""
    at = -1
    for _ in range(nth + 1):
        at = line.index(sub, at + 1)
    return at + 1


# ------------------------------------------------------------------ element attributes
def test_resistor_rating_and_tc():
    e = element("resistor R1 between a and b = 10 kohm ±1% rated 0.25 W tc 100 ppm/K")
    assert e.value.quantity.value == 10000 and e.value.tolerance.value == Fraction(1, 100)
    assert e.power_rating == Fraction(1, 4)
    assert e.voltage_rating is None
    assert e.tc == Fraction(100, 10**6)
    assert e.noiseless is False


def test_resistor_both_ratings_in_either_order_and_attached_units():
    a = element("resistor R1 between a and b = 1k rated 0.25 W 200 V")
    b = element("resistor R1 between a and b = 1k rated 200V 250mW")
    for e in (a, b):
        assert (e.power_rating, e.voltage_rating) == (Fraction(1, 4), Fraction(200))


def test_attributes_in_any_order():
    line = "resistor R9 between x and y = 1 kohm noiseless tc -25 ppm/K rated 1 W"
    e = element(line)
    assert e.noiseless and e.tc == Fraction(-25, 10**6) and e.power_rating == 1
    assert e.attr_locs["noiseless"] == Loc(1, col(line, "noiseless"))
    assert e.attr_locs["tc"] == Loc(1, col(line, "-25"))
    assert e.attr_locs["power_rating"] == Loc(1, col(line, "1 W"))


def test_capacitor_and_inductor_voltage_rating_negative_tc():
    c = element("capacitor C1 between out and gnd = 100 nF ±10% rated 50 V tc -750 ppm/K")
    assert c.voltage_rating == 50 and c.tc == Fraction(-750, 10**6)
    assert c.value.quantity.value == Fraction(100, 10**9)
    lo = element("inductor L1 between a and b = 10 uH rated 1.5 kV")
    assert lo.voltage_rating == 1500 and lo.power_rating is None


def test_attributes_without_a_value_and_with_an_expression_value():
    e = element("resistor Rb between left and gnd rated 0.5 W")
    assert e.value is None and e.power_rating == Fraction(1, 2)
    s = parse_sheet("nominal R = 1k\nresistor R3 between a and b = 2*R tc 50 ppm/K\n")
    assert s.elements[0].value.expr is not None and s.elements[0].tc == Fraction(50, 10**6)


def test_tc_on_sources():
    e = element("voltage source Vref between r and gnd = 2.5 V tc +10 ppm/K")
    assert e.tc == Fraction(10, 10**6) and e.value.quantity.value == Fraction(5, 2)


def test_existing_values_unchanged_by_attributes():
    # the same element with and without attributes has the same value and tolerance
    a = element("resistor R1 between a and b = 4k7 ±5%")
    b = element("resistor R1 between a and b = 4k7 ±5% rated 0.1 W")
    assert a.value == b.value


def test_attribute_words_remain_usable_as_names():
    s = parse_sheet("resistor rated between tc and noise = noiseless\nport p between tc and noise\n"
                    "find vth at p\n")
    e = s.elements[0]
    assert (e.name, e.nodes, e.value.expr.name) == ("rated", ("tc", "noise"), "noiseless")


def test_opamp_noise_both_parts():
    s = parse_sheet("opamp U1 inputs p, n output o noise 4 nV/rtHz and 0.5 pA/rtHz\n")
    u = s.elements[0]
    assert u.voltage_noise == Fraction(4, 10**9)
    assert u.current_noise == Fraction(5, 10**13)


@pytest.mark.parametrize("text, v, i", [
    ("noise 4 nV/√Hz", Fraction(4, 10**9), None),
    ("noise 2 pA/rtHz", None, Fraction(2, 10**12)),
    ("noise 2pA/√Hz and 10nV/rtHz", Fraction(10, 10**9), Fraction(2, 10**12)),
    ("gain 1e5 noise 1.1 uV/rtHz", Fraction(11, 10**7), None),
    ("noise 3 nV/rtHz rout 50", Fraction(3, 10**9), None),
])
def test_opamp_noise_forms(text, v, i):
    u = parse_sheet(f"opamp U1 inputs p, n output o {text}\n").elements[0]
    assert (u.voltage_noise, u.current_noise) == (v, i)


ATTRIBUTE_ERRORS = [
    # (line, substring the error points at, nth occurrence, words in the message)
    ("resistor R1 between a and b = 1k rated 50 A", "A", 0, "in W or V, not A"),
    ("resistor R1 between a and b = 1k rated 0.25", "0.25", 0, "not a plain number"),
    ("capacitor C1 between a and b = 1n rated 0.25 W", "W", 0, "in V, not W"),
    ("inductor L1 between a and b = 1u rated 2 A", "A", 0, "in V, not A"),
    ("resistor R1 between a and b = 1k rated 1 W 2 W", "2 W", 0, "power rating"),
    ("resistor R1 between a and b = 1k rated 1 W rated 2 V", "rated", 1, "'rated' is given twice"),
    ("resistor R1 between a and b = 1k rated 0 W", "0 W", 0, "more than zero"),
    ("resistor R1 between a and b = 1k rated -1 W", "-1", 0, "more than zero"),
    ("resistor R1 between a and b = 1k tc 1 ppm/K tc 2 ppm/K", "tc", 1, "'tc' is given twice"),
    ("resistor R1 between a and b = 1k tc 100", "100", 0, "ppm/K"),
    ("resistor R1 between a and b = 1k tc 100 ppm", "ppm", 0, "ppm/K"),
    ("resistor R1 between a and b = 1k tc 100 ppm/C", "C", 0, "ppm/K"),
    ("resistor R1 between a and b = 1k tc 100 V", "V", 0, "ppm/K"),
    ("resistor R1 between a and b = 1k noiseless noiseless", "noiseless", 1, "twice"),
    ("capacitor C1 between a and b = 1n noiseless", "noiseless", 0, "for resistors"),
    ("impedance Z1 between a and b rated 1 V", "rated", 0, "takes no rating"),
    ("voltage source V1 between a and b = 1 V rated 1 W", "rated", 0, "takes no rating"),
    ("voltage source V1 between a and b = 1 V noiseless", "noiseless", 0, "for resistors"),
    ("resistor R1 between a and b = 1k rated 1 K", "K", 0, "'K' is not an SI prefix"),
    ("resistor R1 between a and b = 1k rated 1 Wx", "Wx", 0, "not a unit"),
    ("resistor R1 between a and b = 1k rated 1W W", "W", 1, "already has a unit"),
]


@pytest.mark.parametrize("line, sub, nth, words", ATTRIBUTE_ERRORS,
                         ids=range(len(ATTRIBUTE_ERRORS)))
def test_attribute_errors_are_located(line, sub, nth, words):
    err, lineno, c = error(line, prefix="")
    assert words in err.message, err.message
    assert (lineno, c) == (1, col(line, sub, nth)), err.message


def test_attribute_errors_have_hints():
    err, _, _ = error("capacitor C1 between a and b = 1n rated 0.25 W", prefix="")
    assert "rated 50 V" in err.hint
    err, _, _ = error("resistor R1 between a and b = 1k rated 5 A", prefix="")
    assert "rated 0.25 W 200 V" in err.hint
    err, _, _ = error("capacitor C1 between a and b = 1n noiseless", prefix="")
    assert err.hint


OPAMP_NOISE_ERRORS = [
    ("opamp U1 inputs p, n output o noise 4 nV/rtHz and 5 nV/rtHz", "5 nV", "two voltage"),
    ("opamp U1 inputs p, n output o noise 4 nV", "nV", "V/rtHz or A/rtHz, not V"),
    ("opamp U1 inputs p, n output o noise 4 nV/Hz", "Hz", "not a unit here"),
    ("opamp U1 inputs p, n output o noise 4 nW/rtHz", "rtHz", "not a unit here"),
    ("opamp U1 inputs p, n output o noise -4 nV/rtHz", "-4", "negative"),
    ("opamp U1 inputs p, n output o noise 4 nV/rtHz noise 1 pA/rtHz", "noise", "twice"),
]


@pytest.mark.parametrize("line, sub, words", OPAMP_NOISE_ERRORS,
                         ids=range(len(OPAMP_NOISE_ERRORS)))
def test_opamp_noise_errors(line, sub, words):
    err, lineno, c = error(line, prefix="")
    assert words in err.message, err.message
    nth = 1 if sub == "noise" else 0
    assert (lineno, c) == (1, col(line, sub, nth))


# ------------------------------------------------------------------ settings
def test_temperature_with_range():
    t = sheet("temperature 25 C from -40 C to 85 C").temperature
    assert (t.nominal, t.low, t.high) == (25, -40, 85)
    line = "temperature 25 C from -40 C to 85 C"
    assert t.nominal_loc == Loc(BASE_LINES + 1, col(line, "25"))
    assert t.range_loc == Loc(BASE_LINES + 1, col(line, "-40"))


def test_temperature_alone_is_its_own_range():
    s = sheet("temperature 40 C")
    assert (s.temperature.nominal, s.temperature.low, s.temperature.high) == (40, 40, 40)
    assert s.temperature_range == (40, 40) and s.nominal_temperature == 40


def test_temperature_in_kelvin_is_exact():
    # 0 deg C = 273.15 K by definition: 298.15 K = 25 C, 233.15 K = -40 C, 300 K = 26.85 C
    t = sheet("temperature 298.15 K from 233.15K to 358.15 K").temperature
    assert (t.nominal, t.low, t.high) == (25, -40, 85)
    t = sheet("temperature 300 K").temperature
    assert t.nominal == Fraction(2685, 100)
    t = sheet("temperature 25C from 0 K to 400 K").temperature
    assert t.low == Fraction(-27315, 100) and t.high == Fraction(400) - Fraction(27315, 100)


def test_defaults_without_settings():
    s = sheet("")
    assert s.temperature is None and s.derating is None
    assert s.nominal_temperature == DEFAULT_TEMPERATURE == 25
    assert s.temperature_range == (25, 25)
    assert s.derating_factor == 1


@pytest.mark.parametrize("text, value", [("derating 60%", Fraction(3, 5)),
                                         ("derating 100 %", Fraction(1)),
                                         ("derating 0.5%", Fraction(1, 200))])
def test_derating(text, value):
    s = sheet(text)
    assert s.derating.factor == value and s.derating_factor == value


SETTING_ERRORS = [
    ("temperature 25 C from 85 C to -40 C", "85", 0, "from low to high"),
    ("temperature 25 C from -40 C to 0 C", "25", 0, "outside the range"),
    ("temperature 100 C from -40 C to 85 C", "100", 0, "outside the range"),
    ("temperature 25", "", 0, "needs a unit"),           # just after the number
    ("temperature 25 F", "F", 0, "not a temperature unit"),
    ("temperature 25 mK", "mK", 0, "takes no SI prefix"),   # (in the hint)
    ("temperature -300 C", "-300", 0, "absolute zero"),
    ("temperature -1 K", "-1", 0, "absolute zero"),
    ("temperature 25 C/K", "K", 0, "C or K"),
    ("temperature 25C C", "C", 1, "already has a unit"),
    ("derating 0%", "0", 0, "more than 0%"),
    ("derating 120%", "120", 0, "at most 100%"),
    ("derating 60k%", "60k", 0, "plain number"),
]


@pytest.mark.parametrize("line, sub, nth, words", SETTING_ERRORS,
                         ids=range(len(SETTING_ERRORS)))
def test_setting_errors(line, sub, nth, words):
    err, lineno, c = error(line)
    assert words in err.message + " " + (err.hint or ""), err.message
    assert (lineno, c) == (1, col(line, sub, nth) if sub else len(line) + 1)


def test_derating_without_percent_points_after_the_number():
    err, lineno, c = error("derating 60")
    assert "percentage" in err.message and "derating 60%" in err.hint
    assert (lineno, c) == (1, len("derating 60") + 1)


@pytest.mark.parametrize("stmt", ["temperature 25 C", "derating 50%"])
def test_settings_at_most_once(stmt):
    err, lineno, c = error(f"{stmt}\nresistor R9 between a and b\n{stmt}")
    assert "given twice" in err.message and "line" in err.message
    assert (lineno, c) == (3, 1)


# ------------------------------------------------------------------ requests
def test_find_operating_point_and_stress():
    s = sheet("find operating point\nfind   stress")
    a, b = s.requests
    assert (a.statement, a.quantity, a.text) == ("find", "operating_point", "find operating point")
    assert (b.quantity, b.text, b.port, b.element) == ("stress", "find stress", None, None)
    assert b.loc == Loc(BASE_LINES + 2, 1)


def test_find_power_in():
    line = "find power in R1"
    r = request(line)
    assert (r.quantity, r.element, r.analysis) == ("power", "R1", None)
    assert r.name_locs["element"] == Loc(BASE_LINES + 1, col(line, "R1"))


@pytest.mark.parametrize("analysis", ["drift", "budget", "sensitivity", "tolerance"])
@pytest.mark.parametrize("phrase, fields", [
    ("vth at out", {"quantity": "vth", "port": "out"}),
    ("gain from Vin to out", {"quantity": "gain", "source": "Vin", "port": "out"}),
    ("current through R1", {"quantity": "current", "element": "R1"}),
    ("power in R1", {"quantity": "power", "element": "R1"}),
])
def test_find_analysis_of_any_quantity(analysis, phrase, fields):
    r = request(f"find {analysis} of {phrase}")
    assert r.analysis == analysis and r.text == f"find {analysis} of {phrase}"
    for k, v in fields.items():
        assert getattr(r, k) == v


def test_choose_one_symbol():
    line = "choose R2 from E96 for gain from Vin to out = 10"
    r = request(line)
    assert (r.statement, r.symbols, r.series, r.quantity, r.source, r.port) == \
        ("choose", ("R2",), "E96", "gain", "Vin", "out")
    assert r.target == Quantity(Fraction(10), None, Loc(BASE_LINES + 1, col(line, "10")))
    assert r.symbol_locs == (Loc(BASE_LINES + 1, col(line, "R2")),)
    assert r.name_locs["series"] == Loc(BASE_LINES + 1, col(line, "E96"))
    assert r.text == line


def test_choose_several_symbols_with_a_unit():
    r = request("choose R1, R2 from E24 for vth at out = 1.2 V")
    assert r.symbols == ("R1", "R2") and r.series == "E24"
    assert (r.target.value, r.target.unit) == (Fraction(6, 5), "V")
    r = request("choose R1 from E12 for current through R2 = 250 uA")
    assert (r.target.value, r.target.unit) == (Fraction(250, 10**6), "A")
    r = request("choose R1 from E6 for power in R2 = 5 mW")
    assert (r.target.value, r.target.unit) == (Fraction(5, 1000), "W")
    r = request("choose R1 from E192 for gain from Vin to out = -0.5")
    assert r.target.value == Fraction(-1, 2)
    r = request("choose R1 from E48 for gain from Iq to out = 4.7 kohm")   # current source: ohm
    assert (r.target.value, r.target.unit) == (4700, "ohm")
    r = request("choose R1 from E3 for rth at out = 2k")
    assert (r.target.value, r.target.unit) == (2000, None)


@pytest.mark.parametrize("series", ["E3", "E6", "E12", "E24", "E48", "E96", "E192"])
def test_choose_every_series(series):
    assert request(f"choose R1 from {series} for vth at out = 1").series == series


def test_find_noise():
    line = "find noise at out from 10 Hz to 100 kHz"
    r = request(line)
    assert (r.quantity, r.port, r.band) == ("noise", "out", (Fraction(10), Fraction(10**5)))
    assert r.name_locs["port"] == Loc(BASE_LINES + 1, col(line, "out"))
    r = request("find noise at out from 0 to 20k")
    assert r.band == (0, 20000)


def test_approximately():
    r = request("find gain from Vin to out approximately within 1%")
    assert (r.quantity, r.within, r.band) == ("gain", Fraction(1, 100), None)
    r = request("find impedance at out approximately within 0.5 % from 1 Hz to 1 MHz")
    assert (r.within, r.band) == (Fraction(1, 200), (Fraction(1), Fraction(10**6)))
    r = request("find power in R1 approximately within 2%")
    assert (r.quantity, r.element, r.within) == ("power", "R1", Fraction(1, 50))
    assert request("find vth at out").within is None


REQUEST_ERRORS = [
    ("choose R1 from E25 for vth at out = 1", "E25", 0, "unknown series"),
    ("choose R1 from e96 for vth at out = 1", "e96", 0, "unknown series"),
    ("choose R1, R1 from E24 for vth at out = 1", "R1", 1, "named twice"),
    ("choose s from E24 for vth at out = 1", "s", 1, "Laplace"),
    ("choose R1 from E24 for vth at out = 1 A", "A", 0, "in A but vth is in V"),
    ("choose R1 from E24 for rth at out = 1 V", "V", 0, "in V but rth is in ohm"),
    ("choose R1 from E24 for thevenin at out = 1 V", "thevenin", 0, "single quantity"),
    ("choose R1 from E24 for gain from Vin to out = 10 V", "V", 1, "plain ratio"),
    ("choose R1 from E24 for gain from Iq to out = 10 V", "V", 0, "in ohm"),
    ("find noise at out", "noise", 0, "frequency band"),
    ("find noise at out from 10 kHz to 10 Hz", "10 kHz", 0, "from low to high"),
    ("find noise at out from 10 V to 1 kHz", "V", 0, "in Hz"),
    ("find noise at out from -10 Hz to 1 kHz", "-10", 0, "negative"),
    ("find gain from Vin to out approximately within 1", "", 0, "percentage"),  # after it
    ("find gain from Vin to out approximately within 0%", "0", 0, "more than 0%"),
    ("find gain from Vin to out approximately within 100%", "100", 0, "less than 100%"),
    ("find sensitivity of vth at out approximately within 1%", "approximately", 0,
     "plain 'find'"),
    ("find gain from Vin to out approximately within 1% from 1 MHz to 1 Hz", "1 MHz", 0,
     "from low to high"),
]


@pytest.mark.parametrize("line, sub, nth, words", REQUEST_ERRORS,
                         ids=range(len(REQUEST_ERRORS)))
def test_request_errors(line, sub, nth, words):
    err, lineno, c = error(line)
    assert words in err.message, err.message
    assert (lineno, c) == (1, col(line, sub, nth) if sub else len(line) + 1)


def test_syntax_errors_in_new_statements_are_located():
    for line, sub in [("find operating", None), ("choose R1 E24 for vth at out = 1", "E24"),
                      ("find power R1", "R1")]:
        err, lineno, c = error(line)
        assert lineno == 1
        assert c == (len(line) + 1 if sub is None else col(line, sub)), (line, err.message)


def test_existing_requests_keep_their_fields():
    r = request("find sensitivity of vth at out")
    assert (r.analysis, r.quantity, r.port, r.within, r.band, r.symbols, r.target) == \
        ("sensitivity", "vth", "out", None, None, (), None)
    r = request("solve vth at out for R2")
    assert r.solve_for == "R2"


def test_circuit_elements_keep_their_attributes_through_blocks():
    from derive.circuit.build import build_circuit
    s = parse_sheet("block b (x, y)\n  resistor Rt between x and y = 1k rated 0.5 W tc 5 ppm/K\n"
                    "  opamp U inputs x, y output o noise 1 nV/rtHz\n"
                    "  resistor Rf between o and y = 1k\nend\n"
                    "use b i (a, gnd)\nvoltage source V between a and gnd = 1 V\n"
                    "port p between a and gnd\nfind vth at p\n")
    c = build_circuit(s)
    rt = c.element("i.Rt")
    assert rt.origin.power_rating == Fraction(1, 2) and rt.origin.tc == Fraction(5, 10**6)
    assert c.element("i.U").origin.voltage_noise == Fraction(1, 10**9)


# ------------------------------------------------------------------ refused cleanly (no handler)
ANSWERED = ["find operating point", "find stress", "find noise at out from 10 Hz to 100 kHz",
            "find drift of vth at out", "find budget of vth at out",
            "choose R2 from E96 for gain from Vin to out = 0.5",
            "find gain from Vin to out approximately within 1%"]


@pytest.mark.parametrize("line", ANSWERED, ids=range(len(ANSWERED)))
def test_every_design_review_request_has_a_handler(line):
    """Each request kind of section 5 finds its handler in the one table (none is refused as
    'not supported by this version')."""
    from derive.analyses import run as runner
    c = derive.circuit_of(BASE + "temperature 25 C from -40 C to 85 C\n" + line + "\n", "s.eqv")
    assert callable(runner.handler_of(c.requests[0]))


def test_v2_attributes_do_not_change_v1_results(tmp_path, capsys):
    """A v1 request on a sheet with v2 attributes and settings gives the same record."""
    plain = BASE + "find vth at out\n"
    rich = (BASE.replace("= 10 kohm\n", "= 10 kohm rated 0.25 W tc 100 ppm/K\n")
            + "temperature 25 C from -40 C to 85 C\nderating 60%\nfind vth at out\n")
    outs = []
    for i, text in enumerate((plain, rich)):
        path = tmp_path / f"s{i}.eqv"
        path.write_text(text, encoding="utf-8")
        capsys.readouterr()
        assert main(["record", str(path), "--format", "json"]) == 0
        outs.append(capsys.readouterr().out)
    import json
    a, b = (json.loads(o)["results"] for o in outs)
    assert a == b
    # the divider 5 V * R2/(R1+R2) with R1 = R2: 2.5 V (handbook voltage divider)
    assert a[0]["quantities"]["vth"]["value"] == pytest.approx(2.5)
