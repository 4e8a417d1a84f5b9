"""The sheet parser: every statement kind, expressions, values, and the parse errors."""
from fractions import Fraction

import pytest

from derive.errors import SheetError
from derive.sheet.model import BinOp, Block, Call, Element, Loc, Name, Neg, Num, OpAmp, Quantity, Use
from derive.sheet.parser import parse_sheet

R = "resistor R0 between a and gnd\n"      # something to make a sheet non-empty


def one(line, extra=R):
    """Parse one statement (plus a resistor) and return the sheet."""
    return parse_sheet(extra + line + "\n")


def value_of(text, kind="resistor"):
    stmt = {"vsource": "voltage source X between a and b = ",
            "isource": "current source X from a to b = "}.get(kind, f"{kind} X between a and b = ")
    return parse_sheet(stmt + text + "\n").elements[0].value


def expr_of(text):
    return parse_sheet(f"check vth at p equals {text}\n" + R).requests[0].claim


def error(text):
    with pytest.raises(SheetError) as e:
        parse_sheet(text)
    return e.value


# ------------------------------------------------------------------ statements
def test_title_note_ground():
    s = parse_sheet('title "Load-cell \\"bridge\\", channel A"  # c\n'
                    'note "Excited # from 5 V \\\\ ref"\nnote "two"\nground gnd0\n' + R)
    assert s.title == 'Load-cell "bridge", channel A'
    assert s.notes == ["Excited # from 5 V \\ ref", "two"]
    assert s.ground == "gnd0" and s.ground_loc == Loc(4, 8)
    assert s.filename == "<sheet>" and s.source.startswith("title")


def test_string_keeps_other_backslashes_literally():
    assert one('note "a\\nb"').notes == ["a\\nb"]


@pytest.mark.parametrize("kind", ["resistor", "conductance", "capacitor", "inductor",
                                  "impedance", "admittance"])
def test_passive_elements(kind):
    line = f"  {kind}   Rx between top and  left"
    s = parse_sheet(line + "\n")
    e = s.elements[0]
    assert isinstance(e, Element)
    assert (e.kind, e.name, e.nodes, e.value) == (kind, "Rx", ("top", "left"), None)
    assert e.loc == Loc(1, 3)
    assert e.node_locs == (Loc(1, line.index("top") + 1), Loc(1, line.index("left") + 1))
    assert s.body == [e]


def test_element_values_and_tolerance():
    s = parse_sheet("resistor Ra between top and left = 350 ohm ±0.1%\n"
                    "capacitor C1 between out and gnd = 100 nF +-10%\n"
                    "conductance Gx between a and b = 2 mS\n"
                    "inductor L1 between a and b = 10 uH\n")
    ra, c1, gx, l1 = s.elements
    assert ra.value.quantity == Quantity(Fraction(350), "ohm", Loc(1, 36))
    assert ra.value.expr is None
    tol = ra.value.tolerance
    assert (tol.value, tol.relative, tol.unit) == (Fraction(1, 1000), True, None)
    assert c1.value.quantity.value == Fraction(1, 10**7) and c1.value.quantity.unit == "F"
    assert c1.value.tolerance.value == Fraction(1, 10)
    assert gx.value.quantity.value == Fraction(1, 500) and gx.value.quantity.unit == "S"
    assert l1.value.quantity.value == Fraction(1, 10**5) and l1.value.quantity.unit == "H"


@pytest.mark.parametrize("tol", ["± 5 mV", "+-5mV", "±5mV", "+- 5 mV"])
def test_absolute_tolerance_forms(tol):
    t = value_of(f"5 V {tol}", "vsource").tolerance
    assert (t.value, t.relative, t.unit) == (Fraction(5, 1000), False, "V")


def test_sources():
    s = parse_sheet("voltage source Vx between top and gnd = 5 V\n"
                    "current source Iq from top to mid = 1 mA\n"
                    "voltage source Vn between a and gnd = -5V\n")
    vx, iq, vn = s.elements
    assert (vx.kind, vx.name, vx.nodes) == ("vsource", "Vx", ("top", "gnd"))
    assert vx.value.quantity.value == 5 and vx.value.quantity.unit == "V"
    assert (iq.kind, iq.name, iq.nodes) == ("isource", "Iq", ("top", "mid"))
    assert iq.value.quantity.value == Fraction(1, 1000) and iq.value.quantity.unit == "A"
    assert iq.node_locs == (Loc(2, 24), Loc(2, 31))
    assert vn.value.quantity.value == -5


def test_dependent_sources_are_calls():
    s = parse_sheet("voltage source Kv1 between out and gnd = A*across(inp, inn)\n"
                    "current source Bf1 from c to e = beta*through(div1.Rt)\n")
    kv, bf = s.elements
    e = kv.value.expr
    assert isinstance(e, BinOp) and e.op == "*" and e.left == Name("A", Loc(1, 42))
    assert e.right == Call("across", (Name("inp", Loc(1, 51)), Name("inn", Loc(1, 56))),
                           Loc(1, 44))
    assert bf.value.expr.right.func == "through"
    assert bf.value.expr.right.args == (Name("div1.Rt", Loc(2, 47)),)


def test_opamps():
    s = parse_sheet("opamp U1 inputs inp, inn output out\n"
                    "opamp U2 inputs p, n output o rout Ro gain 2e5 rin 1 Mohm\n")
    u1, u2 = s.elements
    assert isinstance(u1, OpAmp)
    assert (u1.name, u1.inputs, u1.output, u1.gain, u1.rin, u1.rout) == \
        ("U1", ("inp", "inn"), "out", None, None, None)
    assert u1.node_locs == (Loc(1, 17), Loc(1, 22), Loc(1, 33))
    assert u2.gain.quantity.value == 200000 and u2.gain.quantity.unit is None
    assert u2.rin.quantity.value == 10**6 and u2.rin.quantity.unit == "ohm"
    assert u2.rout.expr == Name("Ro", Loc(2, 36))


def test_nominal():
    s = one("nominal R = 10 kohm ±1%")
    n = s.nominals[0]
    assert (n.name, n.quantity.value, n.quantity.unit) == ("R", Fraction(10000), "ohm")
    assert n.tolerance.value == Fraction(1, 100) and n.tolerance.relative
    assert n.loc == Loc(2, 1)
    assert one("nominal f0 = 1 kHz").nominals[0].quantity.unit == "Hz"
    assert one("nominal Rq = R47").nominals[0].quantity.value == Fraction(47, 100)


def test_port():
    p = one("port out between left and right").ports[0]
    assert (p.name, p.plus, p.minus) == ("out", "left", "right")
    assert p.node_locs == (Loc(2, 18), Loc(2, 27)) and p.loc == Loc(2, 1)


def test_block_and_use():
    s = parse_sheet("block divider (hi, mid, lo)\n"
                    "  resistor Rt between hi and mid\n"
                    "  resistor Rb between mid and lo\n"
                    "  use inner i1 (hi, lo)\n"
                    "  nominal Rn = 1k\n"
                    "end\n"
                    "use divider div1 (top, tap, gnd)\n"
                    "use divider div2 (top, tap2, gnd) with Rt = R1, Rb = 2*R2\n")
    b = s.blocks["divider"]
    assert isinstance(b, Block) and b.terminals == ("hi", "mid", "lo") and b.loc == Loc(1, 1)
    assert [type(x).__name__ for x in b.body] == ["Element", "Element", "Use", "Nominal"]
    assert b.body[2].block == "inner" and b.body[2].nodes == ("hi", "lo")
    u1, u2 = s.uses
    assert isinstance(u1, Use) and s.body == [u1, u2]
    assert (u1.block, u1.instance, u1.nodes, u1.mappings) == \
        ("divider", "div1", ("top", "tap", "gnd"), {})
    assert u2.mappings["Rt"] == Name("R1", Loc(8, 45))
    assert u2.mappings["Rb"].op == "*"
    assert u2.mapping_locs == {"Rt": Loc(8, 40), "Rb": Loc(8, 49)}


def test_requests():
    s = parse_sheet(R + "find thevenin at out\n"
                    "find  gain from Vx to out   # comment\n"
                    "find sensitivity of vth at out\n"
                    "find tolerance of rth at out\n"
                    "solve vth   at out for Rb\n"
                    "check rth at out equals Ra||Rb + Rc||Rg   # claim\n"
                    "find current through div1.Rt\n"
                    "find model from p1 to p2\n"
                    "find twoport from p1 to p2\n")
    th, gain, sens, tol, solve, check, cur, model, tp = s.requests
    assert (th.statement, th.quantity, th.port, th.text) == \
        ("find", "thevenin", "out", "find thevenin at out")
    assert th.name_locs == {"port": Loc(2, 18)} and th.loc == Loc(2, 1)
    assert (gain.quantity, gain.source, gain.port, gain.text) == \
        ("gain", "Vx", "out", "find gain from Vx to out")
    assert (sens.analysis, sens.quantity, sens.port) == ("sensitivity", "vth", "out")
    assert (tol.analysis, tol.quantity) == ("tolerance", "rth")
    assert (solve.statement, solve.solve_for, solve.text) == \
        ("solve", "Rb", "solve vth at out for Rb")
    assert solve.name_locs["solve_for"] == Loc(6, 24)
    assert check.text == "check rth at out equals Ra||Rb + Rc||Rg"
    assert check.claim.op == "+" and check.claim.left.op == "||"
    assert (cur.quantity, cur.element) == ("current", "div1.Rt")
    assert (model.quantity, model.port, model.port2) == ("model", "p1", "p2")
    assert (tp.quantity, tp.port, tp.port2) == ("twoport", "p1", "p2")


@pytest.mark.parametrize("word", ["norton", "vth", "rth", "isc", "rn", "resistance",
                                  "impedance", "voltage"])
def test_at_quantities(word):
    r = one(f"find {word} at P").requests[0]
    assert (r.quantity, r.port) == (word, "P")


def test_numeric():
    n = one("numeric R3, R4,R5").numeric[0]
    assert n.names == ("R3", "R4", "R5") and n.name_locs[1] == Loc(2, 13)


def test_keywords_are_soft():
    s = parse_sheet("resistor gain between in and out\nresistor model between to and from\n"
                    "resistor R1 between between and and\nport find between top and a\n"
                    "find rth at find\n")
    assert s.elements[0].name == "gain" and s.elements[0].nodes == ("in", "out")
    assert s.elements[1].nodes == ("to", "from")
    assert s.elements[2].nodes == ("between", "and")
    assert s.requests[0].port == "find"


def test_crlf_bom_and_no_final_newline():
    s = parse_sheet("\ufeffresistor R1 between a and b\r\n\r\nfind rth at p")
    assert s.elements[0].name == "R1" and s.requests[0].text == "find rth at p"


# ------------------------------------------------------------------ expressions
def test_precedence():
    e = expr_of("Ra||Rb + Rc||Rg")
    assert e.op == "+" and e.left.op == "||" and e.right.op == "||"
    e = expr_of("2*R||R")
    assert e.op == "||" and e.left.op == "*" and e.right == Name("R", e.right.loc)
    e = expr_of("-a^2")
    assert isinstance(e, Neg) and e.operand.op == "^"
    e = expr_of("2^3^2")
    assert e.op == "^" and e.left.value == 2 and e.right.op == "^"
    e = expr_of("a - b - c")
    assert e.op == "-" and e.left.op == "-"
    e = expr_of("a/b*c")
    assert e.op == "*" and e.left.op == "/"
    e = expr_of("(a + b)*c")
    assert e.op == "*" and e.left.op == "+"
    e = expr_of("a \u2225 b")
    assert e.op == "||"
    e = expr_of("-a*b")
    assert e.op == "*" and isinstance(e.left, Neg)
    e = expr_of("a^-2")
    assert e.op == "^" and isinstance(e.right, Neg)


def test_numbers_in_expressions():
    e = expr_of("2*10k")
    assert e.right == Num(Fraction(10000), e.right.loc)
    assert expr_of("4k7/2").left.value == 4700
    assert expr_of("1e-3*x").left.value == Fraction(1, 1000)
    assert expr_of("sqrt(a*b)").func == "sqrt"


def test_value_expressions_and_codes():
    v = value_of("2*R")
    assert v.quantity is None and v.expr.op == "*"
    assert value_of("4k7").quantity.value == 4700
    assert value_of("2R2").quantity.value == Fraction(22, 10)
    assert value_of("1M5").quantity.value == 1500000
    assert value_of("R47").quantity.value == Fraction(47, 100)
    assert value_of("47R").quantity.value == 47
    assert value_of("10").quantity == Quantity(Fraction(10), None, Loc(1, 30))
    assert value_of("10", "capacitor").quantity.unit is None


def test_r_code_yields_to_declared_names():
    s = parse_sheet("resistor R47 between a and b\nresistor R2 between a and b = R47\n")
    assert s.elements[1].value.expr == Name("R47", Loc(2, 31))


# ------------------------------------------------------------------ errors
def test_error_empty_sheet():
    e = error("# only a comment\n\n   \n")
    assert (e.message, e.line, e.col) == ("sheet has no elements", 1, 1)
    assert error("").message == "sheet has no elements"


def test_error_expected_and():
    e = error("resistor R1 between a b\n")
    assert (e.message, e.line, e.col) == ("expected 'and' after the first node, found 'b'", 1, 23)


def test_error_unknown_statement():
    e = error(R + "resistr R1 between a and b\n")
    assert (e.message, e.line, e.col) == ("unknown statement 'resistr'", 2, 1)


def test_error_current_source_needs_from():
    e = error("current source I1 between a and b\n")
    assert e.message.startswith("expected 'from'") and (e.line, e.col) == (1, 19)


def test_error_duplicate_element():
    e = error("resistor R1 between a and b\ncapacitor R1 between a and c\n")
    assert e.message == "duplicate name 'R1' in the sheet (first defined on line 1)"
    assert (e.line, e.col) == (2, 11)


def test_error_duplicate_in_block_only_within_scope():
    parse_sheet("resistor Rt between a and b\nblock d (x, y)\n resistor Rt between x and y\nend\n")
    e = error("block d (x, y)\n resistor Rt between x and y\n resistor Rt between x and y\nend\n"
              + R)
    assert e.message.startswith("duplicate name 'Rt' in block 'd'") and (e.line, e.col) == (3, 11)


def test_error_duplicate_port_block_title_terminal():
    e = error(R + "port p between a and b\nport p between b and a\n")
    assert e.message.startswith("duplicate port 'p'") and (e.line, e.col) == (3, 1)
    e = error(R + "block d (x)\nend\nblock d (y)\nend\n")
    assert e.message.startswith("duplicate block 'd'") and (e.line, e.col) == (4, 7)
    e = error('title "a"\ntitle "b"\n' + R)
    assert e.message.startswith("'title' is given twice") and (e.line, e.col) == (2, 1)
    e = error(R + "block d (x, x)\nend\n")
    assert e.message == "duplicate terminal 'x' in block 'd'" and (e.line, e.col) == (2, 13)


# the column is that of the name after the number, where the '*' is missing
@pytest.mark.parametrize("value, col, name", [("2R", 33, "R"), ("2 R", 34, "R"),
                                              ("10k R", 36, "R"), ("2*3R", 35, "R"),
                                              ("2 Rb", 34, "Rb"), ("3x", 33, "x")])
def test_error_missing_star_in_expressions(value, col, name):
    e = error(f"capacitor C1 between a and b = {value}\n")
    assert "missing '*'" in e.message and f"'{name}'" in e.message
    assert (e.line, e.col) == (1, col)


def test_error_missing_star_in_claim_and_value_with_declared_r():
    e = error(R + "check vth at p equals 2R\n")
    assert "missing '*'" in e.message and (e.line, e.col) == (2, 24)
    e = error(R + "check vth at p equals a b\n")
    assert e.message == "missing '*' before 'b'" and (e.line, e.col) == (2, 25)
    e = error("nominal R = 1k\nresistor R1 between a and b = 2R\n")
    assert "missing '*' before 'R'" in e.message and (e.line, e.col) == (2, 32)


def test_error_bad_prefix_hints():
    e = error("resistor R1 between a and b = 10K\n")
    assert (e.message, e.line, e.col) == ("'K' is not an SI prefix", 1, 33)
    assert "use k for kilo" in e.hint
    e = error("resistor R1 between a and b = 1 megohm\n")
    assert (e.message, e.col) == ("'meg' is not an SI prefix", 33)
    assert "use M for mega" in e.hint
    e = error("capacitor C1 between a and b = 10 uf\n")
    assert e.message == "'uf' is not a unit" and "case-sensitive" in e.hint


@pytest.mark.parametrize("kind, value, want, got", [
    ("resistor", "5 V", "ohm", "V"), ("impedance", "1 F", "ohm", "F"),
    ("conductance", "1 ohm", "S", "ohm"), ("admittance", "2 A", "S", "A"),
    ("capacitor", "1 H", "F", "H"), ("inductor", "1uF", "H", "F"),
    ("vsource", "1 mA", "V", "A"), ("isource", "5V", "A", "V"),
])
def test_error_unit_does_not_fit(kind, value, want, got):
    with pytest.raises(SheetError) as e:
        value_of(value, kind)
    assert e.value.message.endswith(f"value is in {want}, not {got}")
    assert e.value.line == 1


def test_error_tolerance():
    e = error("resistor R1 between a and b = 1k ±1 V\n")
    assert e.message == "the tolerance is in V but the value is in ohm" and e.col == 37


def test_error_reserved_s():
    e = error("resistor s between a and b\n")
    assert "reserved" in e.message and (e.line, e.col) == (1, 10)
    e = error(R + "nominal s = 1\n")
    assert "reserved" in e.message and (e.line, e.col) == (2, 9)


def test_error_unknown_function_and_arguments():
    e = error("resistor R1 between a and b = 2*foo(3)\n")
    assert e.message.startswith("unknown function 'foo'") and e.col == 33
    e = error("voltage source E between a and b = across(a)\n")
    assert e.message == "across(...) takes 2 arguments, not 1"
    e = error("voltage source E between a and b = through(2*x)\n")
    assert e.message == "the arguments of through(...) must be element names"


def test_error_block_not_closed_and_statement_in_block():
    e = error("block d (x)\n resistor R between x and y\n")
    assert e.message == "a block is not closed: expected 'end'" and e.line == 1
    e = error("block d (x)\n find rth at p\nend\n")
    assert e.message == "'find' is not allowed inside a block" and (e.line, e.col) == (2, 2)


def test_error_syntax_messages_in_words():
    e = error("resistor R1 between a and b = \n")
    assert e.message == "expected a value or an expression, found the end of the line"
    e = error(R + "find vth out\n")
    assert (e.message, e.line, e.col) == ("expected 'at', found 'out'", 2, 10)
    e = error('title "open\n' + R)
    assert e.message.startswith("unterminated string") and (e.line, e.col) == (1, 7)
    e = error("resistor R1 between a and b = a | b\n")
    assert "'||'" in e.message and e.col == 33
    e = error("opamp U1 inputs a b output c\n")
    assert e.message == "expected ',', found 'b'"
    e = error("opamp U1 inputs a, b output c gain 1 gain 2\n")
    assert e.message == "'gain' is given twice for op-amp 'U1'" and e.col == 38


def test_error_nominal_needs_number_and_unit_in_expression():
    e = error(R + "nominal R = 2*x\n")
    assert e.message.startswith("nominal 'R' needs a number") and (e.line, e.col) == (2, 13)
    e = error("resistor R1 between a and b = 2*5kohm\n")
    assert "only allowed on a plain value" in e.message


def test_error_non_ascii_name():
    e = error("resistor R\u00b5 between a and b\n")
    assert "not a valid" in e.message and e.col == 10


def test_error_carries_source_and_filename():
    e = error("resistor R1 between a b\n")
    assert e.filename == "<sheet>" and "resistor R1 between a b" in e.format()


# ------------------------------------------------------------------ robustness
from hypothesis import given, settings, strategies as st  # noqa: E402

_PIECES = ["resistor", "R1", "between", "and", "a", "b", "=", "2", "k", "R", "*", "(", ")",
           "||", "^", "-", "+-", "±", "%", "find", "vth", "at", "block", "end", "use",
           "with", ",", "\n", "#", '"', "4k7", "10K", "across", "opamp", "inputs", " "]


@settings(max_examples=300, deadline=None)
@given(st.lists(st.sampled_from(_PIECES), max_size=25))
def test_any_text_gives_a_sheet_or_a_sheet_error(pieces):
    text = " ".join(pieces)
    try:
        parse_sheet(text)
    except SheetError as e:
        assert e.line >= 1 and e.col >= 1 and e.message


def test_replace_statement_into_the_sheet_model():
    from derive.sheet.parser import parse_sheet
    sheet = parse_sheet("resistor R1 between a and gnd\n"
                        "replace q1 by model from pin to pmid compare\n"
                        "replace q2 by model from a to b\n")
    r1, r2 = sheet.replacements
    assert (r1.instance, r1.port, r1.port2, r1.compare) == ("q1", "pin", "pmid", True)
    assert (r2.instance, r2.compare) == ("q2", False)
    assert r1.loc.line == 2 and r1.name_locs[0].col == 9
