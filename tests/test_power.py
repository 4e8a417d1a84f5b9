"""``find power in X``: the power an element absorbs (passive sign convention), exact.

References: an independently written numpy nodal solve (below; modified nodal analysis as in
any circuits textbook), Tellegen's theorem (the absorbed powers of all elements of a network
sum to zero; textbook), the maximum power transfer theorem (a load RL fed through Rs takes
the most power at RL = Rs; textbook), P = V²R/(R1+R2)² for a divider (from the voltage
divider rule).
"""
from __future__ import annotations

import itertools

import numpy as np
import pytest
import sympy

import derive
from derive.cli import main
from tests.helpers import BRIDGE_PARTS, DIVIDER_PARTS, run


# ------------------------------------------------------------------ independent reference
def numpy_powers(elements, ground="gnd"):
    """Absorbed power of every element: ``elements`` are (kind, name, a, b, value) with kind
    'R' (resistor between a and b), 'V' (voltage source, + at a), 'I' (current source driving
    from a through itself to b), 'E' (VCVS between a and b of gain*(v(c)-v(d)): value is
    (gain, c, d)) or 'F' (CCCS from a to b of gain*current through a resistor: (gain, R)).
    Modified nodal analysis written for this test; returns {name: v*i}."""
    nodes = sorted({n for e in elements for n in e[2:4]} - {ground})
    idx = {n: i for i, n in enumerate(nodes)}
    branches = [e[1] for e in elements if e[0] in "VE"]
    bidx = {b: len(nodes) + k for k, b in enumerate(branches)}
    n = len(nodes) + len(branches)
    A = np.zeros((n, n))
    z = np.zeros(n)
    res = {e[1]: e for e in elements if e[0] == "R"}

    def add(i, j, v):
        if i in idx and j in idx:
            A[idx[i], idx[j]] += v

    for kind, name, a, b, val in elements:
        if kind == "R":
            g = 1.0 / val
            add(a, a, g), add(b, b, g), add(a, b, -g), add(b, a, -g)
        elif kind in "VE":
            j = bidx[name]
            for node, sgn in ((a, 1), (b, -1)):
                if node in idx:
                    A[idx[node], j] += sgn      # branch current leaves a, enters b
                    A[j, idx[node]] += sgn
            if kind == "V":
                z[j] = val
            else:
                gain, c, d = val
                for node, sgn in ((c, 1), (d, -1)):
                    if node in idx:
                        A[j, idx[node]] -= sgn * gain
        elif kind == "I":
            if a in idx:
                z[idx[a]] -= val
            if b in idx:
                z[idx[b]] += val
        elif kind == "F":
            gain, r = val
            _, _, ra, rb, rv = res[r]
            for node, sgn in ((a, 1), (b, -1)):      # gain*(v(ra)-v(rb))/rv leaves a
                for cn, cs in ((ra, 1), (rb, -1)):
                    if node in idx and cn in idx:
                        A[idx[node], idx[cn]] += sgn * cs * gain / rv
    x = np.linalg.solve(A, z)

    def v(node):
        return 0.0 if node == ground else x[idx[node]]

    out = {}
    for kind, name, a, b, val in elements:
        if kind == "R":
            i = (v(a) - v(b)) / val
        elif kind in "VE":
            i = x[bidx[name]]
        elif kind == "I":
            i = val
        else:
            gain, r = val
            _, _, ra, rb, rv = res[r]
            i = gain * (v(ra) - v(rb)) / rv
        out[name] = (v(a) - v(b)) * i
    return out


def sheet_of(elements):
    lines = []
    for kind, name, a, b, val in elements:
        if kind == "R":
            lines.append(f"resistor {name} between {a} and {b} = {val} ohm")
        elif kind == "V":
            lines.append(f"voltage source {name} between {a} and {b} = {val} V")
        elif kind == "I":
            lines.append(f"current source {name} from {a} to {b} = {val} A")
        elif kind == "E":
            gain, c, d = val
            lines.append(f"voltage source {name} between {a} and {b} = {gain}*across({c}, {d})")
        else:
            gain, r = val
            lines.append(f"current source {name} from {a} to {b} = {gain}*through({r})")
    lines += [f"find power in {e[1]}" for e in elements]
    return "\n".join(lines) + "\n"


DIVIDER, BRIDGE = DIVIDER_PARTS, BRIDGE_PARTS
DEPENDENT = [("V", "V1", "a", "gnd", 5), ("R", "R1", "a", "b", 1000),
             ("R", "R2", "b", "gnd", 2000), ("E", "E1", "x", "gnd", (3, "b", "gnd")),
             ("R", "R3", "x", "y", 500), ("R", "R4", "y", "gnd", 1500),
             ("F", "F1", "gnd", "y", (2, "R2"))]
CIRCUITS = {"divider": DIVIDER, "bridge": BRIDGE, "dependent": DEPENDENT}


@pytest.mark.parametrize("name", CIRCUITS)
def test_power_of_every_element_against_numpy(name):
    elements = CIRCUITS[name]
    want = numpy_powers(elements)
    rec = run(sheet_of(elements))
    for r in rec.results:
        q = r.quantities["power"]
        assert q.unit == "W" and r.steps and all(s.verified for s in r.steps)
        assert q.value == pytest.approx(want[r.request.element], rel=1e-9, abs=1e-15)


@pytest.mark.parametrize("name", CIRCUITS)
def test_tellegen_absorbed_powers_sum_to_zero_exactly(name):
    """Tellegen's theorem on the exact closed forms in the circuit's own symbols."""
    rec = run(sheet_of(CIRCUITS[name]), symbolic=[e[1] for e in CIRCUITS[name]])
    total = sympy.Add(*[r.quantities["power"].expr for r in rec.results])
    assert total.free_symbols                       # really symbolic
    assert sympy.cancel(sympy.together(total)) == 0
    assert sum(r.quantities["power"].value for r in rec.results) == pytest.approx(0, abs=1e-12)


def test_divider_closed_form_and_signs():
    rec = run(sheet_of(DIVIDER), symbolic=["V1", "R1", "R2"])
    V, R1, R2 = sympy.symbols("V1 R1 R2")
    p = {r.request.element: r.quantities["power"].expr for r in rec.results}
    # P = V²R/(R1+R2)² (voltage divider rule); the source delivers it all: -V²/(R1+R2)
    assert sympy.cancel(p["R2"] - V**2 * R2 / (R1 + R2)**2) == 0
    assert sympy.cancel(p["V1"] + V**2 / (R1 + R2)) == 0
    assert rec.results[0].quantities["power"].value == pytest.approx(-0.02)  # 10 V / 5 kohm


REACTIVE = """voltage source V between a and gnd = 10 V
resistor R1 between a and b = 1 kohm
capacitor C1 between b and gnd = 1 uF
inductor L1 between b and c = 1 mH
resistor R2 between c and gnd = 4 kohm
find power in R2
find power in C1
find power in L1
"""


def test_reactive_circuit_answers_at_dc():
    rec = run(REACTIVE)
    # at DC C1 is open and L1 a short: a divider R1, R2 (numpy reference on the DC circuit)
    want = numpy_powers([("V", "V", "a", "gnd", 10), ("R", "R1", "a", "b", 1000),
                         ("V", "L1", "b", "c", 0), ("R", "R2", "c", "gnd", 4000)])
    p = {r.request.element: r for r in rec.results}
    assert p["R2"].quantities["power"].value == pytest.approx(want["R2"], rel=1e-12)
    assert p["C1"].quantities["power"].value == 0 and p["L1"].quantities["power"].value == 0
    for r in rec.results:
        assert sympy.Symbol("s") not in r.quantities["power"].expr.free_symbols
        assert any("DC" in n for n in r.notes)
        assert any("s = 0" in st.text for st in r.steps)
        assert all(st.verified for st in r.steps)


def test_no_dc_solution_is_a_located_error(tmp_path, capsys):
    path = tmp_path / "p.eqv"
    # a current source charging a capacitor alone: its voltage I/(sC) has a pole at s = 0;
    # a buffer copies it onto R1
    path.write_text("current source I1 from gnd to a = 1 mA\ncapacitor C1 between a and gnd = "
                    "1 uF\nvoltage source E1 between b and gnd = 1*across(a, gnd)\n"
                    "resistor R1 between b and gnd = 1 kohm\nfind power in R1\n",
                    encoding="utf-8")
    capsys.readouterr()
    assert main(["record", str(path)]) == 2
    err = capsys.readouterr().err
    assert err.startswith(f"{path}:5:1: error: ") and "DC" in err and "Traceback" not in err


TRANSFER = """voltage source V between a and gnd = 10 V
resistor Rs between a and b = 1 kohm ±1%
resistor RL between b and gnd = 1 kohm ±10%
find sensitivity of power in RL
find tolerance of power in RL
solve power in RL for V
check power in RL equals V^2*RL/(Rs + RL)^2
check power in RL equals V^2/RL
"""


def test_sensitivity_tolerance_solve_check_of_power():
    rec = run(TRANSFER, mc_samples=2000)
    sens, tol, solve, good, bad = rec.results
    s = {k: v["value"] for k, v in sens.extra["sensitivities"].items()}
    # P = V²RL/(Rs+RL)²: S_V = 2, S_RL = (Rs-RL)/(Rs+RL) = 0 and S_Rs = -2Rs/(Rs+RL) = -1
    assert s["V"] == pytest.approx(2) and s["RL"] == pytest.approx(0, abs=1e-12)
    assert s["Rs"] == pytest.approx(-1)
    spread = tol.extra["spread"]
    # not monotone in RL: the maximum is inside the box, at RL = Rs = 990 ohm (maximum power
    # transfer), V²/(4·990); the minimum at a corner (P falls with Rs, unimodal in RL)
    assert spread["high"] == pytest.approx(100 / (4 * 990), rel=1e-9)
    low = min(100 * rl / (rs + rl) ** 2 for rs, rl in itertools.product((990, 1010), (900, 1100)))
    assert spread["low"] == pytest.approx(low, rel=1e-9)
    assert solve.quantities["V"].value == pytest.approx(10)
    assert good.extra["holds"] is True and bad.extra["holds"] is False

