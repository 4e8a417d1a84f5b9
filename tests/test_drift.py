"""``find drift of Q``: Q over the temperature range, every part at the same temperature.

References: the linear temperature model x(T) = x0 (1 + tc (T - T0)) of SHEET.md section 5;
the closed forms below worked by hand (a ratio of two resistors; the maximum power transfer
theorem, textbook: a load RL fed through Rs takes V^2/(4 RL) at Rs = RL); a dense grid of
temperatures evaluated in this test from the hand-written formula.
"""
from __future__ import annotations

import json
from fractions import Fraction

import pytest

import derive
from derive.cli import main

INVERTING = """voltage source Vin between inp and gnd = 1 V
resistor R1 between inp and n = 10 kohm ±1% tc 25 ppm/K
resistor R2 between n and out = 100 kohm ±1% tc -75 ppm/K
opamp U1 inputs gnd, n output out
port out between out and gnd
temperature 25 C from -40 C to 85 C
find drift of gain from Vin to out
"""


def drift_of(text, index=0):
    rec = derive.derive_text(text, "t.eqv")
    return rec.results[index]


def test_ratio_of_two_resistors_against_the_hand_closed_form():
    # Inverting amplifier: gain = -R2/R1. With t = T - T0, a = tc(R1), b = tc(R2):
    #   gain(t) = -(R2/R1) (1 + b t)/(1 + a t)
    #   d gain/dt = -(R2/R1) (b - a)/(1 + a t)^2, one sign everywhere: the extremes are at the
    #   ends of the range; (1/gain) d gain/dT at t = 0 is b - a = -75 - 25 = -100 ppm/K.
    #   At T = 85 C (t = 60): -10 (1 - 75e-6*60)/(1 + 25e-6*60) = -10*0.9955/1.0015
    #   At T = -40 C (t = -65): -10 (1 + 75e-6*65)/(1 - 25e-6*65) = -10*1.004875/0.998375
    a, b = Fraction(25, 10**6), Fraction(-75, 10**6)

    def gain(t):
        return -10 * (1 + b * t) / (1 + a * t)
    r = drift_of(INVERTING)
    d = r.extra["drift"]
    assert d["ppm_per_K"] == pytest.approx(-100.0, abs=1e-12)
    assert d["exact"]["ppm_per_K"] == "-100"
    assert d["nominal"] == pytest.approx(-10.0)
    # gain(60) = -9.9401 (less negative), gain(-65) = -10.0651: the low is at -40 C
    assert d["low"] == pytest.approx(float(gain(Fraction(-65))), rel=1e-15)
    assert d["high"] == pytest.approx(float(gain(Fraction(60))), rel=1e-15)
    assert (d["at_low"], d["at_high"]) == (-40.0, 85.0)
    assert d["critical"] == []
    assert all(s.verified for s in r.steps)


POWER = """voltage source V between a and gnd = 10 V
resistor Rs between a and b = 110 ohm
resistor RL between b and gnd = 100 ohm tc 3900 ppm/K
temperature 25 C from -40 C to 125 C
find drift of power in RL
"""


def test_interior_extreme_against_a_dense_grid():
    # P(T) = V^2 RL(T)/(Rs + RL(T))^2 with RL(T) = 100 (1 + 0.0039 (T - 25)). RL(T) = Rs = 110
    # at T - 25 = 10/0.39 = 25.64 K: the maximum power transfer point (textbook) lies inside
    # the range, P_max = V^2/(4 Rs) = 100/440 exactly; P falls towards both ends.
    r = drift_of(POWER)
    d = r.extra["drift"]
    tc = Fraction(39, 10**4)

    def p(T):
        rl = 100 * (1 + tc * (T - 25))
        return Fraction(100) * rl / (110 + rl) ** 2
    grid = [Fraction(-40) + Fraction(165 * k, 20000) for k in range(20001)]
    vals = [p(T) for T in grid]
    gmax, gmin = max(vals), min(vals)
    assert d["high"] == pytest.approx(100 / 440, rel=1e-15)
    assert float(gmax) <= d["high"] * (1 + 1e-15)
    assert d["high"] - float(gmax) < 1e-9
    assert d["at_high"] == pytest.approx(25 + 10 / 0.39, abs=1e-9)
    assert len(d["critical"]) == 1
    # the minimum is at an end; the grid holds both ends exactly
    assert d["low"] == pytest.approx(float(gmin), rel=1e-15)
    assert d["at_low"] == float(grid[vals.index(gmin)])
    assert all(s.verified for s in r.steps)


def test_json_keys_of_section_5(tmp_path, capsys):
    path = tmp_path / "s.eqv"
    path.write_text(INVERTING, encoding="utf-8")
    capsys.readouterr()
    assert main(["record", str(path), "--format", "json"]) == 0
    out = json.loads(capsys.readouterr().out)
    d = out["results"][0]["drift"]
    assert {"nominal", "low", "high", "at_low", "at_high", "ppm_per_K", "method"} <= set(d)
    assert all(isinstance(d[k], float) for k in ("nominal", "low", "high", "at_low", "at_high"))
    steps = out["results"][0]["steps"]
    methods = [m["method"] for s in steps for m in s["verified_by"]]
    assert methods and "definition" not in methods and None not in methods


def test_no_tc_no_drift():
    text = INVERTING.replace(" tc 25 ppm/K", "").replace(" tc -75 ppm/K", "")
    r = drift_of(text)
    d = r.extra["drift"]
    assert d["low"] == d["high"] == d["nominal"] == pytest.approx(-10.0)
    assert d["ppm_per_K"] == 0.0
    assert any("does not drift" in n for n in r.notes)


def test_default_range_is_the_nominal_temperature_alone():
    text = INVERTING.replace("temperature 25 C from -40 C to 85 C\n", "")
    d = drift_of(text).extra["drift"]
    assert d["low"] == d["high"] == pytest.approx(-10.0)
    assert d["range"] == [25.0, 25.0]
    assert d["ppm_per_K"] == pytest.approx(-100.0)


def test_thevenin_gives_both_members():
    text = ("voltage source V between a and gnd = 5 V\n"
            "resistor R1 between a and b = 1 kohm tc 100 ppm/K\n"
            "resistor R2 between b and gnd = 1 kohm\nport out between b and gnd\n"
            "temperature 25 C from 0 C to 50 C\nfind drift of thevenin at out\n")
    r = drift_of(text)
    by = r.extra["drift_by_quantity"]
    assert set(by) == {"vth", "rth"}
    # rth = R1 R2/(R1 + R2): rises with R1; at 50 C R1 = 1002.5: 1002.5e3/2002.5 (by hand)
    assert by["rth"]["high"] == pytest.approx(1002.5 * 1000 / 2002.5, rel=1e-15)
    assert by["rth"]["at_high"] == 50.0


@pytest.mark.parametrize("text, needle, where", [
    (INVERTING.replace("= 100 kohm ±1% tc -75 ppm/K", ""), "nominal values of: R2", (7, 1)),
    ("voltage source V between a and gnd = 1 V\nnominal R = 1 kohm\n"
     "resistor R1 between a and b = 2*R tc 50 ppm/K\nresistor R2 between b and gnd = 1 kohm\n"
     "port out between b and gnd\nfind drift of vth at out\n", "expression", (3, 38)),
])
def test_bad_input_is_a_located_error(tmp_path, capsys, text, needle, where):
    path = tmp_path / "s.eqv"
    path.write_text(text, encoding="utf-8")
    capsys.readouterr()
    assert main(["record", str(path)]) == 2
    err = capsys.readouterr().err
    assert err.startswith(f"{path}:{where[0]}:{where[1]}: error: "), err
    assert needle in err and "Traceback" not in err


def test_a_wrong_intermediate_fails_its_check():
    """Mutation: a wrong Q(T), a wrong drift coefficient: the steps holding them are not
    verified (their checks are independent computations)."""
    from derive.analyses import drift
    from derive.forms.results import Context, Options
    import flint
    c = derive.circuit_of(INVERTING, "t.eqv")
    ctx = Context(c, Options())
    req = c.requests[0]
    a = drift.analysed(ctx, req)[0]
    d = drift.Drift(ctx, a, drift.tc_of_symbols(ctx, req), req)
    assert all(s.verified for s in d.steps())
    d.N = d.N * flint.fmpq_poly([1, flint.fmpq(1, 1000)])      # Q(T) off by (1 + t/1000)
    assert not all(s.verified for s in d.steps())
    d = drift.Drift(ctx, a, drift.tc_of_symbols(ctx, req), req)
    d.coefficient += Fraction(1, 10**7)                          # 0.1 ppm/K off
    steps = d.steps()
    assert not steps[-1].verified and all(s.verified for s in steps[:-1])
