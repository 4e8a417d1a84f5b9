"""Sensitivities: exact closed forms, values, invariants, sequences, JSON and figures."""
from __future__ import annotations

import json
from fractions import Fraction

import pytest
import sympy

import derive
from derive.export import plots
from derive.analyses import run as analysis
from derive.errors import SheetError
from derive.analyses.sensitivity import Form, derivative
from helpers import run, same

DIVIDER = """
voltage source V between a and gnd = 10 V ±1%
resistor R1 between a and b = 1 kohm ±1%
resistor R2 between b and gnd = 4 kohm ±1%
port out between b and gnd
find sensitivity of vth at out
"""

# A bridged-T attenuator with a load: not series-parallel, four resistances, one source.
BRIDGED_T = """
voltage source Vs between i and gnd = 1 V
resistor Ra between i and o = 1 kohm ±1%
resistor Rb between i and m = 2.2 kohm ±1%
resistor Rc between m and o = 3.3 kohm ±1%
resistor Rd between m and gnd = 470 ohm ±1%
resistor Rl between o and gnd = 10 kohm ±5%
port out between o and gnd
find sensitivity of gain from Vs to out
find sensitivity of rth at out
find sensitivity of thevenin at out
"""


def _sens(rec, i=0):
    return rec.results[i].extra["sensitivities"]


def test_divider_exact_normalized_sensitivities():
    # vth = V*R2/(R1+R2): S_R1 = -R1/(R1+R2), S_R2 = R1/(R1+R2), S_V = 1
    # (voltage divider, common practice, no source)
    V, R1, R2 = sympy.symbols("V R1 R2")
    rec = run(DIVIDER)
    res = rec.results[0]
    a = derive.analyses.sensitivity.analysed(analysis.Context(rec.circuit, analysis.Options()),
                                    res.request)[0]
    by = {str(s.symbol): s for s in a.sens}
    assert same(by["R1"].normalized, -R1 / (R1 + R2))
    assert same(by["R2"].normalized, R1 / (R1 + R2))
    assert same(by["V"].normalized, sympy.Integer(1))
    assert same(by["R1"].deriv.final, -V * R2 / (R1 + R2) ** 2)
    s = _sens(rec)
    assert s["R1"]["value"] == pytest.approx(-0.2, rel=1e-15)
    assert s["R2"]["value"] == pytest.approx(0.2, rel=1e-15)
    assert s["V"]["value"] == pytest.approx(1.0, rel=1e-15)
    # dvth/dR1 = -V*R2/(R1+R2)^2 = -10*4000/5000^2
    assert s["R1"]["derivative_value"] == pytest.approx(-10 * 4000 / 5000 ** 2, rel=1e-15)
    # ranked by |S|: V first, then the two resistors
    assert list(s)[0] == "V" and [e["rank"] for e in s.values()] == [1, 2, 3]


def test_derivatives_match_central_differences():
    # independent numeric check: central differences of the derived gain at nominal
    # (finite-difference derivative, common practice, no source)
    rec = run(BRIDGED_T)
    res = rec.results[0]
    q = res.request
    ctx = analysis.Context(rec.circuit, analysis.Options())
    a = derive.analyses.sensitivity.analysed(ctx, q)[0]
    nom = ctx.nominal
    for s in a.sens:
        h = nom[s.symbol] * sympy.Rational(1, 10 ** 6)
        up = a.form.value({**nom, s.symbol: nom[s.symbol] + h})
        dn = a.form.value({**nom, s.symbol: nom[s.symbol] - h})
        fd = float((up - dn) / (2 * h))
        assert float(s.d_value) == pytest.approx(fd, rel=1e-8, abs=1e-18)


def test_homogeneity_invariants():
    # Euler's theorem on homogeneous functions (network-sensitivity invariants, common
    # practice): a dimensionless ratio of a resistive network is homogeneous of degree 0 in
    # the resistances, so its normalized sensitivities to them sum to 0; a resistance is of
    # degree 1, so they sum to 1; vth is of degree 1 in the source and 0 in the resistances.
    rec = run(BRIDGED_T)
    Rs = {"Ra", "Rb", "Rc", "Rd", "Rl"}
    gain = _sens(rec, 0)
    assert sum(gain[r]["value"] for r in Rs) == pytest.approx(0.0, abs=1e-12)
    rth = _sens(rec, 1)
    assert sum(rth[r]["value"] for r in Rs) == pytest.approx(1.0, rel=1e-12)
    vth = rec.results[2].extra["sensitivities_by_quantity"]["vth"]
    assert sum(vth[r]["value"] for r in Rs) == pytest.approx(0.0, abs=1e-12)
    assert vth["Vs"]["value"] == pytest.approx(1.0, rel=1e-15)
    # and exactly, in closed form
    ctx = analysis.Context(rec.circuit, analysis.Options())
    a = derive.analyses.sensitivity.analysed(ctx, rec.results[1].request)[0]
    # (a derivative carried through the quantity's sequence is written in its names: every
    # named intermediate substituted back first)
    from derive.forms.elimination import inline
    total = sum(inline(s.deriv.defs, s.normalized) for s in a.sens if str(s.symbol) in Rs)
    assert sympy.cancel(sympy.together(total - 1)) == 0


def test_thevenin_gives_both_members():
    rec = run(BRIDGED_T)
    ex = rec.results[2].extra
    assert ex["sensitivity_of"] == "vth"
    assert set(ex["sensitivities_by_quantity"]) == {"vth", "rth"}
    assert ex["sensitivities"] == ex["sensitivities_by_quantity"]["vth"]
    # rth does not depend on the source: zero sensitivity, listed
    assert ex["sensitivities_by_quantity"]["rth"]["Vs"]["value"] == 0.0


def test_forward_mode_through_a_sequence():
    # the chain rule through named intermediates equals differentiating the inlined form
    R1, R2, R3, V = sympy.symbols("R1 R2 R3 V")
    p, q = sympy.symbols("p q")
    seq = Form([(p, R2 * R3 / (R2 + R3)), (q, R1 + p)], V * p / q)
    inlined = V * (R2 * R3 / (R2 + R3)) / (R1 + R2 * R3 / (R2 + R3))
    for x in (R1, R2, R3, V):
        d, raw = derivative(seq, x)
        assert raw is None and d.defs[:2] == seq.defs
        pt = {R1: 3, R2: 5, R3: 7, V: 2}
        assert d.value(pt) == sympy.diff(inlined, x).subs(pt)


def test_numeric_line_does_not_hide_a_part():
    rec = run(DIVIDER + "numeric R1\n")
    assert _sens(rec)["R1"]["value"] == pytest.approx(-0.2, rel=1e-15)


def test_zero_nominal_gives_null_normalized_value():
    text = DIVIDER.replace("4 kohm ±1%", "1 kohm").replace(
        "port out between b and gnd", "resistor R3 between a and c = 1 kohm\n"
        "resistor R4 between c and gnd = 1 kohm\nport out between b and c")
    s = _sens(run(text))
    assert s["R1"]["value"] is None and s["R1"]["derivative_value"] == pytest.approx(-10 / 4000)


def test_frequency_dependent_quantity_is_refused():
    text = DIVIDER.replace("resistor R2", "capacitor C2").replace("4 kohm", "1 nF")
    with pytest.raises(SheetError, match="later feature"):
        run(text)


def test_json_and_figure(tmp_path):
    rec = run(DIVIDER)
    d = json.loads(rec.to_json())
    r = d["results"][0]
    assert "figures" not in r
    assert set(r["sensitivities"]["R1"]) >= {"expr", "normalized", "value"}
    assert r["sensitivities"]["R1"]["normalized"] == "-R1/(R1 + R2)"
    fig = rec.results[0].extra["figures"][0]
    path = tmp_path / (fig.name + ".png")
    plots.draw(fig, str(path))
    assert path.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"


def test_model_request_is_refused():
    text = DIVIDER.replace("find sensitivity of vth at out",
                           "port inp between a and gnd\nfind sensitivity of model from inp to out")
    with pytest.raises(SheetError):
        run(text)


def test_agree_rejects_a_wrong_identity():
    R1, R2 = sympy.symbols("R1 R2")
    from derive.analyses.sensitivity import agree, tidy
    assert agree(-R1 / (R1 + R2), -R1 * R2 / (R1 * R2 + R2 ** 2))
    assert not agree(-R1 / (R1 + R2), -R2 / (R1 + R2))
    # tidy cancels exactly: (R1^2 - R2^2)/(R1 + R2) = R1 - R2
    assert tidy((R1 ** 2 - R2 ** 2) / (R1 + R2)) == R1 - R2


def _ladder_sens(n):
    lines = ["voltage source V between n0 and gnd = 10 V ±1%"]
    for k in range(1, n + 1):
        lines.append(f"resistor Rs{k} between n{k - 1} and n{k} = {k} kohm ±1%")
        lines.append(f"resistor Rp{k} between n{k} and gnd = {10 + k} kohm ±1%")
    lines.append(f"port out between n{n} and gnd")
    return "\n".join(lines) + "\nfind sensitivity of vth at out\n"


def _ladder_vth(n, values):
    """vth of the ladder by a numpy nodal solve written here (nodes n1..nn)."""
    import numpy
    G = numpy.zeros((n, n))
    b = numpy.zeros(n)
    for k in range(1, n + 1):
        gs, gp, i = 1 / values[f"Rs{k}"], 1 / values[f"Rp{k}"], k - 1
        G[i, i] += gs + gp
        if k == 1:
            b[i] += gs * values["V"]
        else:
            G[i, i - 1] -= gs
            G[i - 1, i] -= gs
            G[i - 1, i - 1] += gs
    return numpy.linalg.solve(G, b)[-1]


def _printed(sens):
    return sum(len(e["expr"]) if "expr" in e else
               sum(len(a) + len(b) for a, b in e["sequence"]) + len(e["in_sequence"])
               for e in sens.values())


@pytest.mark.parametrize("n", [2, 3, 4])
def test_ladder_route_shorter_derivatives_values_from_a_nodal_solve(n, monkeypatch):
    import derive.analyses.sensitivity as S
    rec = run(_ladder_sens(n))
    sens = json.loads(rec.to_json())["results"][0]["sensitivities"]
    nominal = {"V": 10.0, **{f"Rs{k}": 1000.0 * k for k in range(1, n + 1)},
               **{f"Rp{k}": 1000.0 * (10 + k) for k in range(1, n + 1)}}
    q0 = _ladder_vth(n, nominal)
    for x, e in sens.items():
        # central difference of the nodal solve (step 1e-6 relative: error ~1e-10)
        h = nominal[x] * 1e-6
        up = _ladder_vth(n, dict(nominal, **{x: nominal[x] + h}))
        dn = _ladder_vth(n, dict(nominal, **{x: nominal[x] - h}))
        assert e["value"] == pytest.approx(nominal[x] / q0 * (up - dn) / (2 * h), rel=1e-6,
                                           abs=1e-12)
    sequence = any("sequence" in e for e in sens.values())
    # the closed-form route, forced, for comparison: the chosen derivatives are no longer
    monkeypatch.setattr(S, "_route", lambda ctx, q, form: (form, None))
    closed = json.loads(run(_ladder_sens(n)).to_json())["results"][0]["sensitivities"]
    assert not any("sequence" in e for e in closed.values())
    assert _printed(sens) <= _printed(closed)
    assert sequence == (n >= 3)     # ladder 2: the closed form's derivatives are shorter
    assert all(s.verified for s in rec.results[0].steps)
