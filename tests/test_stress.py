"""``find stress``: worst case over tolerances and temperature against derated ratings.

References: a brute-force search written in this file (every corner of the box of
tolerances × temperature range, plus a dense grid over it), each point solved by a numpy
nodal solve written here; the maximum power transfer theorem (a load RL fed from V through
Rs takes at most V²/(4·Rs), at RL = Rs; textbook), worked by hand below.
"""
from __future__ import annotations

import itertools
import json

import numpy as np
import sympy
import pytest

import derive
from derive.cli import main
from tests.helpers import run


# ------------------------------------------------------------------ independent reference
def resistor_powers(v_src, resistors, ground="gnd"):
    """Absorbed power of each resistor of a network fed by ideal voltage sources: ``v_src``
    {node: volts against ground}, ``resistors`` [(name, a, b, ohms)]. Nodal analysis with the
    source nodes known (written for this test)."""
    nodes = sorted({n for _, a, b, _ in resistors for n in (a, b)} - {ground} - set(v_src))
    at = {n: k for k, n in enumerate(nodes)}
    G = np.zeros((len(nodes), len(nodes)))
    rhs = np.zeros(len(nodes))
    known = dict(v_src)
    known[ground] = 0.0
    for _, a, b, r in resistors:
        g = 1.0 / r
        for x, y in ((a, b), (b, a)):
            if x in at:
                G[at[x], at[x]] += g
                if y in at:
                    G[at[x], at[y]] -= g
                else:
                    rhs[at[x]] += g * known[y]
    x = np.linalg.solve(G, rhs) if nodes else np.zeros(0)
    v = dict(known)
    v.update({n: x[at[n]] for n in nodes})
    return {name: (v[a] - v[b]) ** 2 / r for name, a, b, r in resistors}, v


def batch_powers(v_src, names, ends, ohms, ground="gnd"):
    """The same nodal solve as :func:`resistor_powers`, for many points at once: ``ohms`` is
    an array (points, resistors); returns the absorbed powers, same shape."""
    nodes = sorted({n for a, b in ends for n in (a, b)} - {ground} - set(v_src))
    at = {n: k for k, n in enumerate(nodes)}
    m = ohms.shape[0]
    G = np.zeros((m, len(nodes), len(nodes)))
    rhs = np.zeros((m, len(nodes)))
    known = dict(v_src)
    known[ground] = 0.0
    for k, (a, b) in enumerate(ends):
        g = 1.0 / ohms[:, k]
        for x, y in ((a, b), (b, a)):
            if x in at:
                G[:, at[x], at[x]] += g
                if y in at:
                    G[:, at[x], at[y]] -= g
                else:
                    rhs[:, at[x]] += g * known[y]
    x = np.linalg.solve(G, rhs[..., None])[..., 0]

    def v(n):
        return x[:, at[n]] if n in at else np.full(m, known[n])
    return np.stack([(v(a) - v(b)) ** 2 / ohms[:, k] for k, (a, b) in enumerate(ends)], 1)


def brute_force(parts, v_src, element, temps, grid=9, t0=25.0):
    """Max power of ``element`` over the box × temperature: every corner, plus a grid of
    ``grid`` points per coordinate. ``parts``: (name, a, b, nominal, tol, tc)."""
    names = [p[0] for p in parts]
    ends = [(p[1], p[2]) for p in parts]
    r0 = np.array([p[3] for p in parts], dtype=float)
    tol = np.array([p[4] for p in parts], dtype=float)
    tc = np.array([p[5] for p in parts], dtype=float)
    best = -np.inf
    for axis in ([-1.0, 1.0], np.linspace(-1, 1, grid)):
        axes = [axis if t else [0.0] for t in tol]
        taxis = [temps[0], temps[1]] if axis is not None and len(axis) == 2 else \
            np.linspace(temps[0], temps[1], grid)
        u = np.array(list(itertools.product(*axes)), dtype=float)
        for T in taxis:
            ohms = r0 * (1 + u * tol) * (1 + tc * (T - t0))
            p = batch_powers(v_src, names, ends, ohms)[:, names.index(element)]
            best = max(best, float(p.max()))
    return best


def sheet_of(parts, v_src, ratings, temps=(25, 25), derating=100, extra=""):
    lines = [f"voltage source V{k} between {n} and gnd = {v} V"
             for k, (n, v) in enumerate(v_src.items(), 1)]
    for name, a, b, r0, tol, tc in parts:
        line = f"resistor {name} between {a} and {b} = {r0} ohm"
        if tol:
            line += f" ±{tol * 100:g}%"
        if name in ratings:
            line += f" rated {ratings[name]} W"
        if tc:
            line += f" tc {tc * 1e6:g} ppm/K"
        lines.append(line)
    lines.append(f"temperature 25 C from {temps[0]} C to {temps[1]} C")
    lines.append(f"derating {derating}%")
    return "\n".join(lines) + "\n" + extra + "find stress\n"


def stress_of(text):
    rec = run(text)
    js = json.loads(rec.to_json())
    r = [x for x in js["results"] if x["request"] == "find stress"][0]
    return r


# ------------------------------------------------------------------ monotone cases
BRIDGE = [("R1", "a", "b", 1000, 0.01, 100e-6), ("R2", "b", "gnd", 2200, 0.01, -200e-6),
          ("R3", "a", "c", 3300, 0.05, 0), ("R4", "c", "gnd", 4700, 0.02, 50e-6),
          ("R5", "b", "c", 560, 0.05, 0)]


@pytest.mark.parametrize("element", ["R1", "R2", "R4", "R5"])
def test_bridge_worst_power_matches_brute_force(element):
    text = sheet_of(BRIDGE, {"a": 12}, {element: 0.25}, temps=(-40, 85), derating=60)
    r = stress_of(text)
    s = r["stress"][element]
    want = brute_force(BRIDGE, {"a": 12.0}, element, (-40.0, 85.0), grid=5)
    # the brute force only samples the box: derive's maximum is at least as large, and
    # (monotone here, so a corner) not larger than rounding
    assert s["worst"] == pytest.approx(want, rel=1e-9)
    nominal = resistor_powers({"a": 12.0}, [(n, a, b, r0) for n, a, b, r0, _, _ in BRIDGE])[0]
    assert s["nominal"] == pytest.approx(nominal[element], rel=1e-12)
    assert s["rating"] == 0.25 and s["limit"] == pytest.approx(0.15)
    assert s["ok"] is (s["worst"] <= 0.15)
    assert s["quantity"] == "power" and s["unit"] == "W"
    assert "corner" in s["method"] and "T" in s["corner"]


# ------------------------------------------------------------------ not monotone: matching
def test_load_power_maximum_inside_the_box_is_exact():
    """P_RL = V²·RL/(Rs + RL)² is largest at RL = Rs (maximum power transfer), inside RL's
    band; Rs drifts (tc), RL does not. By hand: Rs is lowest at its low end and the lowest
    temperature (tc > 0): Rs_min = 100·0.95·(1 + 200e-6·(−40 − 25)) = 93.765 Ω, inside RL's
    band [80, 120] Ω, so P_max = V²/(4·Rs_min) = 100/375.06 = 0.266624... W."""
    parts = [("Rs", "a", "b", 100, 0.05, 200e-6), ("RL", "b", "gnd", 100, 0.2, 0)]
    r = stress_of(sheet_of(parts, {"a": 10}, {"RL": 0.5}, temps=(-40, 85)))
    s = r["stress"]["RL"]
    rs_min = 100 * 0.95 * (1 + 200e-6 * (-40 - 25))
    assert s["worst"] == pytest.approx(100 / (4 * rs_min), rel=1e-12)
    assert s["corner"]["RL"] == pytest.approx(rs_min, rel=1e-12)
    assert s["corner"]["T"] == -40.0
    assert "exact in RL" in s["method"] and "inside its band" in s["at"]
    # the brute force over the box (corners and a dense grid) agrees from below
    want = brute_force(parts, {"a": 10.0}, "RL", (-40.0, 85.0), grid=41)
    assert want <= s["worst"] * (1 + 1e-12) and want == pytest.approx(s["worst"], rel=1e-3)
    # every corner is below the interior maximum: a corner search would have missed it
    corners = brute_force(parts, {"a": 10.0}, "RL", (-40.0, 85.0), grid=2)
    assert corners < s["worst"] * (1 - 1e-3)


def test_load_power_with_two_unproven_coordinates_against_brute_force():
    """RL drifts too, so neither RL nor T is proven monotone: the bounded interior search.
    Its maximum must still reach the brute force's (corners and dense grid)."""
    parts = [("Rs", "a", "b", 100, 0.05, 0), ("RL", "b", "gnd", 100, 0.2, 300e-6)]
    r = stress_of(sheet_of(parts, {"a": 10}, {"RL": 0.5}, temps=(-40, 85)))
    s = r["stress"]["RL"]
    want = brute_force(parts, {"a": 10.0}, "RL", (-40.0, 85.0), grid=41)
    # by hand: with RL able to meet Rs anywhere, P_max = V²/(4·Rs_min) = 100/380 W
    assert s["worst"] == pytest.approx(100 / 380, rel=1e-7)
    assert s["worst"] >= want * (1 - 1e-9)
    assert "interior search" in s["method"]
    # the corner it names gives that worst power (the same nodal solve at that point)
    c = s["corner"]
    ohms = np.array([[c["Rs"], c["RL"] * (1 + 300e-6 * (c["T"] - 25))]])
    at = batch_powers({"a": 10.0}, ["Rs", "RL"], [("a", "b"), ("b", "gnd")], ohms)[0, 1]
    assert at == pytest.approx(s["worst"], rel=1e-9)


# ------------------------------------------------------------------ verdicts and the CLI
def test_a_failing_verdict_makes_check_exit_1(tmp_path, capsys):
    parts = [("R1", "a", "b", 1000, 0.01, 0), ("R2", "b", "gnd", 1000, 0.01, 0)]
    # nominal P_R2 = (5 V)²/1 kΩ = 25 mW; rated 40 mW at 50 % derating: limit 20 mW -> fails
    path = tmp_path / "s.eqv"
    path.write_text(sheet_of(parts, {"a": 10}, {"R2": 0.04, "R1": 1}, derating=50),
                    encoding="utf-8")
    capsys.readouterr()
    assert main(["check", str(path)]) == 1
    out = capsys.readouterr().out
    assert "FAIL" in out and "R2" in out and "PASS" in out
    assert main(["record", str(path)]) == 0          # the record documents the verdict
    md = capsys.readouterr().out
    assert "EXCEEDED" in md and "Caution" in md and "datasheet" in md
    path.write_text(sheet_of(parts, {"a": 10}, {"R2": 0.1}, derating=50), encoding="utf-8")
    assert main(["check", str(path)]) == 0
    assert "PASS" in capsys.readouterr().out


def test_json_keys_as_in_the_contract():
    parts = [("R1", "a", "b", 1000, 0.01, 0), ("R2", "b", "gnd", 1000, 0.01, 100e-6)]
    r = stress_of(sheet_of(parts, {"a": 10}, {"R2": 0.25}, temps=(0, 70)))
    s = r["stress"]["R2"]
    assert {"quantity", "nominal", "worst", "rating", "limit", "ok"} <= set(s)
    assert all(isinstance(s[k], float) for k in ("nominal", "worst", "rating", "limit"))
    assert isinstance(s["ok"], bool)
    assert set(r["stress"]) == {"R2"}
    assert any("datasheet" in n for n in r["notes"])


def test_voltage_rating_of_a_capacitor():
    text = ("voltage source V1 between a and gnd = 24 V\n"
            "resistor R1 between a and b = 10 kohm ±5%\n"
            "resistor R2 between b and gnd = 10 kohm ±5% rated 0.25 W 200 V\n"
            "capacitor C1 between b and gnd = 1 uF ±10% rated 10 V\n"
            "find stress\n")
    r = stress_of(text)
    c = r["stress"]["C1"]
    # DC: C1 open, v_b = 24·R2/(R1 + R2), largest at R1 low, R2 high: 24·10.5/20 = 12.6 V
    assert c["quantity"] == "voltage" and c["unit"] == "V"
    assert c["worst"] == pytest.approx(12.6, rel=1e-12) and c["ok"] is False
    assert r["stress"]["R2 (voltage)"]["worst"] == pytest.approx(12.6, rel=1e-12)
    # P_R2 = v_b²/R2, largest at R1 low: with R2 free, max of 576·R2/(R1+R2)² at R1=9.5k
    # is at R2 = R1 (inside R2's band 9.5k..10.5k), 576/(4·9500) = 15.157... mW
    assert r["stress"]["R2"]["worst"] == pytest.approx(576 / 38000, rel=1e-12)


# ------------------------------------------------------------------ bad input
def test_no_rated_element_is_a_note_not_an_error(tmp_path, capsys):
    path = tmp_path / "n.eqv"
    path.write_text("voltage source V1 between a and gnd = 1 V\n"
                    "resistor R1 between a and gnd = 1 kohm\nfind stress\n", encoding="utf-8")
    capsys.readouterr()
    assert main(["record", str(path), "--format", "json"]) == 0
    js = json.loads(capsys.readouterr().out)
    assert js["results"][0]["stress"] == {}
    assert "no element has a rating" in js["results"][0]["notes"][0]
    assert main(["check", str(path)]) == 0


def test_a_rated_part_without_a_value_is_a_located_error(tmp_path, capsys):
    path = tmp_path / "v.eqv"
    path.write_text("voltage source V1 between a and gnd = 1 V\n"
                    "resistor R1 between a and b rated 1 W\n"
                    "resistor R2 between b and gnd = 1 kohm\nfind stress\n", encoding="utf-8")
    capsys.readouterr()
    code = main(["record", str(path)])
    err = capsys.readouterr().err
    assert code == 2 and err.startswith(f"{path}:4:1: error: ") and "R1" in err
    assert "Traceback" not in err


def test_steps_are_verified_and_name_the_corner():
    parts = [("R1", "a", "b", 1000, 0.01, 100e-6), ("R2", "b", "gnd", 2000, 0.01, 0)]
    rec = run(sheet_of(parts, {"a": 10}, {"R1": 0.25}, temps=(-40, 85)))
    steps = rec.results[0].steps
    assert all(s.verified for s in steps)
    worst = [s for s in steps if s.text.startswith("R1: worst")][0]
    # P_R1 = V²R1'/(R1' + R2)², R1' = R1(1 + tc ΔT) < R2 everywhere: increasing in R1' (so
    # R1 high and T high), decreasing in R2 (R2 low), by hand from the derivative's sign
    assert "R1 high" in worst.text and "R2 low" in worst.text and "T = 85 °C" in worst.text
    # the worst value was recomputed exactly (shown as an equation only when short)
    assert "recomputed exactly" in worst.text and "agrees" in worst.text
    assert rec.results[0].extra["stress"]["R1"]["worst_check"] == "exact"
    assert all(e.verified_by == "exact" for e in worst.equations)


def test_a_wrong_drifted_form_is_caught(monkeypatch):
    """Mutation (as in tests/test_mutations.py; common practice, no source): a drifted form 1 %
    off is found out by the exact recomputation of the worst value without drift."""
    from derive.analyses import stress
    real = stress._drifted

    def wrong(form, subs):
        f = real(form, subs)
        return stress.sens.Form(f.defs, f.final * sympy.Rational(101, 100))
    monkeypatch.setattr(stress, "_drifted", wrong)
    parts = [("R1", "a", "b", 1000, 0.01, 100e-6), ("R2", "b", "gnd", 2000, 0.01, 0)]
    with pytest.raises(stress.StressFailed):
        run(sheet_of(parts, {"a": 10}, {"R2": 0.25}, temps=(-40, 85)))
