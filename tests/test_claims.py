"""check Q at P equals EXPR: exact verdicts, counterexamples, diagnoses, dimension errors."""
import json
from fractions import Fraction

import pytest

import derive
from derive import cli
from derive.analyses.claims import check_lines

NETWORK = """title "Claim checks"
voltage source V between top and gnd = 5 V
resistor Ra between top and out = 1 kohm
resistor Rb between out and gnd = 2 kohm
resistor Rc between out and gnd = 3 kohm
resistor R1 between top and x = 1 kohm
resistor R2 between x and gnd = 1 kohm
port out between out and gnd
port px between x and gnd
"""


def check(claim):
    rec = derive.derive_text(NETWORK + claim + "\n", "c.eqv")
    return rec.results[0].extra, rec


def test_equivalent_form_holds():
    ex, rec = check("check rth at out equals 1/(1/Ra + 1/Rb + 1/Rc)")
    assert ex["holds"] is True and ex["counterexample"] is None and ex["diagnosis"] is None
    assert ex["method"].startswith("exact cancellation")
    assert ex["dimensions"] == "dimensions agree (Ω)"
    assert all(s.verified for s in rec.results[0].steps)
    ex, _ = check("check vth at out equals V*(Rb||Rc)/(Ra + Rb||Rc)")
    assert ex["holds"] is True


def test_missing_parallel_term():
    ex, rec = check("check rth at out equals Ra||Rb")
    assert ex["holds"] is False
    assert ex["diagnosis"] == "agrees with rth when Rc → ∞ (the claim leaves out Rc)"
    # counterexample at nominal values; rth = 1k||2k||3k = 6000/11, claim 1k||2k = 2000/3
    # (hand arithmetic)
    cx = ex["counterexample"]
    assert cx["at_nominal"] is True and cx["point"] == {"Ra": 1000.0, "Rb": 2000.0, "Rc": 3000.0}
    assert cx["quantity"] == pytest.approx(6000 / 11) and cx["claim"] == pytest.approx(2000 / 3)
    assert ex["relative_error"] == pytest.approx(float(Fraction(2000, 3) / Fraction(6000, 11) - 1))
    lines, ok = check_lines(rec)
    assert not ok and lines[0].startswith("FAIL line 10: check rth at out equals Ra||Rb — ")


def test_factor_two_and_sign():
    ex, _ = check("check rth at out equals 2*(Ra||Rb||Rc)")
    assert ex["holds"] is False and ex["diagnosis"].startswith("differs by a factor 2")
    assert ex["relative_error"] == pytest.approx(1.0)
    ex, _ = check("check rth at out equals -(Ra||Rb||Rc)")
    assert ex["diagnosis"].startswith("differs in sign")


def test_dimension_error_names_the_term():
    ex, _ = check("check rth at px equals R1 + R1*R2")
    assert ex["holds"] is False
    assert ex["diagnosis"] == "dimension error: the term R1*R2 is Ω², but R1 is Ω"
    ex, _ = check("check rth at px equals R1*R2 + R1")      # the odd term named wherever it is
    assert ex["diagnosis"] == "dimension error: the term R1*R2 is Ω², but R1 is Ω"
    ex, _ = check("check vth at px equals R1*R2/(R1 + R2)")
    assert ex["diagnosis"] == "dimension error: the claim is Ω, vth is V"


def test_approximation_is_named():
    ex, _ = check("check vth at px equals V*R2/R1")
    assert ex["holds"] is False
    assert "relative error vanishes when R1 → ∞ or when R2 → 0" in ex["diagnosis"]


def test_unitless_gain_does_not_raise_false_dimension_errors():
    text = """voltage source Vi between a and gnd = 1 V
resistor Ri between a and gnd = 1 kohm
current source G1 from out to gnd = gm*across(a, gnd)
nominal gm = 0.01
resistor Rl between out and gnd = 1 kohm
port o between out and gnd
check vth at o equals -gm*Rl*Vi
"""
    ex = derive.derive_text(text, "g.eqv").results[0].extra
    assert ex["holds"] is True and ex["dimensions"].startswith("dimension not checked")


def test_json_keys():
    rec = derive.derive_text(NETWORK + "check rth at out equals Ra||Rb\n", "c.eqv")
    res = json.loads(rec.to_json())["results"][0]
    assert res["holds"] is False and res["counterexample"]["at_nominal"] is True
    assert {"diagnosis", "relative_error", "steps"} <= set(res)


def test_cli_exit_status(tmp_path, capsys):
    good = tmp_path / "good.eqv"
    good.write_text(NETWORK + "check rth at px equals R1||R2\n")
    assert cli.main(["check", str(good)]) == 0
    assert capsys.readouterr().out == "PASS line 10: check rth at px equals R1||R2\n"
    bad = tmp_path / "bad.eqv"
    bad.write_text(NETWORK + "check rth at px equals R1||R2\ncheck rth at px equals R1\n")
    assert cli.main(["check", str(bad)]) == 1
    out = capsys.readouterr().out.splitlines()
    assert out[0].startswith("PASS line 10") and out[1].startswith("FAIL line 11")
    assert "agrees with rth when R2 → ∞" in out[1]


def test_sequence_only_quantity_uses_exact_random_points(monkeypatch):
    """A quantity known only as named intermediates: exact rational evaluation, said so."""
    from derive.forms import select as forms
    real = forms.port_quantities

    def sequence_only(ctx, req):
        out = real(ctx, req)
        for q in out:
            if q.sequence:
                q.expr = None
        return out

    monkeypatch.setattr(forms, "port_quantities", sequence_only)
    import derive.analyses.run as analysis
    c = derive.circuit_of(NETWORK + "check rth at out equals 1/(1/Ra + 1/Rb + 1/Rc)\n"
                          "check rth at out equals Ra||Rb\n", "c.eqv")
    ctx = analysis.Context(c, analysis.Options(expand_limit=0))
    good, bad = (analysis.HANDLERS["check"](ctx, r).extra for r in c.requests)
    assert good["holds"] is True and "random rational points" in good["method"]
    assert bad["holds"] is False and "Rc → ∞" in bad["diagnosis"]


INA = """voltage source Vp between inp and gnd = 1.01 V
voltage source Vn between inn and gnd = 1.00 V
opamp U1 inputs inp, f1 output o1
opamp U2 inputs inn, f2 output o2
resistor R1 between o1 and f1 = 24.9 kohm
resistor Rg between f1 and f2 = 2.49 kohm
resistor R2 between f2 and o2 = 24.9 kohm
resistor R3 between o1 and m = 10 kohm
resistor R4 between m and out = 10 kohm
resistor R5 between o2 and p = 10 kohm
resistor R6 between p and gnd = 10 kohm
opamp U3 inputs p, m output out
port o between out and gnd
check gain from Vp to o equals {claim}
"""


def test_a_claim_of_the_wrong_sign_is_named_at_nominal():
    """Three-op-amp instrumentation amplifier with the first stage's U1 side into the
    difference stage's inverting input: gain from Vp = -(1 + 2 R1/Rg) when R3 = R4 and
    R5 = R6 (textbook three-op-amp gain, from memory). The textbook magnitude as a claim is
    refused, and the diagnosis says it is exactly the opposite sign at nominal values; the
    right sign is also not an identity (it holds only for matched resistors), and the
    diagnosis says it agrees at nominal."""
    import derive
    rec = derive.derive_text(INA.format(claim="1 + 2*R1/Rg"))
    r = rec.results[0]
    assert r.extra["holds"] is False
    assert "at nominal values the claim is exactly -gain (opposite sign" in r.extra["diagnosis"]
    assert r.extra["relative_error"] == pytest.approx(-2.0)
    rec = derive.derive_text(INA.format(claim="-(1 + 2*R1/Rg)"))
    r = rec.results[0]
    assert r.extra["holds"] is False
    assert "at nominal values the claim is exactly gain" in r.extra["diagnosis"]
    assert r.extra["relative_error"] == pytest.approx(0.0, abs=1e-15)
