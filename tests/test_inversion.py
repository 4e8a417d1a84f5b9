"""solve Q at P for X: exact inversion, roots, conditions, valid range, verified steps."""
import json

import numpy
import pytest
import sympy

import derive
from derive.errors import SheetError

DIVIDER = """voltage source Vref between ref and gnd = 3.3 V
resistor R1 between ref and sense = 10 kohm
resistor Rt between sense and gnd = 10 kohm
port divider between sense and gnd
solve vth at divider for Rt
"""

SERIES_PARALLEL = """nominal R = 1 kohm
resistor Ra between a and b = R
resistor Rb between b and gnd = R
resistor Rc between b and gnd = 2 kohm
port p between a and gnd
solve rth at p for R
"""

Rt, R1, Vref, vth, R, Rc, rth = sympy.symbols("Rt R1 Vref vth R Rc rth")


def solve_of(text):
    return derive.derive_text(text, "t.eqv").results[0]


def test_thermistor_divider_inverse():
    r = solve_of(DIVIDER)
    q = r.quantities["Rt"]
    # thermistor below a pull-up: Rt = R1*v/(Vref - v) (common practice, no source)
    assert sympy.cancel(q.expr - R1 * vth / (Vref - vth)) == 0
    assert q.value == pytest.approx(10000.0, rel=1e-15)
    assert q.unit == "ohm"
    assert r.extra["method"] == "linear"
    assert r.extra["measured"]["value"] == pytest.approx(1.65)
    assert "Vref - vth != 0" in r.extra["conditions"]
    (rng,) = r.extra["valid_range"]
    assert (rng["low"], rng["high"]) == ("0", "Vref")
    assert rng["high_value"] == pytest.approx(3.3)
    assert all(st.verified for st in r.steps)


def test_json_record_has_inverted_formula():
    d = json.loads(derive.derive_text(DIVIDER, "t.eqv").to_json())
    res = d["results"][0]
    assert res["request"] == "solve vth at divider for Rt"
    assert res["quantities"]["Rt"]["expr"] == "R1*vth/(Vref - vth)"
    assert "latex" in res["quantities"]["Rt"]
    assert res["roots"][0]["chosen"] is True
    assert all(s["verified"] for s in res["steps"])


def test_quadratic_roots_against_numpy():
    r = solve_of(SERIES_PARALLEL)
    roots = r.extra["roots"]
    assert r.extra["method"] == "quadratic formula"
    assert len(roots) == 2 and [x["chosen"] for x in roots] == [True, False]
    # the forward formula is R + R||Rc; R**2 + (2*Rc - rth)*R - rth*Rc = 0 at nominal values,
    # solved independently with numpy.roots (reference library: numpy)
    rth_nom = 1000 + 1000 * 2000 / 3000
    ref = sorted(numpy.roots([1.0, 2 * 2000 - rth_nom, -rth_nom * 2000]))
    chosen = r.quantities["R"].expr.xreplace({rth: sympy.Rational(5000, 3), Rc: 2000})
    other = roots[1]["expr"].xreplace({rth: sympy.Rational(5000, 3), Rc: 2000})
    assert float(chosen) == pytest.approx(ref[1], rel=1e-12)
    assert float(other) == pytest.approx(ref[0], rel=1e-12)
    assert r.quantities["R"].value == pytest.approx(1000.0)
    assert all(x["verified"] for x in roots)
    (rng,) = r.extra["valid_range"]
    assert rng["low"] == "0" and rng["high"] is None


def test_substituting_back_is_checked_exactly():
    from derive.analyses.inversion import _sub_back
    expr = Rt * Vref / (R1 + Rt)
    assert _sub_back(expr, Rt, R1 * vth / (Vref - vth), vth)[1]
    assert not _sub_back(expr, Rt, R1 * vth / (Vref + vth), vth)[1]


def test_solve_for_symbol_not_in_quantity():
    text = DIVIDER.replace("solve vth at divider for Rt", "solve rth at divider for Vref")
    with pytest.raises(SheetError) as e:
        derive.derive_text(text, "t.eqv")
    assert "does not depend on Vref" in str(e.value)
    assert e.value.line == 5


def test_solve_a_pair_is_refused():
    text = DIVIDER.replace("solve vth at", "solve thevenin at")
    with pytest.raises(SheetError) as e:
        derive.derive_text(text, "t.eqv")
    assert "vth or rth" in str(e.value)
