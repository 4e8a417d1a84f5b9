"""The element-kind and quantity tables (derive/sheet/kinds.py, derive/sheet/quantities.py):
every kind and quantity the package uses is in them, they agree with SHEET.md, and every
consumer refuses a kind or quantity that is not in them (at the table, never silently)."""
from __future__ import annotations

import ast
import cmath
import re
from pathlib import Path
from types import SimpleNamespace

import pytest
import sympy

from derive.analyses.run import Context, HANDLERS, Options   # first: it loads the handlers
from derive.analyses import inversion, sensitivity
from derive.analyses.sections import MODEL, PARAMS
from derive.circuit import dimensions, topology
from derive.circuit.build import S, SymbolInfo, build_circuit
from derive.circuit.requests import check_requests
from derive.derivation import nodal_steps
from derive.errors import DeriveError, SheetError
from derive.export import view
from derive.export.printing import latex_name
from derive.forms import elimination, select, series_parallel
from derive.sheet import kinds, parser, quantities
from derive.sheet.kinds import KINDS, UnknownKind
from derive.sheet.parser import parse_sheet
from derive.sheet.quantities import QUANTITIES, UnknownQuantity
from derive.solver.stamping import System

ROOT = Path(__file__).resolve().parent.parent
PKG = ROOT / "derive"
GRAMMAR = (ROOT / "grammar" / "sheet.lark").read_text(encoding="utf-8")
SHEET_MD = Path("/work/shared/SHEET.md")

DIVIDER = """voltage source V1 between a and gnd = 10 V
resistor R1 between a and b = 1 kohm
resistor R2 between b and gnd = 1 kohm
capacitor C1 between b and gnd = 1 uF
port out between b and gnd
find thevenin at out
"""


def _circuit(text=DIVIDER):
    return build_circuit(parse_sheet(text))


def _with_fake_kind(name="R2", fake="transistor"):
    c = _circuit()
    c.element(name).kind = fake
    return c


# ------------------------------------------------------------------ the tables themselves
def test_unknown_kind_and_quantity_raise_at_the_table():
    with pytest.raises(UnknownKind, match="'transistor'"):
        kinds.kind("transistor")
    with pytest.raises(UnknownQuantity, match="'flux'"):
        quantities.quantity("flux")
    # the table's errors are DeriveErrors (the command line reports them) and KeyErrors
    for exc in (UnknownKind, UnknownQuantity):
        assert issubclass(exc, DeriveError) and issubclass(exc, KeyError)
    assert str(UnknownKind("unknown element kind 'x'")) == "unknown element kind 'x'"
    with pytest.raises(UnknownKind):
        kinds.impedance("transistor", sympy.Symbol("R"), S)
    with pytest.raises(UnknownKind):
        kinds.admittance("transistor", sympy.Symbol("R"), S)
    with pytest.raises(UnknownQuantity):
        quantities.accepts("sensitivity", "flux")
    with pytest.raises(UnknownQuantity):
        quantities.accepts("astrology", "vth")


def test_every_kind_is_described_consistently():
    for k in KINDS.values():
        assert k.stamp in ("admittance", "branch", "current", "nullor"), k
        assert k.immittance in (None, "impedance", "admittance"), k
        # a passive kind stamps as an admittance or as a branch with v = Z i, never as a
        # branch with an admittance value (the solver has no such stamp)
        if k.stamp == "branch" and k.passive:
            assert k.immittance == "impedance", k
        if k.source is not None:
            assert not k.passive and k.gain_unit is not None, k
        # reactive exactly where the value goes with s, or the kind is a general Z(s)/Y(s)
        if k.s_power:
            assert k.reactive, k
        assert k.terminals == (3 if k.stamp == "nullor" else 2), k


def test_impedance_and_admittance_in_s_match_the_handbook_forms():
    # Z_R = R, Z_L = jωL, Z_C = 1/(jωC), G = 1/R (any circuits handbook; from memory)
    w = 2 * cmath.pi * 1000
    s = 1j * w
    R, L, C, G = 470.0, 1e-3, 1e-6, 2e-3
    assert kinds.impedance("resistor", R, s) == R
    assert kinds.impedance("inductor", L, s) == pytest.approx(1j * w * L)
    assert kinds.impedance("capacitor", C, s) == pytest.approx(1 / (1j * w * C))
    assert kinds.impedance("conductance", G, s) == pytest.approx(1 / G)
    assert kinds.admittance("capacitor", C, s) == pytest.approx(1j * w * C)
    assert kinds.admittance("inductor", L, s) == pytest.approx(1 / (1j * w * L))
    for name in ("impedance", "admittance", "resistor", "conductance", "capacitor", "inductor"):
        z, y = kinds.impedance(name, 3.0, s), kinds.admittance(name, 3.0, s)
        assert z * y == pytest.approx(1)
    for name in ("vsource", "isource", "nullor"):
        assert kinds.impedance(name, 3.0, s) is None and kinds.admittance(name, 3.0, s) is None


# ------------------------------------------------------------------ agreement with SHEET.md
def _sheet_md():
    if not SHEET_MD.exists():
        pytest.skip("SHEET.md (the interface contract) is not available here")
    return SHEET_MD.read_text(encoding="utf-8")


def test_kind_units_agree_with_sheet_md():
    text = _sheet_md()
    section2 = text[text.index("## 2. Statements"):text.index("### Directions and signs")]
    words = {"voltage source": "vsource", "current source": "isource"}
    seen = {}
    pattern = re.compile(r"^(resistor|conductance|capacitor|inductor|voltage source|"
                         r"current source)\s+\w+ .*?= ([0-9.]+) ?([a-zA-Zµμ]+)", re.M)
    for word, _num, unit in pattern.findall(section2):
        kind = words.get(word, word)
        # strip an SI prefix (SHEET.md section 2: f p n u µ μ m k M G T)
        base = unit if unit in ("ohm", "S", "F", "H", "V", "A") else unit[1:]
        seen[kind] = base
    # every written example value is in the unit of its kind's table entry
    assert set(seen) == {"resistor", "conductance", "capacitor", "inductor", "vsource",
                         "isource"}
    for kind, unit in seen.items():
        assert kinds.kind(kind).unit == unit, kind
    # SHEET.md gives impedance and admittance no example value: Z in ohm, Y in siemens
    # (common practice, no source)
    assert kinds.kind("impedance").unit == "ohm" and kinds.kind("admittance").unit == "S"
    # "Capacitors, inductors, impedances and admittances make results functions of ... s"
    reactive = {k.name for k in KINDS.values() if k.reactive}
    assert reactive == {"capacitor", "inductor", "impedance", "admittance"}
    assert "Capacitors, inductors, impedances and admittances make results functions" in text


def test_ratings_and_noise_agree_with_sheet_md_section_5():
    text = _sheet_md()
    # "`rated P W` (resistors: power) or `rated V V` (capacitors, inductors: voltage across;
    # resistors may give both"
    assert "`rated P W` (resistors: power) or `rated V V` (capacitors, inductors" in text
    rated = {k.name: set(k.rating_units) for k in KINDS.values() if k.rating_units}
    assert rated == {"resistor": {"W", "V"}, "capacitor": {"V"}, "inductor": {"V"}}
    # "every resistor (unless `noiseless`) contributes thermal noise 4kTR"
    assert "every resistor (unless `noiseless`) contributes thermal noise" in text
    # a conductance is a resistor written as 1/R: thermal noise 4kTG; a general impedance or
    # admittance has no noise model ('unknown': find noise refuses it unless 'noiseless')
    assert {k.name: k.noise for k in KINDS.values() if k.noise} == {
        "resistor": "thermal", "conductance": "thermal", "impedance": "unknown",
        "admittance": "unknown"}


def test_quantities_agree_with_sheet_md():
    text = _sheet_md()
    table = text[text.index("| quantity | meaning |"):text.index("Each result is reported")]
    words = set(re.findall(r"^\| `(\w+)", table, re.M))
    words |= set(re.findall(r"`(\w+) at P`", table))
    words |= set(re.findall(r"/ `(\w+) at P`", table))
    assert {"thevenin", "norton", "vth", "rth", "isc", "resistance", "impedance", "voltage",
            "current", "gain", "model", "twoport"} <= words
    for w in words:
        assert quantities.quantity(w).family in ("basic", "section"), w
    sentence = text[text.index("Each result is reported"):text.index("In `solve Q")]
    for name in re.findall(r"`(\w+)`", sentence):
        assert name in QUANTITIES, name
    # the pairs of SHEET.md section 2
    assert quantities.members("thevenin") == ("vth", "rth")
    assert quantities.members("norton") == ("isc", "rn")
    assert quantities.members("model") == ("rin", "gain", "rout")
    # "find power in R1" ... "unit": "W" (section 5); vth in V and rth in ohm (section 4)
    assert '"power": {"expr": "...", "value": 0.0025, "unit": "W"}' in text
    assert quantities.unit("power") == "W"
    assert quantities.unit("vth") == "V" and quantities.unit("rth") == "ohm"
    for name in re.findall(r"`(z11|y11|h11|a) ", table):
        assert name in QUANTITIES


def test_result_names_agree_with_the_section_tables():
    for name, row in PARAMS.items():
        assert quantities.unit(name) == row[3], name
    assert set(quantities.members("twoport")) == set(PARAMS)
    for name in ("rin", "rout"):
        assert quantities.unit(name) == MODEL[name][3]


# ------------------------------------------------------------------ every use is in the table
# `.kind` is also the field of ring variables, controls, steps and symbols; their words are
# not element kinds
_OTHER_KIND_WORDS = {"recip", "expr", "src", "across", "through", "param", "model", "twoport",
                     "opamp-gain", "nominal", "element", "opamp", "use",
                     "unknown"}   # UnitError.kind


def _literals(node):
    if isinstance(node, ast.Constant) and isinstance(node.value, str):
        return [node.value]
    if isinstance(node, (ast.Tuple, ast.List, ast.Set)):
        return [x for e in node.elts for x in _literals(e)]
    return []


def _compared_with(attr):
    """String literals compared with ``X.attr`` anywhere in the package."""
    out = set()
    for f in PKG.rglob("*.py"):
        for node in ast.walk(ast.parse(f.read_text(encoding="utf-8"))):
            if isinstance(node, ast.Compare):
                sides = [node.left] + node.comparators
                if any(isinstance(x, ast.Attribute) and x.attr == attr for x in sides):
                    for x in sides:
                        out |= {(v, f.name) for v in _literals(x)}
    return out


def _grammar_words(rule):
    line = re.search(rf"^{rule}: (.*)$", GRAMMAR, re.M).group(1)
    out = []
    for term in re.findall(r"\b[A-Z_]+\b", line):
        m = re.search(rf'^{term}: "([^"]+)"', GRAMMAR, re.M)
        out.append(m.group(1))
    return out


def test_every_kind_used_is_in_the_table():
    used = _compared_with("kind")
    unknown = {(v, f) for v, f in used if v not in KINDS and v not in _OTHER_KIND_WORDS}
    assert not unknown, f"kind words outside the table: {sorted(unknown)}"
    # every kind the grammar writes, through the parser, and every kind the circuit makes
    for word in _grammar_words("_kind"):
        sheet = parse_sheet(f"{word} X1 between a and gnd\nfind rth at out\n")
        assert sheet.elements[0].kind in KINDS
        assert kinds.kind(sheet.elements[0].kind).sheet
    c = _circuit(DIVIDER + "current source I1 from gnd to b = 1 mA\n"
                 "opamp U1 inputs b, gnd output o\nopamp U2 inputs b, gnd output q gain A "
                 "rin Ri rout Ro\nresistor Rq between q and gnd\nresistor Ro1 between o and b\n")
    made = {e.kind for e in c.elements}
    assert "nullor" in made and made <= set(KINDS)
    assert set(kinds.SHEET_KINDS) == set(KINDS) - {"nullor"}


def test_every_quantity_used_is_in_the_table():
    used = _compared_with("quantity")
    unknown = {(v, f) for v, f in used if v not in QUANTITIES}
    assert not unknown, f"quantity words outside the table: {sorted(unknown)}"
    words = _grammar_words("_at_word") + _grammar_words("_pair_word")
    words += ["current", "gain", "power"]
    for w in words:
        assert w in QUANTITIES, w
    # every handler is an analysis/statement or a quantity word of the table
    for key in HANDLERS:
        assert key in quantities.ANALYSES or key in QUANTITIES, key
    assert set(quantities.of_family("basic")) <= set(HANDLERS)
    # every request a sheet can make has a table entry (the whole-circuit requests too)
    sheet = parse_sheet(DIVIDER + "find operating point\nfind stress\n"
                        "find noise at out from 10 Hz to 1 kHz\nfind power in R1\n"
                        "find model from out to out\n")
    for r in sheet.requests:
        assert r.quantity in QUANTITIES, r.quantity


# ------------------------------------------------------------------ consumers refuse unknowns
# Before the table: the solver stamped an unknown kind as an admittance, the reduction
# dropped it from the network, the nodal derivation crashed with a TypeError (None times
# a voltage); every consumer now raises the table's error.
def test_solver_refuses_an_unknown_kind():
    with pytest.raises(UnknownKind, match="transistor"):
        System(_with_fake_kind())


def test_reduction_refuses_an_unknown_kind():
    with pytest.raises(UnknownKind, match="transistor"):
        series_parallel.branches_of(_with_fake_kind())


def test_nodal_derivation_refuses_an_unknown_kind():
    e = SimpleNamespace(kind="transistor", name="Q1")
    with pytest.raises(UnknownKind, match="transistor"):
        nodal_steps._admittance(e, sympy.Symbol("R"))


def test_circuit_stage_refuses_an_unknown_kind():
    c = _with_fake_kind()
    with pytest.raises(UnknownKind):
        c.element("R2").independent_source
    with pytest.raises(UnknownKind):
        topology.check_topology(c.elements, c.ground)
    with pytest.raises(UnknownKind):
        dimensions.of_symbol(SymbolInfo("Q1", "Q1", "transistor", None))
    with pytest.raises(UnknownKind):
        dimensions.of_kind("transistor")


def test_forms_and_record_refuse_an_unknown_kind():
    c = _with_fake_kind()
    ctx = Context(c, Options())
    with pytest.raises(UnknownKind):
        select._reactive(ctx)
    c.element("V1").kind = "battery"
    with pytest.raises(UnknownKind):
        select.gain_unit(ctx, "V1")
    with pytest.raises(UnknownKind):
        view.elements(c)
    with pytest.raises(UnknownKind):
        view.assumptions(c)
    with pytest.raises(UnknownKind):
        view.cautions(c)


def test_parser_helpers_refuse_an_unknown_kind():
    with pytest.raises(UnknownKind):
        parser._unit_of("transistor")
    with pytest.raises(UnknownKind):
        parser._resistor_code("transistor")
    assert parser._unit_of("nominal") is None and parser._resistor_code("nominal")


def test_consumers_refuse_an_unknown_quantity():
    c = _circuit()
    ctx = Context(c, Options())
    req = c.requests[0]
    fake = SimpleNamespace(**{**vars(req), "quantity": "flux", "statement": "solve",
                              "analysis": "sensitivity"})
    with pytest.raises(UnknownQuantity):
        select.names_for(fake)
    with pytest.raises(UnknownQuantity):
        select.exact_ratio(ctx, req, "flux")
    with pytest.raises(UnknownQuantity):
        series_parallel.port_form(ctx, req, "flux")
    with pytest.raises(UnknownQuantity):
        elimination.quantity_sequence(ctx, req, "flux")
    with pytest.raises(UnknownQuantity):
        inversion.quantity_of(ctx, fake)
    with pytest.raises(UnknownQuantity):
        sensitivity._check_scalar(fake)
    c.requests[0].quantity = "flux"
    with pytest.raises(UnknownQuantity):
        check_requests(c)
    # the record typesets quantity names from the table; any other name stays a symbol
    assert latex_name("vth") == quantities.quantity("vth").tex == r"v_{\mathrm{th}}"
    assert latex_name("flux") == r"f_{\mathrm{lux}}"


# ------------------------------------------------------------------ behaviour read from the table
def test_parser_messages_come_from_the_table():
    # the unit of each kind's value
    for kind in kinds.SHEET_KINDS:
        k = kinds.kind(kind)
        wrong = "Hz"
        line = (f"{k.word} X1 between a and gnd = 5 {wrong}" if k.source != "current" else
                f"{k.word} X1 from a to gnd = 5 {wrong}")
        with pytest.raises(SheetError, match=f"value is in {k.unit}, not Hz"):
            parse_sheet(line + "\nport out between a and gnd\nfind rth at out\n")
    # ratings: a conductance takes none, a capacitor only V
    with pytest.raises(SheetError, match="takes no rating"):
        parse_sheet("conductance G1 between a and gnd = 1 mS rated 1 W\n")
    with pytest.raises(SheetError, match="rating is in V, not W"):
        parse_sheet("capacitor C1 between a and gnd = 1 uF rated 1 W\n")
    with pytest.raises(SheetError, match="'noiseless' is for resistors"):
        parse_sheet("inductor L1 between a and gnd = 1 mH noiseless\n")
    # choose takes single quantities only; the members are said from the table
    with pytest.raises(SheetError, match="'thevenin' gives vth and rth"):
        parse_sheet(DIVIDER + "choose R1 from E24 for thevenin at out = 1 V\n")
    with pytest.raises(SheetError, match="'model' gives rin, gain and rout"):
        parse_sheet(DIVIDER + "choose R1 from E24 for model from out to out = 1\n")
    with pytest.raises(SheetError, match="power is in W"):
        parse_sheet(DIVIDER + "choose R1 from E24 for power in R1 = 1 V\n")
