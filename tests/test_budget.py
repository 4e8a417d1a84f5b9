"""``find budget of Q``: initial tolerances and temperature drift together.

References: brute-force grids over the tolerance box × temperature range evaluated in this
test from hand-written formulas (the voltage divider rule; P = V^2 RL/(Rs + RL)^2, textbook),
and the first-order (linearised) RSS worked by hand from the derivatives of the divider.
"""
from __future__ import annotations

import itertools
import json
import math
from fractions import Fraction

import pytest

import derive
from derive.cli import main

DIVIDER = """voltage source Vin between top and gnd = 5 V
resistor R1 between top and out = 10 kohm ±1% tc 100 ppm/K
resistor R2 between out and gnd = 4.7 kohm ±2% tc -200 ppm/K
port out between out and gnd
temperature 25 C from -40 C to 85 C
find budget of vth at out
"""


def linspace(lo, hi, n):
    return [lo + (hi - lo) * Fraction(k, n - 1) for k in range(n)]


def grid_extremes(f, axes):
    vals = [f(*p) for p in itertools.product(*axes)]
    return min(vals), max(vals)


def test_divider_extremes_against_a_brute_force_grid():
    r = derive.derive_text(DIVIDER, "d.eqv").results[0]
    b = r.extra["budget"]

    def vth(e1, e2, T):     # e = relative deviation from nominal; T in deg C
        t = T - 25
        r1 = 10000 * (1 + e1) * (1 + Fraction(100, 10**6) * t)
        r2 = 4700 * (1 + e2) * (1 + Fraction(-200, 10**6) * t)
        return 5 * r2 / (r1 + r2)
    lo, hi = grid_extremes(vth, [linspace(Fraction(-1, 100), Fraction(1, 100), 11),
                                 linspace(Fraction(-2, 100), Fraction(2, 100), 11),
                                 linspace(Fraction(-40), Fraction(85), 26)])
    # the grid holds the corners, where a divider takes its extremes (monotone in each part)
    assert b["low"] == pytest.approx(float(lo), rel=1e-12)
    assert b["high"] == pytest.approx(float(hi), rel=1e-12)
    assert b["nominal"] == pytest.approx(5 * 4700 / 14700)
    assert all(s.verified for s in r.steps)


def test_first_order_rss_worked_by_hand():
    # vth = V R2/(R1 + R2): dvth/dR1 = -V R2/(R1+R2)^2, dvth/dR2 = V R1/(R1+R2)^2.
    # tolerance terms: |dvth/dR1| R1 0.01 and |dvth/dR2| R2 0.02; temperature: one shared
    # variable, dvth/dT = dvth/dR1 R1 100e-6 + dvth/dR2 R2 (-200e-6), over max|T - T0| = 65 K.
    V, R1, R2 = 5.0, 10000.0, 4700.0
    s = (R1 + R2) ** 2
    d1, d2 = -V * R2 / s, V * R1 / s
    c1, c2 = abs(d1) * R1 * 0.01, abs(d2) * R2 * 0.02
    cT = abs(d1 * R1 * 100e-6 + d2 * R2 * -200e-6) * 65
    r = derive.derive_text(DIVIDER, "d.eqv").results[0]
    b = r.extra["budget"]
    assert b["rss"] == pytest.approx(math.sqrt(c1 ** 2 + c2 ** 2 + cT ** 2), rel=1e-12)
    assert b["temperature_term"] == pytest.approx(cT, rel=1e-12)
    rows = r.extra["budget_contributions"]
    assert [x["value"] for x in rows] == sorted((x["value"] for x in rows), reverse=True)
    got = {(x["part"], x["source"]): x["value"] for x in rows}
    assert got[("R2", "initial tolerance")] == pytest.approx(c2, rel=1e-12)
    assert got[("R1", "drift")] == pytest.approx(abs(d1 * R1 * 100e-6) * 65, rel=1e-12)
    assert sum(x["share"] for x in rows) == pytest.approx(1.0)
    assert "first order" in b["method"]


POWER = """voltage source V between a and gnd = 10 V
resistor Rs between a and b = 110 ohm ±5%
resistor RL between b and gnd = 100 ohm ±1% tc 3900 ppm/K
temperature 25 C from -40 C to 125 C
find budget of power in RL
"""


def test_non_monotone_budget_against_a_brute_force_grid():
    # P = V^2 RL/(Rs + RL)^2 peaks at RL = Rs (maximum power transfer, textbook): inside the
    # box × range, so the maximum is no corner. The grid is fine enough that its maximum is
    # within 1e-6 relative of the true one; the reported high may not be below it.
    r = derive.derive_text(POWER, "p.eqv").results[0]
    b = r.extra["budget"]

    def p(es, el, T):
        rs = 110 * (1 + es)
        rl = 100 * (1 + el) * (1 + Fraction(39, 10**4) * (T - 25))
        return Fraction(100) * rl / (rs + rl) ** 2
    lo, hi = grid_extremes(p, [linspace(Fraction(-5, 100), Fraction(5, 100), 21),
                               linspace(Fraction(-1, 100), Fraction(1, 100), 5),
                               linspace(Fraction(-40), Fraction(125), 331)])
    assert b["high"] >= float(hi) * (1 - 1e-12)
    assert b["high"] <= float(hi) * (1 + 1e-6)
    # max over the box: RL reaches Rs somewhere for every Rs in its tolerance, so the peak
    # is V^2/(4 Rs) at the smallest Rs, 100/(4*104.5) exactly
    assert b["high"] == pytest.approx(100 / (4 * 104.5), rel=1e-9)
    assert b["low"] == pytest.approx(float(lo), rel=1e-9)


def test_json_keys_of_section_5(tmp_path, capsys):
    path = tmp_path / "s.eqv"
    path.write_text(DIVIDER, encoding="utf-8")
    capsys.readouterr()
    assert main(["record", str(path), "--format", "json"]) == 0
    res = json.loads(capsys.readouterr().out)["results"][0]
    assert {"nominal", "low", "high", "rss", "method"} <= set(res["budget"])
    assert res["budget_contributions"] and all(
        {"part", "source", "value", "share"} <= set(x) for x in res["budget_contributions"])


def test_missing_nominal_is_a_located_error(tmp_path, capsys):
    path = tmp_path / "s.eqv"
    path.write_text(DIVIDER.replace("= 4.7 kohm ±2% tc -200 ppm/K", ""), encoding="utf-8")
    capsys.readouterr()
    assert main(["record", str(path)]) == 2
    err = capsys.readouterr().err
    assert err.startswith(f"{path}:6:1: error: ") and "R2" in err and "Traceback" not in err
