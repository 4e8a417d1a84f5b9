"""``find Q ... approximately within E%`` (SHEET.md section 5): the short textbook form is
found, and its reported error bound is checked against an independent dense evaluation.

The references are written here, not taken from derive:

* each exact quantity comes from a nodal solve written in the test with
  ``numpy.linalg.solve`` (batched over a dense grid of the tolerance box, and for the filter
  over log-spaced frequencies at s = j*2*pi*f);
* the textbook approximations (from memory, common design practice): an inverting amplifier
  with a large open-loop gain has gain -R2/R1; a divider loaded by a much larger resistance
  is the unloaded divider R2/(R1 + R2); a common-emitter stage with emitter degeneration and
  a large current gain has gain -Rc/Re; two RC sections whose poles are far apart (the second
  section a light load on the first) give the product of the two one-pole factors
  1/((1 + s R1 C1)(1 + s R2 C2)).

The reported ``max_error`` must be at least the numpy maximum of |approx - exact|/|exact| on
the grid (within rounding: the grid is a subset of the box), and at most E.
"""
from __future__ import annotations

import itertools
import json

import numpy as np
import pytest
import sympy

import derive
from derive.cli import main

ROUNDING = 1e-9      # relative slack between the exact bound and float64 evaluations


def record(text):
    return derive.derive_text(text, "approx.eqv")


def approx_of(text, name="gain", index=0):
    rec = record(text)
    return rec, rec.results[index].quantities[name].approximation


def approximation_step(steps):
    return next(st for st in steps if st["text"].startswith("Approximation of gain"))


def box_grid(nominals: dict, tols: dict, levels: int = 7) -> dict:
    """Every combination of ``levels`` values per part across nominal*(1 ± tol) (parts
    without a tolerance stay at nominal), as flat numpy arrays."""
    names = list(nominals)
    axes = [np.linspace(nominals[n] * (1 - tols.get(n, 0)), nominals[n] * (1 + tols.get(n, 0)),
                        levels if tols.get(n) else 1) for n in names]
    mesh = np.meshgrid(*axes, indexing="ij")
    return {n: m.ravel() for n, m in zip(names, mesh)}


def evaluate(expr, env):
    syms = sorted(expr.free_symbols, key=str)
    f = sympy.lambdify(syms, expr, "numpy")
    return np.broadcast_to(f(*[env[str(x)] for x in syms]), next(iter(env.values())).shape)


def check_bound(a, approx_values, exact_values, within):
    err = np.abs(approx_values - exact_values) / np.abs(exact_values)
    worst = float(err.max())
    assert a["met"] is True
    assert a["max_error"] >= worst * (1 - ROUNDING), (a["max_error"], worst)
    assert a["max_error"] <= within
    return worst


# ------------------------------------------------------------------ inverting amplifier
INVERTING = """title "Inverting stage"
voltage source Vin between a and gnd = 1 V
resistor R1 between a and n = 10 kohm ±1%
resistor R2 between n and out = 100 kohm ±1%
opamp U1 inputs gnd, n output out gain A
nominal A = 100000 ±50%
port out between out and gnd
find gain from Vin to out approximately within 1%
"""


def test_inverting_amplifier_with_large_gain_is_minus_r2_over_r1():
    rec, a = approx_of(INVERTING)
    R1, R2 = sympy.symbols("R1 R2")
    assert sympy.simplify(a["expr"] - (-R2 / R1)) == 0
    g = box_grid({"R1": 1e4, "R2": 1e5, "A": 1e5}, {"R1": .01, "R2": .01, "A": .5})
    n = g["R1"].size
    # nodal solve (numpy, written here): unknowns v_n, v_out;
    # KCL at n: (v_n - 1)/R1 + (v_n - v_out)/R2 = 0; op-amp output: v_out = A*(0 - v_n)
    M = np.zeros((n, 2, 2))
    M[:, 0, 0] = 1 / g["R1"] + 1 / g["R2"]
    M[:, 0, 1] = -1 / g["R2"]
    M[:, 1, 0] = g["A"]
    M[:, 1, 1] = 1.0
    b = np.zeros((n, 2))
    b[:, 0] = 1 / g["R1"]
    exact = np.linalg.solve(M, b[..., None])[:, 1, 0]
    worst = check_bound(a, -g["R2"] / g["R1"], exact, 0.01)
    # the error is (R1 + R2)/(A R1), largest at A, R1 low and R2 high: the bound is proven
    # there, so it equals the dense maximum closely (the grid holds that corner)
    assert a["proven"] and "proven" in a["method"]
    assert a["max_error"] == pytest.approx(worst, rel=1e-9)
    assert any("A·R1 ≫ R1 + R2" in w for w in a["assumptions"])


# ------------------------------------------------------------------ loaded divider
DIVIDER = """title "Loaded divider"
voltage source Vin between in and gnd = 5 V
resistor R1 between in and out = 10 kohm ±1%
resistor R2 between out and gnd = 4.7 kohm ±1%
resistor RL between out and gnd = 2.2 Mohm ±5%
port out between out and gnd
find gain from Vin to out approximately within 1%
find gain from Vin to out approximately within 0.001%
"""


def _divider_exact(g):
    # one node: (v - 1)/R1 + v/R2 + v/RL = 0 (numpy solve of the 1x1 system)
    M = (1 / g["R1"] + 1 / g["R2"] + 1 / g["RL"])[:, None, None]
    return np.linalg.solve(M, (1 / g["R1"])[:, None, None])[:, 0, 0]


def test_divider_loaded_by_a_large_resistance_is_the_unloaded_divider():
    rec, a = approx_of(DIVIDER)
    R1, R2 = sympy.symbols("R1 R2")
    assert sympy.simplify(a["expr"] - R2 / (R1 + R2)) == 0
    g = box_grid({"R1": 1e4, "R2": 4.7e3, "RL": 2.2e6}, {"R1": .01, "R2": .01, "RL": .05})
    check_bound(a, g["R2"] / (g["R1"] + g["R2"]), _divider_exact(g), 0.01)
    # the dropped term: RL(R1 + R2) against R1 R2 at nominal, 2.2M*14.7k/(47M) = 688
    assert any("by a factor of 688" in w for w in a["assumptions"]), a["assumptions"]


def test_no_short_form_meets_a_tight_bound_and_the_best_bound_is_given():
    rec, a = approx_of(DIVIDER, index=1)
    assert a["met"] is False and a["expr"] is None
    # the shortest forms tried, each with its bound; the unloaded divider is among them and
    # its bound is at least the dense numpy maximum of its error, and above 0.001 %
    g = box_grid({"R1": 1e4, "R2": 4.7e3, "RL": 2.2e6}, {"R1": .01, "R2": .01, "RL": .05})
    err = np.abs(g["R2"] / (g["R1"] + g["R2"]) / _divider_exact(g) - 1)
    R1, R2 = sympy.symbols("R1 R2")
    unloaded = [t for t in a["tried"] if sympy.simplify(t["expr"] - R2 / (R1 + R2)) == 0]
    assert unloaded and unloaded[0]["max_error"] >= err.max() * (1 - ROUNDING)
    assert a["max_error"] == min(t["max_error"] for t in a["tried"]) > 1e-5
    step = [st for st in rec.results[1].steps if st.text.startswith("Approximation of")][0]
    assert "no form shorter than the exact one meets" in step.text


# ------------------------------------------------------------------ degenerated stage
DEGENERATED = """title "Degenerated stage"
voltage source Vin between b and gnd = 10 mV
resistor Rpi between b and e = 2.5 kohm ±20%
current source F1 from c to e = beta*through(Rpi)
nominal beta = 500 ±20%
resistor Re between e and gnd = 1 kohm ±1%
resistor Rc between c and gnd = 4.7 kohm ±1%
port out between c and gnd
find gain from Vin to out approximately within 2%
"""


def test_emitter_degenerated_stage_with_large_beta_is_minus_rc_over_re():
    rec, a = approx_of(DEGENERATED)
    Rc, Re = sympy.symbols("Rc Re")
    assert sympy.simplify(a["expr"] - (-Rc / Re)) == 0
    g = box_grid({"Rpi": 2.5e3, "beta": 500.0, "Re": 1e3, "Rc": 4.7e3},
                 {"Rpi": .2, "beta": .2, "Re": .01, "Rc": .01})
    n = g["Re"].size
    # nodal solve, unknowns v_e, v_c, with ib = (1 - v_e)/Rpi (Vin = 1 per unit):
    # KCL at e: v_e/Re - ib - beta*ib = 0;  KCL at c: v_c/Rc + beta*ib = 0
    M = np.zeros((n, 2, 2))
    b = np.zeros((n, 2))
    M[:, 0, 0] = 1 / g["Re"] + (1 + g["beta"]) / g["Rpi"]
    b[:, 0] = (1 + g["beta"]) / g["Rpi"]
    M[:, 1, 0] = -g["beta"] / g["Rpi"]
    M[:, 1, 1] = 1 / g["Rc"]
    b[:, 1] = -g["beta"] / g["Rpi"]
    exact = np.linalg.solve(M, b[..., None])[:, 1, 0]
    check_bound(a, -g["Rc"] / g["Re"], exact, 0.02)


# ------------------------------------------------------------------ two-pole RC filter
RC = """title "Two-section RC filter"
voltage source Vin between in and gnd = 1 V
resistor R1 between in and a = 1 kohm ±1%
capacitor C1 between a and gnd = 100 nF ±5%
resistor R2 between a and out = 100 kohm ±1%
capacitor C2 between out and gnd = 100 pF ±5%
port out between out and gnd
find gain from Vin to out approximately within 1%
"""


def test_two_pole_rc_with_separated_poles_is_a_product_of_one_pole_factors():
    rec, a = approx_of(RC)
    R1, R2, C1, C2, s = sympy.symbols("R1 R2 C1 C2 s")
    textbook = 1 / ((1 + s * R1 * C1) * (1 + s * R2 * C2))
    assert sympy.simplify(a["expr"] - textbook) == 0
    assert a["band"] == [1.0, 1e9] and not a["proven"] and a["points"] > 1000
    g = box_grid({"R1": 1e3, "C1": 1e-7, "R2": 1e5, "C2": 1e-10},
                 {"R1": .01, "C1": .05, "R2": .01, "C2": .05}, levels=5)
    f = np.logspace(0, 9, 181)
    sv = 2j * np.pi * f[None, :]
    env = {k: v[:, None] for k, v in g.items()}
    n = g["R1"].size * f.size
    # nodal solve at s = j 2 pi f, unknowns v_a, v_out:
    # (v_a - 1)/R1 + s C1 v_a + (v_a - v_out)/R2 = 0;  (v_out - v_a)/R2 + s C2 v_out = 0
    M = np.zeros((n, 2, 2), dtype=complex)
    M[:, 0, 0] = (1 / env["R1"] + sv * env["C1"] + 1 / env["R2"]).ravel()
    M[:, 0, 1] = np.broadcast_to(-1 / env["R2"], (g["R1"].size, f.size)).ravel()
    M[:, 1, 0] = M[:, 0, 1]
    M[:, 1, 1] = (1 / env["R2"] + sv * env["C2"]).ravel()
    b = np.zeros((n, 2), dtype=complex)
    b[:, 0] = np.broadcast_to(1 / env["R1"], (g["R1"].size, f.size)).ravel()
    exact = np.linalg.solve(M, b[..., None])[:, 1, 0]
    approx = (1 / ((1 + sv * env["R1"] * env["C1"]) * (1 + sv * env["R2"] * env["C2"]))).ravel()
    check_bound(a, approx, exact, 0.01)
    assert any("C2·R1" in w for w in a["assumptions"]), a["assumptions"]


# ------------------------------------------------------------------ the record
def test_json_record_carries_the_approximation_and_a_verified_step():
    d = json.loads(record(INVERTING).to_json())
    res = d["results"][0]
    ap = res["quantities"]["gain"]["approximation"]
    assert ap["expr"] == "-R2/R1" and ap["max_error"] <= 0.01 and "proven" in ap["method"]
    assert res["quantities"]["gain"]["expr"] == "-A*R2/(A*R1 + R1 + R2)"   # exact kept
    step = approximation_step(res["steps"])
    assert step["verified"] and step["equations"][0] == "gain_approx = -R2/R1"
    assert step["verified_by"][1] == {"method": "exact"}      # proven bound
    d = json.loads(record(RC).to_json())
    step = approximation_step(d["results"][0]["steps"])
    ap = d["results"][0]["quantities"]["gain"]["approximation"]
    # a searched bound is verified at points, never "exact"
    assert step["verified_by"][1]["method"] == "points"
    assert step["verified_by"][1]["points"] == ap["points"] and "searched" in ap["method"]


def test_a_wrong_bound_is_not_verified():
    """Mutation: a stated bound below the largest error found fails its recheck."""
    from derive.analyses import approximation as ap, tolerance, sensitivity as sens
    from derive.forms.results import Context, Options
    from derive.forms.select import port_quantities
    c = derive.circuit_of(INVERTING)
    ctx = Context(c, Options())
    q = port_quantities(ctx, c.requests[0])[0]
    num, den, syms = sens.rational(q.expr, [])
    pb = ap.Problem(num, den, syms, ctx.nominal, tolerance.box_of(ctx, syms), None)
    sc = ap.Screen(pb)
    cand = ap.candidates(pb, sc, 0.01, 0.8)[0]
    b = ap.establish(pb, sc, cand)
    assert ap._recheck(pb, cand, b, sympy.Float(b.value * 1.001))
    assert not ap._recheck(pb, cand, b, sympy.Float(b.value * 0.99))


def test_group_quantities_are_refused_with_a_location(tmp_path, capsys):
    path = tmp_path / "s.eqv"
    line = "find thevenin at out approximately within 1%"
    path.write_text(DIVIDER.split("find")[0] + line + "\n", encoding="utf-8")
    capsys.readouterr()
    assert main(["record", str(path)]) == 2
    err = capsys.readouterr().err
    assert f"{path}:7:{line.index('approximately') + 1}: error:" in err
    assert "single quantity" in err and "Traceback" not in err


def test_code_emits_the_approximate_formula_with_its_bound():
    text = record(INVERTING).to_code("python")
    assert "def gain_from_Vin_to_out_approx(R1, R2):" in text
    ns: dict = {}
    exec(compile(text, "gen.py", "exec"), ns)       # the generated module itself
    assert ns["gain_from_Vin_to_out_approx"](1e4, 1e5) == pytest.approx(-10.0)
    assert "relative error at most 0.02241 %" in text   # 0.022404.. % rounded up


def test_summary_line_in_markdown():
    md = record(DIVIDER).to_markdown()
    assert r"\mathrm{gain} \approx \frac{R_{2}}{R_{1} + R_{2}}" in md
    assert "no form shorter than the exact one meets 0.001 %" in md


BRIDGE = """voltage source Vx between top and gnd = 5 V
resistor Ra between top and left = 350 ohm ±1%
resistor Rb between left and gnd = 350 ohm ±1%
resistor Rc between top and right = 350 ohm ±1%
resistor Rg between right and gnd = 350 ohm ±1%
port out between left and right
find vth at out approximately within 1%
"""


def test_a_result_that_crosses_zero_has_no_relative_bound():
    """A balanced bridge: vth = Vx (Rb Rc - Ra Rg)/((Ra + Rb)(Rc + Rg)) (handbook bridge
    formula) is 0 at nominal, so no form has a bounded relative error; the record says so
    and the JSON stays strict (no Infinity or NaN)."""
    rec, a = approx_of(BRIDGE, "vth")
    assert a["met"] is False and a["max_error"] is None
    assert all(t.get("unbounded") for t in a["tried"])

    def refuse(name):
        raise AssertionError(f"{name} in the JSON record")
    json.loads(rec.to_json(), parse_constant=refuse)


POWER = """voltage source Vin between in and gnd = 5 V
resistor R1 between in and out = 10 ohm ±1%
resistor R2 between out and gnd = 1 kohm ±1%
port out between out and gnd
find power in R2 approximately within 2%
"""


def test_power_in_a_load_behind_a_small_series_resistance():
    """P = Vin² R2/(R1 + R2)² (handbook power in the load of a divider, from memory);
    with R1 ≪ R2 the first-order form Vin²/(R2 + 2 R1) is within 2 % (Vin²/R2 alone misses
    by 2 R1/R2 ≈ 2 %)."""
    rec, a = approx_of(POWER, "power")
    Vin, R1, R2 = sympy.symbols("Vin R1 R2")
    assert a["met"] and sympy.simplify(a["expr"] - Vin**2 / (R2 + 2 * R1)) == 0
    g = box_grid({"Vin": 5.0, "R1": 10.0, "R2": 1e3}, {"R1": .01, "R2": .01}, levels=11)
    exact = g["Vin"] ** 2 * g["R2"] / (g["R1"] + g["R2"]) ** 2
    check_bound(a, g["Vin"] ** 2 / (g["R2"] + 2 * g["R1"]), exact, 0.02)


CASCADE = """title "Two inverting stages"
voltage source Vin between a and gnd = 1 V
resistor R1 between a and n1 = 10 kohm ±1%
resistor R2 between n1 and o1 = 47 kohm ±1%
opamp U1 inputs gnd, n1 output o1 gain A
resistor R3 between o1 and n2 = 10 kohm ±1%
resistor R4 between n2 and out = 22 kohm ±1%
opamp U2 inputs gnd, n2 output out gain B
nominal A = 100000 ±50%
nominal B = 100000 ±50%
port out between out and gnd
find gain from Vin to out approximately within 1%
"""


def test_cascade_of_two_finite_gain_stages_is_the_product_of_ideal_gains():
    """Two inverting stages in cascade: (R2/R1)·(R4/R3) (textbook, from memory), against a
    numpy nodal solve of the whole circuit (unknowns v_n1, v_o1, v_n2, v_out)."""
    rec, a = approx_of(CASCADE)
    R1, R2, R3, R4 = sympy.symbols("R1 R2 R3 R4")
    assert sympy.simplify(a["expr"] - R2 * R4 / (R1 * R3)) == 0
    g = box_grid({"R1": 1e4, "R2": 4.7e4, "R3": 1e4, "R4": 2.2e4, "A": 1e5, "B": 1e5},
                 {"R1": .01, "R2": .01, "R3": .01, "R4": .01, "A": .5, "B": .5}, levels=4)
    n = g["R1"].size
    M = np.zeros((n, 4, 4))
    b = np.zeros((n, 4))
    # KCL at n1: (v_n1 - 1)/R1 + (v_n1 - v_o1)/R2 = 0;  U1: v_o1 + A v_n1 = 0
    M[:, 0, 0] = 1 / g["R1"] + 1 / g["R2"]
    M[:, 0, 1] = -1 / g["R2"]
    b[:, 0] = 1 / g["R1"]
    M[:, 1, 0], M[:, 1, 1] = g["A"], 1.0
    # KCL at n2: (v_n2 - v_o1)/R3 + (v_n2 - v_out)/R4 = 0;  U2: v_out + B v_n2 = 0
    M[:, 2, 1] = -1 / g["R3"]
    M[:, 2, 2] = 1 / g["R3"] + 1 / g["R4"]
    M[:, 2, 3] = -1 / g["R4"]
    M[:, 3, 2], M[:, 3, 3] = g["B"], 1.0
    exact = np.linalg.solve(M, b[..., None])[:, 3, 0]
    check_bound(a, g["R2"] * g["R4"] / (g["R1"] * g["R3"]), exact, 0.01)
