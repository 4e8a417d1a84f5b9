"""One test per class of invalid sheet: message, line and column."""
from __future__ import annotations

import pytest

import derive
from derive.cli import main

CASES = [
    ("syntax", "resistor R1 betwen a and gnd\n", 1, 13, "expected 'between'"),
    ("unknown port", "resistor R1 between a and gnd\nfind rth at out\n", 2, 13,
     "unknown port 'out'"),
    ("unknown element", "resistor R1 between a and gnd\nfind current through R9\n", 2, 22,
     "unknown element 'R9'"),
    ("unknown block", "resistor R1 between a and gnd\nuse nothing x1 (a, gnd)\n", 2, 1,
     "unknown block 'nothing'"),
    ("unknown symbol in a claim", "resistor R1 between a and gnd\nport p between a and gnd\n"
     "check rth at p equals R1 + Q\n", 3, 28, "unknown symbol 'Q'"),
    ("unknown symbol to solve for", "resistor R1 between a and gnd\nport p between a and gnd\n"
     "solve rth at p for Q\n", 3, 20, "unknown symbol 'Q'"),
    ("duplicate name", "resistor R1 between a and gnd\nresistor R1 between a and gnd\n", 2, 10,
     "duplicate name 'R1'"),
    ("block terminals", "block d (a, b)\n resistor R between a and b\nend\nuse d d1 (x)\n"
     "resistor R2 between x and gnd\n", 4, 1, "block 'd' has 2 terminals"),
    ("recursive block", "block d (a, b)\n use d inner (a, b)\nend\nuse d d1 (x, gnd)\n", 2, 2,
     "block 'd' uses itself"),
    ("floating nodes", "resistor R1 between a and gnd\nresistor R2 between b and c\n", 2, 1,
     "node(s) b, c are not connected"),
    ("voltage-source loop", "voltage source V1 between a and gnd\n"
     "voltage source V2 between a and gnd\n", 2, 1, "loop of voltage sources: V1, V2"),
    ("op-amp output loop", "voltage source V1 between o and gnd\nresistor R between i and gnd\n"
     "opamp U1 inputs i, o output o\n", 3, 1, "loop of voltage sources and op-amp outputs"),
    ("current-source cut set", "current source I1 from gnd to a\nresistor R1 between b and gnd\n"
     "current source I2 from a to b\n", 1, 1, "cut set of current sources I1, I2"),
    ("port on one node", "resistor R1 between a and gnd\nport p between a and a\n", 2, 1,
     "same node 'a' at both ends"),
    ("unknown port node", "resistor R1 between a and gnd\nport p between a and z\n", 2, 22,
     "unknown node 'z'"),
    ("unit that does not fit", "resistor R1 between a and gnd = 5 V\n", 1, 35,
     "value is in ohm, not V"),
    ("nonlinear dependent source", "resistor R1 between a and gnd\n"
     "voltage source E between b and gnd = A*across(a, gnd)^2\nresistor R2 between b and gnd\n",
     2, 1, "linear in its controls"),
    ("dependent source with a constant term", "resistor R1 between a and gnd\n"
     "voltage source E between b and gnd = A*across(a, gnd) + 1\nresistor R2 between b and gnd\n",
     2, 1, "a term without across"),
    ("through an unknown element", "resistor R1 between a and gnd\n"
     "current source F from a to gnd = 2*through(Rz)\n", 2, 44, "through(Rz): no element"),
    ("qualified-name collision", "block d (a, b)\n resistor Rt between a and b\nend\n"
     "use d d1 (x, gnd)\nresistor d1_Rt between x and gnd\n", 5, 1, "collides with 'd1.Rt'"),
    ("meg prefix", "resistor R1 between a and gnd = 1meg\n", 1, 34, "'meg' is not an SI prefix"),
    ("K prefix", "resistor R1 between a and gnd = 10K\n", 1, 35, "'K' is not an SI prefix"),
    ("op-amp without feedback", "voltage source V between i and gnd\nresistor R1 between i and gnd\n"
     "opamp U1 inputs i, gnd output o\nresistor R2 between o and gnd\nport p between o and gnd\n"
     "find vth at p\n", 6, 1, "singular"),
    ("empty sheet", "# nothing here\n", 1, 1, "no elements"),
    ("missing ground", "resistor R1 between a and b\nresistor R2 between b and a\n", 1, 1,
     "ground node 'gnd' is not connected"),
]


@pytest.mark.parametrize("name,text,line,col,message", CASES, ids=[c[0] for c in CASES])
def test_error_location_and_message(name, text, line, col, message):
    with pytest.raises(derive.SheetError) as info:
        derive.derive_text(text, "bad.eqv")
    e = info.value
    assert message in e.message
    assert (e.line, e.col) == (line, col)


def test_prefix_errors_carry_a_hint():
    for text, hint in (("resistor R1 between a and gnd = 1meg\n", "M"),
                       ("resistor R1 between a and gnd = 10K\n", "k")):
        with pytest.raises(derive.SheetError) as info:
            derive.derive_text(text, "bad.eqv")
        assert info.value.hint and hint in info.value.hint


def test_cli_prints_file_line_col_and_caret(tmp_path, capsys):
    p = tmp_path / "bad.eqv"
    p.write_text("resistor R1 between a and gnd\nport p between a and zz\nfind rth at p\n")
    assert main(["record", str(p)]) == 2
    err = capsys.readouterr().err.splitlines()
    assert err[0] == f"{p}:2:22: error: unknown node 'zz' in port 'p'"
    assert err[1].strip() == "port p between a and zz"
    assert err[2].index("^") == err[1].index("zz")
    assert "Traceback" not in "\n".join(err)
