"""find model / find twoport: section models and two-port parameters."""
import random

import numpy as np
import pytest
import sympy

import derive
from derive.errors import SheetError

sym = sympy.Symbol


def results(text):
    return derive.derive_text(text).results


def same(a, b):
    return sympy.cancel(sympy.together(a - b)) == 0


CE = """
voltage source Vs between b and gnd = 10 mV
resistor rpi between b and gnd = 2.5 kohm
current source G1 from c to gnd = gm*across(b, gnd)
resistor Rc between c and gnd = 4.7 kohm
resistor RL between c and gnd = 10 kohm
nominal gm = 40 mS
port pin between b and gnd
port out between c and gnd
find model from pin to out
"""


def test_common_emitter_model():
    # textbook small-signal practice: rin = rpi, gain = -gm (Rc || RL), rout = Rc || RL
    r = results(CE)[0]
    q = r.quantities
    rpi, gm, Rc, RL = sym("rpi"), sym("gm"), sym("Rc"), sym("RL")
    par = Rc * RL / (Rc + RL)
    assert same(q["rin"].expr, rpi)
    assert same(q["gain"].expr, -gm * par)
    assert same(q["rout"].expr, par)
    assert q["gain"].value == pytest.approx(-0.04 * 4700 * 10000 / 14700)
    assert r.extra["unilateral"] is True
    # the signal source Vs was removed and the gain checked against the full circuit
    assert any("signal source" in s.text and s.verified for s in r.steps)
    assert all(s.verified for s in r.steps)
    f = r.extra["forms"]
    assert same(f["transconductance"]["gm"]["expr"], -gm)      # out of c into a short
    assert f["current amplifier"]["ai"]["value"] == pytest.approx(-0.04 * 2500)
    assert f["transresistance"]["rm"]["value"] == pytest.approx(-0.04 * 2500 * 4700 * 10000 / 14700)


def test_emitter_degeneration_input_resistance():
    # textbook small-signal practice: rin = rpi + (1 + gm*rpi)*Re
    text = """
resistor rpi between b and e
current source G1 from c to e = gm*across(b, e)
resistor Re between e and gnd
resistor Rc between c and gnd
port pin between b and gnd
port out between c and gnd
find model from pin to out
"""
    q = results(text)[0].quantities
    rpi, gm, Re, Rc = sym("rpi"), sym("gm"), sym("Re"), sym("Rc")
    assert same(q["rin"].expr, rpi + (1 + gm * rpi) * Re)
    assert same(q["gain"].expr, -gm * rpi * Rc / (rpi + (1 + gm * rpi) * Re))


FOLLOWER = """
voltage source Vs between in and gnd = 1 V
opamp U1 inputs in, out output out gain A rout Ro
nominal A = 100000
nominal Ro = 75 ohm
nominal Ri = 2 Mohm
port pin between in and gnd
port o between out and gnd
find model from pin to o
"""


def test_follower_output_resistance():
    # textbook: a follower with open-loop gain A and output resistance Ro has
    # rout = Ro/(1 + A) and gain A/(1 + A)
    q = results(FOLLOWER)[0].quantities
    A, Ro = sym("A"), sym("Ro")
    assert same(q["rout"].expr, Ro / (1 + A))
    assert same(q["gain"].expr, A / (1 + A))


def test_follower_with_input_resistance_exact():
    # exact form by an independent hand-written nodal solve in sympy (the model of
    # SHEET.md: Ri between the inputs, A*across(inp, inn) referred to ground behind Ro)
    text = FOLLOWER.replace("gain A rout Ro", "gain A rin Ri rout Ro")
    q = results(text)[0].quantities
    A, Ri, Ro = sym("A"), sym("Ri"), sym("Ro")
    vout, i = sympy.symbols("vout i")
    # input held at 0 V, test current i into out: KCL at out
    sol = sympy.solve([vout / Ri + (vout - A * (0 - vout)) / Ro - i], [vout])
    assert same(q["rout"].expr, sol[vout] / i)
    assert sympy.limit(q["rout"].expr * (1 + A) / Ro, Ri, sympy.oo) == 1
    # with P2 open the input sees Ri in series with what bootstraps it: rin = Ri (1 + A) + Ro
    vin = sympy.Symbol("vin")
    vo = sympy.solve([(vout - vin) / Ri + (vout - A * (vin - vout)) / Ro], [vout])[vout]
    assert same(q["rin"].expr, vin / ((vin - vo) / Ri))


def test_reverse_signal_source_and_non_unilateral():
    # resistive T attenuator: not unilateral; loaded rin between the open and shorted cases
    text = """
voltage source Vs between gnd and a = 1 V
resistor R1 between a and m = 100 ohm
resistor R2 between m and b = 100 ohm
resistor R3 between m and gnd = 50 ohm
port pin between a and gnd
port out between b and gnd
find model from pin to out
"""
    r = results(text)[0]
    q = r.quantities
    R1, R2, R3 = sym("R1"), sym("R2"), sym("R3")
    # series/parallel by hand (common practice, no source)
    assert same(q["rin"].expr, R1 + R3)
    assert same(q["gain"].expr, R3 / (R1 + R3))
    assert same(q["rout"].expr, R2 + R1 * R3 / (R1 + R3))
    assert r.extra["unilateral"] is False
    lr = r.extra["loaded_rin"]
    assert lr["open"]["value"] == pytest.approx(150)
    assert lr["shorted"]["value"] == pytest.approx(100 + 50 * 100 / 150)


# ------------------------------------------------------------------ two-ports
def _network(vals, gm=None):
    """A bridged-T style two-port between (p1, gnd) and (p2, gnd), optionally with a VCCS."""
    lines = [f"resistor Ra between p1 and m = {vals[0]} ohm",
             f"resistor Rb between m and p2 = {vals[1]} ohm",
             f"resistor Rc between m and gnd = {vals[2]} ohm",
             f"resistor Rd between p1 and p2 = {vals[3]} ohm",
             f"resistor Re between p2 and gnd = {vals[4]} ohm"]
    if gm is not None:
        lines.append("current source G1 from p2 to gnd = gm*across(m, gnd)")
        lines.append(f"nominal gm = {gm} S")
    lines += ["port P1 between p1 and gnd", "port P2 between p2 and gnd",
              "find twoport from P1 to P2"]
    return "\n".join(lines) + "\n"


def _z_by_numpy(vals, gm):
    """z parameters by an independent nodal solve (numpy.linalg.solve), nodes p1, m, p2."""
    ga, gb, gc, gd, ge = (1 / v for v in vals)
    Y = np.array([[ga + gd, -ga, -gd],
                  [-ga, ga + gb + gc, -gb],
                  [-gd, -gb, gb + gd + ge]], dtype=float)
    Y[2, 1] += gm or 0          # VCCS draws gm*v_m out of p2
    z = np.zeros((2, 2))
    for j, node in enumerate((0, 2)):
        rhs = np.zeros(3)
        rhs[node] = 1.0
        v = np.linalg.solve(Y, rhs)
        z[0, j], z[1, j] = v[0], v[2]
    return z


@pytest.mark.parametrize("seed", [1, 2, 3])
def test_twoport_conversions_random(seed):
    rnd = random.Random(seed)
    vals = [rnd.randint(10, 5000) for _ in range(5)]
    gm = rnd.choice([None, 0.01])
    q = results(_network(vals, gm))[0].quantities
    v = {k: x.value for k, x in q.items()}
    z = np.array([[v["z11"], v["z12"]], [v["z21"], v["z22"]]])
    # against an independent nodal solve with numpy.linalg.solve
    np.testing.assert_allclose(z, _z_by_numpy(vals, gm), rtol=1e-12)
    # y = z^-1 (numpy.linalg.inv)
    y = np.array([[v["y11"], v["y12"]], [v["y21"], v["y22"]]])
    np.testing.assert_allclose(y, np.linalg.inv(z), rtol=1e-12)
    # standard two-port conversion table (as in Pozar, Microwave Engineering, the
    # z/y/h/ABCD conversion table), written from memory
    dz = np.linalg.det(z)
    np.testing.assert_allclose([v["h11"], v["h12"], v["h21"], v["h22"]],
                               [dz / z[1, 1], z[0, 1] / z[1, 1], -z[1, 0] / z[1, 1],
                                1 / z[1, 1]], rtol=1e-12)
    np.testing.assert_allclose([v["a"], v["b"], v["c"], v["d"]],
                               [z[0, 0] / z[1, 0], dz / z[1, 0], 1 / z[1, 0],
                                z[1, 1] / z[1, 0]], rtol=1e-12)
    np.testing.assert_allclose([v["g11"], v["g21"]], [1 / z[0, 0], z[1, 0] / z[0, 0]],
                               rtol=1e-12)


def test_reciprocity_passive():
    # reciprocity theorem for passive linear networks: z12 = z21 (from memory)
    r = results(_network([120, 470, 330, 1000, 2200]))[0]
    q = r.quantities
    assert same(q["z12"].expr, q["z21"].expr)
    assert same(q["y12"].expr, q["y21"].expr)
    assert same(q["h12"].expr, -q["h21"].expr)
    assert r.extra["reciprocal"] is True
    r2 = results(_network([120, 470, 330, 1000, 2200], gm=0.02))[0]
    assert r2.extra["reciprocal"] is False


def test_series_element_has_no_z():
    # the two drives across the ports are terminations, removed from the two-port
    text = """
voltage source V1 between a and gnd = 1 V
voltage source V2 between b and gnd = 2 V
resistor R between a and b
port P1 between a and gnd
port P2 between b and gnd
find twoport from P1 to P2
"""
    r = results(text)[0]
    assert "z" in r.extra["missing"] and "h" not in r.extra["missing"]
    assert "z11" not in r.quantities
    R = sym("R")
    assert same(r.quantities["y11"].expr, 1 / R)
    assert same(r.quantities["y12"].expr, -1 / R)
    assert same(r.quantities["b"].expr, R)          # ABCD of a series R: [[1, R], [0, 1]]
    assert same(r.quantities["a"].expr, 1)
    assert any("do not exist" in s.text for s in r.steps)


def test_shunt_element_has_no_y():
    text = """
resistor R between a and gnd
port P1 between a and gnd
port P2 between a and gnd
find twoport from P1 to P2
"""
    r = results(text)[0]
    assert "y" in r.extra["missing"]
    R = sym("R")
    for n in ("z11", "z12", "z21", "z22"):
        assert same(r.quantities[n].expr, R)
    assert same(r.quantities["c"].expr, 1 / R)       # ABCD of a shunt R: [[1, 0], [1/R, 1]]


def test_model_of_input_driven_inside_is_an_error():
    # an ideal op-amp output sits across P1: no voltage can be applied there
    text = """
resistor R1 between x and gnd
resistor R2 between a and x
opamp U1 inputs gnd, x output a
resistor R3 between a and b
resistor R4 between b gnd
port P1 between a and gnd
port P2 between b and gnd
find model from P1 to P2
""".replace("b gnd", "b and gnd")
    with pytest.raises(SheetError, match="port 1 is shorted"):
        results(text)


def test_model_source_controlled_by_signal_source_current_is_an_error():
    text = """
voltage source Vs between a and gnd = 1 V
resistor R1 between a and gnd
current source F1 from b to gnd = 2*through(Vs)
resistor R2 between b and gnd
port P1 between a and gnd
port P2 between b and gnd
find model from P1 to P2
"""
    with pytest.raises(SheetError, match="not part of the section"):
        results(text)


# ------------------------------------------------------------------ model reuse
REUSE = """
block ce (b, c, ref)
  resistor rpi between b and ref = 2.5 kohm
  current source G1 from c to ref = gm*across(b, ref)
  resistor Rc between c and ref = 4.7 kohm
  {extra}
end
nominal gm = 40 mS
voltage source Vs between src and gnd = 1 mV
resistor Rs between src and in = 600 ohm
use ce q1 (in, mid, gnd)
resistor RL between mid and gnd = 10 kohm
port pin between in and gnd
port pmid between mid and gnd
replace q1 by model from pin to pmid compare
find gain from Vs to pmid
"""


def _cascade(e, Rs, RL):
    # cascade of a voltage-amplifier model between a source resistance and a load:
    # rin/(Rs + rin) * gain * RL/(rout + RL) (common practice, no source)
    return e["rin"] / (Rs + e["rin"]) * e["gain"] * RL / (e["rout"] + RL)


@pytest.mark.parametrize("extra,exact", [("", True),
                                         ("resistor Rf between c and b = 100 kohm", False)])
def test_replace_by_model(extra, exact):
    r = results(REUSE.format(extra=extra))[0]
    sub = r.extra["substitution"][0]
    assert sub["instance"] == "q1" and sub["unilateral"] is exact
    rpi, gm, Rc, Rs, RL = (sym(n) for n in ("q1_rpi", "gm", "q1_Rc", "Rs", "RL"))
    if exact:
        assert sub["rin"] == rpi and sub["rout"] == Rc
        e = {"rin": rpi, "gain": -gm * Rc, "rout": Rc}
    else:
        # the same stage alone, modelled by find model (signal source across its input)
        alone = REUSE.format(extra=extra).replace("resistor Rs between src and in = 600 ohm\n",
                                                  "").replace("between src and gnd",
                                                              "between in and gnd")
        alone = alone.replace("resistor RL between mid and gnd = 10 kohm\n", "").replace(
            "replace q1 by model from pin to pmid compare\nfind gain from Vs to pmid",
            "find model from pin to pmid")
        e = {k: q.expr for k, q in results(alone)[0].quantities.items()}
    assert same(r.quantities["gain"].expr, _cascade(e, Rs, RL))
    err = r.extra["model_error"]["gain"]
    assert err["model"] == pytest.approx(r.quantities["gain"].value)
    if exact:
        assert err["relative"] == pytest.approx(0.0, abs=1e-15)
    else:
        # the feedback resistor's reverse transmission is neglected by the model
        assert abs(err["relative"]) > 1e-3
    assert r.steps[0].kind == "substitution" and r.steps[0].verified


def test_replace_unknown_instance_is_an_error():
    text = REUSE.format(extra="").replace("replace q1", "replace q9")
    with pytest.raises(SheetError, match="no instance 'q9'"):
        results(text)
