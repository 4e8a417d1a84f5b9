"""Regression tests of the defects reported under "Trust".

1. ``value`` was null for a quantity whose own expression has every symbol's nominal value,
   as soon as some unrelated symbol of the sheet had none (SHEET.md §4).
2. ``find isc at P`` alone crashed on a Wheatstone bridge (``find norton`` worked).
3. A capacitor or inductor whose value divides by a symbol crashed.
4. A node joined to the rest only through a *dependent* current source (a gyrator) was
   rejected as a "cut set of current sources".

References are an independently written numpy nodal solve (:func:`nodal`, below; common
practice, no source) and handbook closed forms named at each use.
"""
from __future__ import annotations

import json
import subprocess
import sys
from fractions import Fraction
from pathlib import Path

import numpy as np
import pytest
import sympy

import derive
from derive.errors import SheetError
from helpers import closed, run

ROOT = Path(__file__).resolve().parent.parent


# ------------------------------------------------------------------ reference nodal solve
def nodal(elements, ground="gnd", s=0.0, zero_sources=False, extra=()):
    """Node voltages and branch currents of a circuit by modified nodal analysis in numpy.

    ``elements``: tuples ``(kind, name, a, b, value)`` with kind in R, G, C, L, Z, Y, V, I,
    or ``("VCCS", name, a, b, (g, p, q))``: a current g*(v_p - v_q) driven from a through
    the source into b. ``zero_sources`` zeroes the independent sources except test sources
    (names starting with ``_``). Branch currents flow from a through the element to b.
    Returns (voltage of node, current of voltage-type branch name)."""
    elements = list(elements) + list(extra)
    nodes = []
    for e in elements:
        ends = e[2:4] if e[0] != "VCCS" else (e[2], e[3], e[4][1], e[4][2])
        for n in ends:
            if n != ground and n not in nodes:
                nodes.append(n)
    branches = [e[1] for e in elements if e[0] in ("V", "L", "Z")]
    n = len(nodes) + len(branches)
    A = np.zeros((n, n), dtype=complex)
    b = np.zeros(n, dtype=complex)
    idx = {x: i for i, x in enumerate(nodes)}

    def stamp(i, j, y):
        if i in idx and j in idx:
            A[idx[i], idx[j]] += y

    for e in elements:
        kind, name, p, m, val = e
        if kind in ("R", "G", "C", "Y"):
            y = {"R": lambda v: 1 / v, "G": lambda v: v, "C": lambda v: s * v,
                 "Y": lambda v: v}[kind](val)
            stamp(p, p, y); stamp(m, m, y); stamp(p, m, -y); stamp(m, p, -y)
        elif kind in ("V", "L", "Z"):
            k = len(nodes) + branches.index(name)
            if p in idx:
                A[idx[p], k] += 1; A[k, idx[p]] += 1
            if m in idx:
                A[idx[m], k] -= 1; A[k, idx[m]] -= 1
            if kind == "V":
                b[k] = 0 if zero_sources else val
            else:
                A[k, k] -= s * val if kind == "L" else val
        elif kind == "I":
            v = 0 if zero_sources and not name.startswith("_") else val
            if p in idx:
                b[idx[p]] -= v
            if m in idx:
                b[idx[m]] += v
        elif kind == "VCCS":
            g, cp, cq = val
            for row, sign in ((p, 1), (m, -1)):
                if row in idx:
                    if cp in idx:
                        A[idx[row], idx[cp]] += sign * g
                    if cq in idx:
                        A[idx[row], idx[cq]] -= sign * g
    x = np.linalg.solve(A, b)
    volt = {nd: x[i] for nd, i in idx.items()}
    volt[ground] = 0.0
    cur = {br: x[len(nodes) + i] for i, br in enumerate(branches)}
    return volt, cur


def port_reference(elements, plus, minus, s=0.0):
    """(vth, rth, isc) of a port from :func:`nodal`."""
    v, _ = nodal(elements, s=s)
    vth = v[plus] - v[minus]
    v1, _ = nodal(elements, s=s, zero_sources=True, extra=[("I", "_test", minus, plus, 1.0)])
    rth = v1[plus] - v1[minus]
    _, c = nodal(elements, s=s, extra=[("V", "_short", plus, minus, 0.0)])
    isc = c["_short"]       # the short's branch current, from its + end through it to -
    return vth, rth, isc


def json_record(text, tmp_path):
    """The JSON record of a sheet through the command line (as a user runs it)."""
    f = tmp_path / "sheet.eqv"
    f.write_text(text)
    p = subprocess.run([sys.executable, "-m", "derive", "record", str(f), "--format", "json"],
                       cwd=ROOT, capture_output=True, text=True)
    return p


# ------------------------------------------------------------------ 1. value and unrelated symbols
DIVIDER_AND_STRAY = """voltage source V between top and gnd = 5 V
resistor R1 between top and mid = 1 kohm
resistor R2 between mid and gnd = 3 kohm
resistor R3 between top and x
resistor R4 between x and gnd = 2 kohm
port out between mid and gnd
find thevenin at out
find norton at out
find gain from V to out
find current through R1
find sensitivity of vth at out
find tolerance of vth at out
"""

# R3 has no nominal value, but nothing at port `out` depends on it (it hangs across V).
DIVIDER_REF = [("V", "V", "top", "gnd", 5.0), ("R", "R1", "top", "mid", 1e3),
               ("R", "R2", "mid", "gnd", 3e3), ("R", "R3", "top", "x", 7e3),
               ("R", "R4", "x", "gnd", 2e3)]


@pytest.mark.parametrize("expand_limit", [20000, 0])    # expanded; series-parallel/sequence
def test_value_ignores_symbols_of_other_quantities(expand_limit):
    rec = derive.derive_text(DIVIDER_AND_STRAY, "t.eqv", expand_limit=expand_limit,
                             mc_samples=2000)
    vth, rth, isc = port_reference(DIVIDER_REF, "mid", "gnd")
    r = rec.results
    assert r[0].quantities["vth"].value == pytest.approx(vth.real, rel=1e-12)
    assert r[0].quantities["rth"].value == pytest.approx(rth.real, rel=1e-12)
    assert r[1].quantities["isc"].value == pytest.approx(isc.real, rel=1e-12)
    assert r[1].quantities["rn"].value == pytest.approx(rth.real, rel=1e-12)
    assert r[2].quantities["gain"].value == pytest.approx(vth.real / 5.0, rel=1e-12)
    _, cur = nodal(DIVIDER_REF)
    v, _ = nodal(DIVIDER_REF)
    assert r[3].quantities["current"].value == pytest.approx(((v["top"] - v["mid"]) / 1e3).real,
                                                             rel=1e-12)
    # sensitivity of a divider: S_R1 = -R1/(R1 + R2), S_R2 = R1/(R1 + R2) (handbook, e.g.
    # Horowitz & Hill, voltage divider), S_V = 1
    sens = r[4].extra["sensitivities"]
    assert sens["R1"]["value"] == pytest.approx(-0.25, rel=1e-12)
    assert sens["R2"]["value"] == pytest.approx(0.25, rel=1e-12)
    assert sens["V"]["value"] == pytest.approx(1.0, rel=1e-12)
    assert r[5].extra["spread"]["nominal"] == pytest.approx(vth.real, rel=1e-12)


def test_value_still_null_where_own_symbol_lacks_nominal():
    rec = run(DIVIDER_AND_STRAY.replace("find thevenin at out",
                                        "port px between x and gnd\nfind thevenin at px"))
    q = rec.results[0].quantities
    assert q["vth"].value is None and q["rth"].value is None


def test_value_with_cancelling_symbol_in_series_with_current_source():
    # R5 in series with an ideal current source does not change vth at `left`; it has no
    # nominal value. Bridge with dependent source so the nodal path is taken.
    text = """voltage source V between top and gnd = 5 V
resistor Ra between top and left = 350 ohm
resistor Rb between left and gnd = 350 ohm
resistor Rc between top and right = 350 ohm
resistor Rg between right and gnd = 351 ohm
resistor Rm between left and right = 1 kohm
current source G from right to gnd = g*across(left, gnd)
nominal g = 1 mS
current source I from gnd to y = 1 mA
resistor R5 between y and left
port P between left and gnd
find thevenin at P
"""
    ref = [("V", "V", "top", "gnd", 5.0), ("R", "Ra", "top", "left", 350.0),
           ("R", "Rb", "left", "gnd", 350.0), ("R", "Rc", "top", "right", 350.0),
           ("R", "Rg", "right", "gnd", 351.0), ("R", "Rm", "left", "right", 1e3),
           ("VCCS", "G", "right", "gnd", (1e-3, "left", "gnd")),
           ("I", "I", "gnd", "y", 1e-3), ("R", "R5", "y", "left", 4.7e3)]
    vth, rth, _ = port_reference(ref, "left", "gnd")
    for limit in (20000, 0):
        q = derive.derive_text(text, "t.eqv", expand_limit=limit).results[0].quantities
        assert q["vth"].value == pytest.approx(vth.real, rel=1e-12)
        assert q["rth"].value == pytest.approx(rth.real, rel=1e-12)


def test_value_is_exact_not_float_accumulated():
    # value of a sequence: exact rationals, so 1/3 + 1/3 + 1/3 type sums come out exact
    from derive.forms.elimination import exact_value
    a, b, q1 = sympy.symbols("a b q1")
    v = exact_value([(q1, a / 3 + b / 3)], q1 * 3 - a, {a: sympy.Rational(1, 7),
                                                          b: sympy.Rational(2, 7)})
    assert v == sympy.Rational(2, 7)
    # a missing symbol that cancels structurally does not make the value null
    assert exact_value([(q1, (a * b + b) / b)], q1 - 1, {a: sympy.Integer(2)}) == 2
    # a missing symbol that matters does
    assert exact_value([(q1, a * b)], q1, {a: sympy.Integer(2)}) is None


# ------------------------------------------------------------------ 2. isc alone
BRIDGE = """voltage source V between top and gnd{v}
resistor Ra between top and left{r}
resistor Rb between left and gnd{r}
resistor Rc between top and right{r}
resistor Rg between right and gnd{g}
{extra}
port P between left and right
find {q} at P
"""
BRIDGE_REF = [("V", "V", "top", "gnd", 5.0), ("R", "Ra", "top", "left", 350.0),
              ("R", "Rb", "left", "gnd", 350.0), ("R", "Rc", "top", "right", 350.0),
              ("R", "Rg", "right", "gnd", 351.0)]


def bridge_text(q, nominals=True, dependent=False):
    return BRIDGE.format(v=" = 5 V" if nominals else "",
                         r=" = 350 ohm ±0.1%" if nominals else "",
                         g=" = 351 ohm ±0.1%" if nominals else "",
                         extra="current source Gm from left to right = gm*across(top, left)\n"
                               "nominal gm = 1 mS" if dependent else "", q=q)


def test_isc_alone_on_the_command_line(tmp_path):
    p = json_record(bridge_text("isc"), tmp_path)
    assert p.returncode == 0, p.stderr
    vth, rth, isc = port_reference(BRIDGE_REF, "left", "right")
    got = json.loads(p.stdout)["results"][0]["quantities"]["isc"]["value"]
    assert got == pytest.approx(isc.real, rel=1e-10)


@pytest.mark.parametrize("q", ["isc", "rn", "vth", "rth", "norton", "thevenin"])
@pytest.mark.parametrize("nominals", [True, False])
@pytest.mark.parametrize("dependent", [False, True])
@pytest.mark.parametrize("expand_limit", [20000, 0])
def test_single_port_quantities_of_a_bridge(q, nominals, dependent, expand_limit):
    rec = derive.derive_text(bridge_text(q, nominals, dependent), "t.eqv",
                             expand_limit=expand_limit)
    res = {n: {"value": x.value} for n, x in rec.results[0].quantities.items()}
    assert all(st.verified for st in rec.results[0].steps)
    ref = BRIDGE_REF + ([("VCCS", "Gm", "left", "right", (1e-3, "top", "left"))]
                        if dependent else [])
    vth, rth, isc = port_reference(ref, "left", "right")
    want = {"vth": vth, "rth": rth, "isc": isc, "rn": rth}
    for name, body in res.items():
        if nominals:
            assert body["value"] == pytest.approx(want[name].real, rel=1e-10)
        else:
            assert body["value"] is None
    assert set(res) == {"norton": {"isc", "rn"}, "thevenin": {"vth", "rth"}}.get(q, {q})


def test_isc_alone_steps_verified():
    res = run(bridge_text("isc")).results[0]
    assert res.steps and all(s.verified for s in res.steps)
    # isc = vth/rth of the bridge (Thevenin/Norton equivalence, handbook)
    Ra, Rb, Rc, Rg, V = sympy.symbols("Ra Rb Rc Rg V")
    vth = V * (Rb / (Ra + Rb) - Rg / (Rc + Rg))
    rth = Ra * Rb / (Ra + Rb) + Rc * Rg / (Rc + Rg)
    assert sympy.cancel(closed(res.quantities["isc"]) - vth / rth) == 0


# ------------------------------------------------------------------ 3. values that divide by symbols
VALUE_EXPRS = ["1/(R*w0)", "1/X", "X/R", "2*R/w0", "(R + X)/(R*X)", "sqrt(X)/R", "X/(R + w0)"]
KINDS = {"resistor": "R", "conductance": "G", "capacitor": "C", "inductor": "L",
         "impedance": "Z", "admittance": "Y"}
POINT = {"R": Fraction(3, 2), "w0": Fraction(7), "X": Fraction(5, 4)}   # = NOMINALS
NOMINALS = "nominal R = 1.5 ohm\nnominal w0 = 7 Hz\nnominal X = 1.25\n"


def _num(expr_text, point):
    syms = {k: sympy.Symbol(k) for k in point}
    c = derive.circuit_of(f"resistor Q between a and gnd = {expr_text}\nnominal R = 1\n"
                          "nominal w0 = 1\nnominal X = 1\n")
    v = c.element("Q").value
    return complex(v.xreplace({syms[k]: sympy.Rational(x.numerator, x.denominator)
                               for k, x in point.items()}).evalf(30))


@pytest.mark.parametrize("kind", list(KINDS))
@pytest.mark.parametrize("value", VALUE_EXPRS)
def test_every_kind_takes_every_value_expression(kind, value):
    with_nominals = True
    # V -- element under test -- out, resistor R from out to gnd (R also in the value),
    # a current source into out whose value is an expression too
    text = (f"voltage source V between in and gnd = 2*X/R\n"
            f"{kind} E between in and out = {value}\n"
            "resistor R between out and gnd\n"
            "current source I from gnd to out = X/(R*w0)\n"
            "port out between out and gnd\n"
            "find thevenin at out\n"
            + (NOMINALS if with_nominals else ""))
    q = run(text).results[0].quantities
    vth, rth = closed(q["vth"]), closed(q["rth"])
    s0 = complex(0.3, 1.7)
    pt = {sympy.Symbol(k): sympy.Rational(v.numerator, v.denominator) for k, v in POINT.items()}
    pt[sympy.Symbol("s")] = sympy.Rational(3, 10) + sympy.I * sympy.Rational(17, 10)
    ev = _num(value, POINT)
    ref = [("V", "V", "in", "gnd", _num("2*X/R", POINT)),
           (KINDS[kind], "E", "in", "out", ev),
           ("R", "R", "out", "gnd", float(POINT["R"])),
           ("I", "I", "gnd", "out", _num("X/(R*w0)", POINT))]
    want_v, want_r, _ = port_reference(ref, "out", "gnd", s=s0)
    assert complex(vth.xreplace(pt).evalf(30)) == pytest.approx(want_v, rel=1e-12)
    assert complex(rth.xreplace(pt).evalf(30)) == pytest.approx(want_r, rel=1e-12)
    if with_nominals and kind not in ("capacitor", "inductor"):
        assert q["vth"].value == pytest.approx(want_v.real, rel=1e-12)
        assert q["rth"].value == pytest.approx(want_r.real, rel=1e-12)


@pytest.mark.parametrize("value", ["1/(R*w0)", "1/X", "X/R", "2*R/w0"])
@pytest.mark.parametrize("noms", [NOMINALS, ""])
def test_rc_low_pass_with_capacitance_expression(value, noms):
    # RC low-pass: H = 1/(1 + s R C) (handbook closed form, e.g. Horowitz & Hill ch. 1)
    text = ("voltage source Vin between in and gnd\nresistor R between in and out\n"
            f"capacitor C between out and gnd = {value}\nport out between out and gnd\n"
            "find gain from Vin to out\n" + noms)
    g = closed(run(text).results[0].quantities["gain"])
    R, w0, X, s = sympy.symbols("R w0 X s")
    C = {"1/(R*w0)": 1 / (R * w0), "1/X": 1 / X, "X/R": X / R, "2*R/w0": 2 * R / w0}[value]
    assert sympy.cancel(g - 1 / (1 + s * R * C)) == 0


@pytest.mark.parametrize("value", ["1/(R*w0)", "1/X", "X/R", "2*R/w0"])
@pytest.mark.parametrize("noms", [NOMINALS, ""])
def test_rl_low_pass_with_inductance_expression(value, noms, tmp_path):
    # RL low-pass: H = R/(R + s L) (handbook closed form)
    text = ("voltage source Vin between in and gnd\ninductor L between in and out = "
            f"{value}\nresistor R between out and gnd\nport out between out and gnd\n"
            "find gain from Vin to out\n" + noms)
    p = json_record(text, tmp_path) if value == "1/(R*w0)" and noms else None
    if p is not None:
        assert p.returncode == 0, p.stderr
    g = closed(run(text).results[0].quantities["gain"])
    R, w0, X, s = sympy.symbols("R w0 X s")
    L = {"1/(R*w0)": 1 / (R * w0), "1/X": 1 / X, "X/R": X / R, "2*R/w0": 2 * R / w0}[value]
    assert sympy.cancel(g - R / (R + s * L)) == 0


# ------------------------------------------------------------------ 4. cut sets of dependent sources
GYRATOR = """current source G1 from a to gnd = g1*across(b, gnd)
current source G2 from b to gnd = -g2*across(a, gnd)
{load} L1 between b and gnd
port P between a and gnd
find impedance at P
"""


def test_gyrator_loaded_by_capacitor_is_an_inductor():
    # A gyrator of transconductances g1, g2 loaded by C looks like an inductor
    # L = C/(g1*g2) (textbook result: the gyrator, B. D. H. Tellegen 1948; e.g. Sedra &
    # Smith, active filters). Node a is joined to the rest only through G1 (dependent).
    q = run(GYRATOR.format(load="capacitor")).results[0].quantities["impedance"]
    L1, g1, g2, s = sympy.symbols("L1 g1 g2 s")
    assert sympy.cancel(closed(q) - s * L1 / (g1 * g2)) == 0


def test_gyrator_loaded_by_resistor_against_numpy():
    # loaded by R: R_in = 1/(g1*g2*R) (the gyrator inverts an impedance, same source)
    text = GYRATOR.format(load="resistor") + "find thevenin at P\n"
    res = run(text).results
    L1, g1, g2 = sympy.symbols("L1 g1 g2")
    assert sympy.cancel(closed(res[0].quantities["impedance"]) - 1 / (g1 * g2 * L1)) == 0
    pt = {L1: sympy.Rational(47, 10), g1: sympy.Rational(3, 1000), g2: sympy.Rational(7, 1000)}
    ref = [("VCCS", "G1", "a", "gnd", (3e-3, "b", "gnd")),
           ("VCCS", "G2", "b", "gnd", (-7e-3, "a", "gnd")), ("R", "L1", "b", "gnd", 4.7)]
    _, rth, _ = port_reference(ref, "a", "gnd")
    got = complex(closed(res[1].quantities["rth"]).xreplace(pt))
    assert got == pytest.approx(rth, rel=1e-12)


def test_gyrator_with_nominals_and_steps(tmp_path):
    text = GYRATOR.format(load="capacitor") + ("nominal g1 = 2 mS\nnominal g2 = 5 mS\n"
                                               "find vth at P\n")
    text = text.replace("capacitor L1 between b and gnd",
                        "capacitor L1 between b and gnd = 10 nF\n"
                        "current source Ib from gnd to b = 1 mA")
    p = json_record(text, tmp_path)
    assert p.returncode == 0, p.stderr
    res = json.loads(p.stdout)["results"]
    assert all(st["verified"] for r in res for st in r.get("steps", []))
    # vth: Ib into b, v_b from KCL at a: g1*v_b = 0 -> v_b = 0; at b: ... -> v_a = -Ib/g2
    # (nodal equations by hand: row a: g1*vb = 0; row b: sC*vb - g2*va = Ib)
    assert res[1]["quantities"]["vth"]["value"] == pytest.approx(-1e-3 / 5e-3, rel=1e-12)


@pytest.mark.parametrize("text, line, what", [
    # a node joined only through a dependent source that does not fix it
    ("voltage source V between b and gnd\nresistor R between b and gnd\n"
     "current source G1 from a to gnd = g1*across(b, gnd)\nport P between a and gnd\n"
     "find vth at P\n", 3, "the circuit is singular"),
    # joined only through an independent current source
    ("resistor R between b and gnd\ncurrent source I from b to a = 1 mA\n"
     "port P between a and gnd\nfind vth at P\n", 2, "cut set of current sources I"),
    # a floating node
    ("resistor R between b and gnd\nresistor R2 between a and c\nport P between a and gnd\n"
     "find vth at P\n", 2, "not connected"),
    # a loop of voltage sources
    ("voltage source V1 between a and gnd\nvoltage source V2 between a and gnd\n"
     "resistor R between a and gnd\nport P between a and gnd\nfind vth at P\n", 2,
     "loop of voltage sources"),
])
def test_singular_circuits_keep_located_errors(text, line, what, tmp_path):
    p = json_record(text, tmp_path)
    assert p.returncode == 2
    first = p.stderr.splitlines()[0]
    assert first.startswith(f"{tmp_path / 'sheet.eqv'}:{line}:1: error:"), first
    assert what in first


def test_regular_is_decided_exactly():
    # the rank check proves regularity by an exact nonzero determinant at a rational point
    c = derive.circuit_of(GYRATOR.format(load="capacitor"))
    from derive.solver.stamping import System
    assert System(c).regular()
    with pytest.raises(SheetError):
        derive.circuit_of("voltage source V between b and gnd\nresistor R between b and gnd\n"
                          "current source G1 from a to gnd = g1*across(b, gnd)\n")
