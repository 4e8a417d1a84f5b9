"""``find operating point``: DC node voltages, element currents and powers, power balance.

References: a numpy nodal solve written for this file (modified nodal analysis as in any
circuits textbook: KCL at every node, one extra unknown per voltage source); Tellegen's
theorem (the absorbed powers of all elements of a network add to zero; textbook); the
voltage divider rule v = V·R2/(R1 + R2) and the non-inverting amplifier gain 1 + Rf/Rg
(handbook closed forms, worked by hand in the comments).
"""
from __future__ import annotations

import json
import random

import numpy as np
import pytest
import sympy

import derive
from derive.cli import main
from tests.helpers import BRIDGE_PARTS, DIVIDER_PARTS, run


# ------------------------------------------------------------------ independent reference
def dc_solve(parts, ground="gnd"):
    """DC node voltages, element currents and absorbed powers of ``parts``: tuples
    (kind, name, a, b, value), kind 'R' (resistor a-b), 'V' (voltage source, + at a),
    'I' (current source driving from a through itself to b), 'W' (a wire: a 0 V source, how an
    inductor is at DC), 'O' (open: a capacitor at DC, no current). Written for this test."""
    nodes = sorted({n for p in parts for n in p[2:4]} - {ground})
    at = {n: k for k, n in enumerate(nodes)}
    vs = [p for p in parts if p[0] in "VW"]
    n = len(nodes) + len(vs)
    M = np.zeros((n, n))
    rhs = np.zeros(n)
    for kind, name, a, b, val in parts:
        if kind == "R":
            g = 1.0 / val
            for x, y, s in ((a, a, 1), (b, b, 1), (a, b, -1), (b, a, -1)):
                if x in at and y in at:
                    M[at[x], at[y]] += s * g
        elif kind == "I":                # val leaves node a into the source, enters b
            if a in at:
                rhs[at[a]] -= val
            if b in at:
                rhs[at[b]] += val
    for k, (kind, name, a, b, val) in enumerate(vs):
        j = len(nodes) + k
        if a in at:
            M[at[a], j] += 1.0
            M[j, at[a]] += 1.0
        if b in at:
            M[at[b], j] -= 1.0
            M[j, at[b]] -= 1.0
        rhs[j] = val if kind == "V" else 0.0
    x = np.linalg.solve(M, rhs)
    volt = {nd: x[at[nd]] for nd in nodes}
    volt[ground] = 0.0
    cur, pw = {}, {}
    for kind, name, a, b, val in parts:
        v = volt[a] - volt[b]
        if kind == "R":
            i = v / val
        elif kind in "VW":
            i = x[len(nodes) + vs.index((kind, name, a, b, val))]
        elif kind == "I":
            i = val
        else:
            i = 0.0
        cur[name], pw[name] = i, v * i
    return volt, cur, pw


def sheet_of(parts, extra="find operating point\n"):
    words = {"R": "resistor {n} between {a} and {b} = {v} ohm",
             "V": "voltage source {n} between {a} and {b} = {v} V",
             "I": "current source {n} from {a} to {b} = {v} A"}
    return "\n".join(words[k].format(n=n, a=a, b=b, v=v) for k, n, a, b, v in parts) + \
        "\n" + extra


def op_of(text):
    rec = run(text)
    r = [x for x in rec.results if x.request.quantity == "operating_point"][0]
    return r, json.loads(rec.to_json())["results"][rec.results.index(r)]


def random_circuit(rnd: random.Random):
    """A connected resistor network on 3-6 nodes with 1-2 voltage and 0-2 current sources."""
    k = rnd.randint(3, 6)
    nodes = ["gnd"] + [f"n{i}" for i in range(1, k)]
    parts = []
    for i in range(1, k):                                   # a spanning tree of resistors
        parts.append(("R", f"R{len(parts) + 1}", nodes[i], rnd.choice(nodes[:i]),
                      rnd.randint(1, 100) * 10))
    for _ in range(rnd.randint(0, 4)):
        a, b = rnd.sample(nodes, 2)
        parts.append(("R", f"R{len(parts) + 1}", a, b, rnd.randint(1, 100) * 10))
    for j in range(rnd.randint(1, 2)):
        a = rnd.choice(nodes[1:])
        parts.append(("V", f"V{j + 1}", a, "gnd", rnd.randint(-20, 20) or 1))
        # a second source on the same node would fight the first: only distinct nodes
        nodes = [n for n in nodes if n != a]
        if len(nodes) < 2:
            break
    for j in range(rnd.randint(0, 2)):
        a, b = rnd.sample(nodes, 2)
        parts.append(("I", f"I{j + 1}", a, b, rnd.randint(-50, 50) / 1000 or 0.001))
    return parts


# ------------------------------------------------------------------ Tellegen on random circuits
@pytest.mark.parametrize("seed", range(12))
def test_tellegen_and_every_value_on_random_circuits(seed):
    rnd = random.Random(1000 + seed)
    parts = random_circuit(rnd)
    volt, cur, pw = dc_solve(parts)
    # Tellegen's theorem on the reference itself (the reference must obey it too)
    assert abs(sum(pw.values())) <= 1e-9 * max(1.0, max(abs(p) for p in pw.values()))
    r, js = op_of(sheet_of(parts))
    op = js["operating_point"]
    for nd, v in volt.items():
        if nd != "gnd":
            assert op["nodes"][nd]["value"] == pytest.approx(v, rel=1e-9, abs=1e-12)
            assert op["nodes"][nd]["unit"] == "V"
    for name in cur:
        assert op["currents"][name]["value"] == pytest.approx(cur[name], rel=1e-9, abs=1e-12)
        assert op["power"][name]["value"] == pytest.approx(pw[name], rel=1e-9, abs=1e-12)
        assert op["currents"][name]["unit"] == "A" and op["power"][name]["unit"] == "W"
    # derive's own balance: exact, shown as a verified step (never a definition)
    assert op["balance"]["exact_zero"] is True and op["balance"]["value"] == 0.0
    bal = [s for s in js["steps"] if s["text"].startswith("Power balance")][0]
    assert bal["verified"] and bal["verified_by"] == [{"method": "exact"}]
    assert all(s["verified"] for s in js["steps"])


# ------------------------------------------------------------------ divider and bridge
DIVIDER, BRIDGE = DIVIDER_PARTS, BRIDGE_PARTS


def test_divider_closed_forms_and_values():
    r, js = op_of(sheet_of(DIVIDER))
    V1, R1, R2 = sympy.symbols("V1 R1 R2")
    op = r.extra["operating_point"]
    # divider rule by hand: v_b = V1·R2/(R1 + R2) = 10·4000/5000 = 8 V; i = V1/(R1 + R2) = 2 mA
    assert sympy.simplify(op["nodes"]["b"]["expr"] - V1 * R2 / (R1 + R2)) == 0
    assert op["nodes"]["b"]["value"] == 8.0
    # P_R2 = V1²·R2/(R1 + R2)² = 100·4000/25e6 = 16 mW; the source delivers 20 mW
    assert sympy.simplify(op["power"]["R2"]["expr"] - V1**2 * R2 / (R1 + R2)**2) == 0
    volt, cur, pw = dc_solve(DIVIDER)
    for name, p in pw.items():
        assert op["power"][name]["value"] == pytest.approx(p, rel=1e-12)
    assert op["power"]["V1"]["value"] == pytest.approx(-0.02, rel=1e-12)
    assert op["currents"]["V1"]["value"] == pytest.approx(-0.002, rel=1e-12)   # enters + end


def test_bridge_against_numpy():
    r, js = op_of(sheet_of(BRIDGE))
    volt, cur, pw = dc_solve(BRIDGE)
    op = js["operating_point"]
    assert set(op) >= {"nodes", "currents", "power"}
    assert set(op["nodes"]) == {"a", "b", "c"}
    assert set(op["currents"]) == set(op["power"]) == {p[1] for p in BRIDGE}
    for nd in ("a", "b", "c"):
        assert op["nodes"][nd]["value"] == pytest.approx(volt[nd], rel=1e-12)
    for name in pw:
        assert op["power"][name]["value"] == pytest.approx(pw[name], rel=1e-12)
    for entry in list(op["nodes"].values()) + list(op["power"].values()):
        assert set(entry) == {"expr", "value", "unit"}
        assert isinstance(entry["expr"], str) and isinstance(entry["value"], float)


def test_exact_values_behind_the_floats():
    """The node voltage of the divider at nominal is exact (4/5 of 10 V exactly)."""
    rec = run(sheet_of([("V", "V1", "a", "gnd", 10), ("R", "R1", "a", "b", 1000),
                        ("R", "R2", "b", "gnd", 2000)]))
    st = [s for s in rec.results[0].steps if s.text.startswith("Power balance")][0]
    assert st.equations[0].rhs == 0 and st.equations[0].verified_by == "exact"
    from derive.forms.operating_point import operating_point
    from derive.forms.results import Context, Options
    c = derive.circuit_of(sheet_of([("V", "V1", "a", "gnd", 10), ("R", "R1", "a", "b", 1000),
                                    ("R", "R2", "b", "gnd", 2000)]), "d.eqv")
    op = operating_point(Context(c, Options()), c.requests[0])
    assert op.nodes["b"].exact == sympy.Rational(20, 3)      # 10·2000/3000, by hand
    assert op.balance_at_nominal == 0


# ------------------------------------------------------------------ reactive and op-amp
REACTIVE = """voltage source V between a and gnd = 10 V
resistor R1 between a and b = 1 kohm
inductor L1 between b and c = 10 mH
resistor R2 between c and gnd = 4 kohm
capacitor C1 between c and gnd = 1 uF
resistor R3 between a and d = 2 kohm
capacitor C2 between d and gnd = 1 uF
find operating point
"""


def test_reactive_circuit_at_dc():
    r, js = op_of(REACTIVE)
    # DC: L1 a wire, C1 and C2 open (no current through R3, so d sits at 10 V)
    volt, cur, pw = dc_solve([("V", "V", "a", "gnd", 10), ("R", "R1", "a", "b", 1000),
                              ("W", "L1", "b", "c", 0), ("R", "R2", "c", "gnd", 4000),
                              ("O", "C1", "c", "gnd", 0), ("R", "R3", "a", "d", 2000),
                              ("O", "C2", "d", "gnd", 0)])
    op = js["operating_point"]
    for nd in ("a", "b", "c", "d"):
        assert op["nodes"][nd]["value"] == pytest.approx(volt[nd], rel=1e-12, abs=1e-15)
    for name in pw:
        assert op["power"][name]["value"] == pytest.approx(pw[name], rel=1e-12, abs=1e-15)
    assert op["currents"]["C1"]["value"] == 0 and op["power"]["L1"]["value"] == 0
    s = sympy.Symbol("s")
    assert all(s not in e["expr"].free_symbols
               for e in r.extra["operating_point"]["nodes"].values())
    assert any("DC" in n for n in js["notes"])
    assert all(s["verified"] for s in js["steps"])


def test_ideal_opamp_power_is_in_the_balance():
    text = ("voltage source Vin between p and gnd = 1 V\n"
            "opamp U1 inputs p, n output o\n"
            "resistor Rf between o and n = 9 kohm\nresistor Rg between n and gnd = 1 kohm\n"
            "resistor RL between o and gnd = 2 kohm\nfind operating point\n")
    r, js = op_of(text)
    op = js["operating_point"]
    # non-inverting gain 1 + Rf/Rg = 10 (handbook): v_o = 10 V; the op-amp supplies the
    # current of Rf+Rg (1 mA) and of RL (5 mA): 6 mA at 10 V = 60 mW delivered
    assert op["nodes"]["o"]["value"] == pytest.approx(10.0)
    assert op["power"]["U1"]["value"] == pytest.approx(-0.06)
    assert op["power"]["Vin"]["value"] == 0
    assert op["balance"]["exact_zero"] is True


def test_record_shows_the_tables(tmp_path):
    path = tmp_path / "b.eqv"
    path.write_text(sheet_of(BRIDGE), encoding="utf-8")
    out = tmp_path / "b.md"
    assert main(["record", str(path), "-o", str(out)]) == 0
    md = out.read_text(encoding="utf-8")
    assert "| node | voltage against gnd |" in md
    assert "| element | kind | v (V) | i (A) | p (W) | power |" in md
    assert "power balance: absorbed powers add to zero (exact)" in md


def test_no_dc_solution_is_a_located_error(tmp_path, capsys):
    path = tmp_path / "p.eqv"
    path.write_text("current source I1 from gnd to a = 1 mA\ncapacitor C1 between a and gnd = "
                    "1 uF\nresistor R1 between a and b = 1 kohm\nfind operating point\n",
                    encoding="utf-8")
    capsys.readouterr()
    assert main(["record", str(path)]) == 2
    err = capsys.readouterr().err
    assert err.startswith(f"{path}:4:1: error: ") and "DC" in err and "Traceback" not in err


# ------------------------------------------------------------------ mutations
# Mutation tests (as in tests/test_mutations.py; common practice, no source): a wrong
# intermediate fed into the operating point must not pass its checks.
def _mutated(monkeypatch, which):
    from derive.forms import operating_point as opf
    real = opf._entry if hasattr(opf, "_entry") else None
    calls = {"n": 0}

    def wrong(name, ratio, unit, nominal):
        e = real(name, ratio, unit, nominal)
        if unit == which and name == ("b" if which == "V" else "R2"):
            e.expr = e.expr * sympy.Rational(101, 100)       # 1 % off
            calls["n"] += 1
        return e
    monkeypatch.setattr(opf, "_entry", wrong)
    return calls


@pytest.mark.parametrize("which", ["V", "A", "W"])
def test_a_wrong_closed_form_is_caught(monkeypatch, which):
    from derive.derivation.op_steps import OperatingPointFailed
    calls = _mutated(monkeypatch, which)
    with pytest.raises(OperatingPointFailed):
        run(sheet_of(DIVIDER))
    assert calls["n"] == 1


def test_a_wrong_power_ratio_breaks_the_balance(monkeypatch):
    """One element's power ratio doubled: the exact sum no longer cancels."""
    from derive.forms import operating_point as opf
    from derive.derivation.op_steps import OperatingPointFailed
    real = opf.ratio_sum

    def doubled(ratios):
        ratios = list(ratios)
        r = ratios[0]
        ratios[0] = type(r)(r.num * 2, r.den, r.system)
        return real(ratios)
    monkeypatch.setattr(opf, "ratio_sum", doubled)
    with pytest.raises(OperatingPointFailed, match="Power balance"):
        run(sheet_of(DIVIDER))
