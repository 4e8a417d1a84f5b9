"""``find sensitivity of`` / ``find tolerance of`` ``f0``, ``w0`` and ``Q`` of a result: the
natural frequency and quality factor of its second-order denominator, against an
independent computation (the poles of a nodal matrix written here, numpy/scipy), central
differences and a brute-force search of the tolerance box."""
import itertools
import json
import math

import numpy as np
import pytest
import scipy.linalg

from derive import derive_text
from derive.cli import main
from derive.errors import SheetError

# Unity-gain Sallen-Key low-pass: R1 from the input to node a, R2 from a to the + input p,
# C1 from a to the output (feedback), C2 from p to ground, the op-amp a follower.
# Handbook closed form (from memory): w0 = 1/sqrt(R1 R2 C1 C2), Q = sqrt(R1 R2 C1 C2) /
# (C2 (R1 + R2)).
NOM = {"R1": 10e3, "R2": 22e3, "C1": 10e-9, "C2": 4.7e-9}
TOL = {"R1": 0.01, "R2": 0.01, "C1": 0.05, "C2": 0.05}
PARTS = """voltage source Vin between in and gnd = 1 V
resistor R1 between in and a = 10 kohm ±1%
resistor R2 between a and p = 22 kohm ±1%
capacitor C1 between a and out = 10 nF ±5%
capacitor C2 between p and gnd = 4.7 nF ±5%
opamp U1 inputs p, out output out
port o between out and gnd
"""


def poles(R1, R2, C1, C2):
    """The two poles, from the nodal equations written by hand (unknowns v_a, v_p; the
    follower makes v_out = v_p; sources zeroed):
      a: (1/R1 + 1/R2) v_a - v_p/R2 + s C1 (v_a - v_p) = 0
      p: -v_a/R2 + v_p/R2 + s C2 v_p = 0
    i.e. (G + s C) v = 0, so the poles are the generalised eigenvalues of (G, -C)."""
    G = np.array([[1 / R1 + 1 / R2, -1 / R2], [-1 / R2, 1 / R2]])
    C = np.array([[C1, -C1], [0.0, C2]])
    return scipy.linalg.eigvals(G, -C)


def w0_q(R1, R2, C1, C2):
    """w0 = |p| and Q = w0 / (-2 Re p) of the complex pair (p1 p2 = w0², p1 + p2 = -w0/Q)."""
    p1, p2 = poles(R1, R2, C1, C2)
    w0 = math.sqrt((p1 * p2).real)
    return w0, w0 / (-(p1 + p2).real)


def handbook(R1, R2, C1, C2):
    return 1 / math.sqrt(R1 * R2 * C1 * C2), math.sqrt(R1 * R2 * C1 * C2) / (C2 * (R1 + R2))


def _json(text):
    return json.loads(derive_text(text, "sk.eqv", mc_samples=4000).to_json())["results"]


def test_independent_pole_computation_agrees_with_the_handbook():
    assert w0_q(**NOM) == pytest.approx(handbook(**NOM), rel=1e-12)


def test_nominal_values_of_f0_w0_and_q():
    res = _json(PARTS + "find tolerance of w0 of gain from Vin to o\n"
                        "find tolerance of f0 of gain from Vin to o\n"
                        "find tolerance of Q of gain from Vin to o\n")
    w0, q = w0_q(**NOM)
    assert res[0]["spread"]["nominal"] == pytest.approx(w0, rel=1e-12)          # 9834 rad/s
    assert res[1]["spread"]["nominal"] == pytest.approx(w0 / (2 * math.pi), rel=1e-12)
    assert res[2]["spread"]["nominal"] == pytest.approx(q, rel=1e-12)           # 0.6761
    assert [r["tolerance_unit"] for r in res] == ["rad/s", "Hz", None]


@pytest.mark.parametrize("word, k", [("w0", 0), ("Q", 1), ("f0", 0)])
def test_sensitivities_against_central_differences(word, k):
    res = _json(PARTS + f"find sensitivity of {word} of gain from Vin to o\n")[0]
    sens = res["sensitivities"]
    for x, x0 in NOM.items():
        h = x0 * 1e-5
        up = w0_q(**{**NOM, x: x0 + h})[k]
        dn = w0_q(**{**NOM, x: x0 - h})[k]
        central = x0 * (up - dn) / (2 * h) / w0_q(**NOM)[k]
        assert sens[x]["value"] == pytest.approx(central, abs=1e-7), x
    assert sens["Vin"]["value"] == 0
    if word == "Q":   # by hand: S(Q, R1) = (R2 - R1) / (2 (R1 + R2)) = 12/64
        assert sens["R1"]["value"] == pytest.approx(0.1875, abs=1e-15)


@pytest.mark.parametrize("word, k, scale", [("w0", 0, 1.0), ("Q", 1, 1.0),
                                            ("f0", 0, 1 / (2 * math.pi))])
def test_tolerance_extremes_against_brute_force_over_the_box(word, k, scale):
    res = _json(PARTS + f"find tolerance of {word} of gain from Vin to o\n")[0]
    sp = res["spread"]
    grid = []
    for pick in itertools.product((-1, -0.5, 0, 0.5, 1), repeat=4):
        pt = {x: NOM[x] * (1 + t * TOL[x]) for (x, t) in zip(NOM, pick)}
        grid.append(w0_q(**pt)[k] * scale)
    assert sp["low"] == pytest.approx(min(grid), rel=1e-12)
    assert sp["high"] == pytest.approx(max(grid), rel=1e-12)
    assert "corners" in sp["method"]
    mc = res["monte_carlo"]
    assert sp["low"] <= mc["low"] <= mc["high"] <= sp["high"]


def test_record_shows_units_and_the_sensitivity_label():
    md = derive_text(PARTS + "find tolerance of f0 of gain from Vin to o\n"
                             "find sensitivity of Q of gain from Vin to o\n",
                     "sk.eqv", mc_samples=2000).to_markdown()
    lo, hi = (w0_q(**{x: NOM[x] * (1 + s * TOL[x]) for x in NOM})[0] / (2 * math.pi)
              for s in (1, -1))          # w0 falls with every part: all high, all low
    assert f"{lo / 1e3:.3f} kHz to {hi / 1e3:.3f} kHz (extreme values" in md   # 1.476, 1.664
    assert "largest normalized sensitivities (x/Q)(dQ/dx): C1 0.5000, C2 -0.5000, R1 0.1875" in md


def _error(text):
    with pytest.raises(SheetError) as e:
        derive_text(text, "e.eqv")
    return e.value


def test_first_order_denominator_is_a_located_error():
    e = _error("voltage source Vin between in and gnd = 1 V\n"
               "resistor R1 between in and a = 10 kohm ±1%\n"
               "capacitor C1 between a and gnd = 10 nF ±5%\n"
               "port o between a and gnd\n"
               "find tolerance of f0 of gain from Vin to o\n")
    assert (e.line, e.col) == (5, 19)
    assert "denominator of gain is of order 1 in s" in str(e) and "corner frequency" in e.format()


def test_third_order_denominator_says_its_order():
    rc3 = ("voltage source Vin between in and gnd = 1 V\n" +
           "".join(f"resistor R{k} between n{k - 1} and n{k} = 10 kohm ±1%\n"
                   f"capacitor C{k} between n{k} and gnd = 10 nF ±5%\n" for k in (1, 2, 3))
           ).replace("n0", "in") + "port o between n3 and gnd\nfind sensitivity of Q of vth at o\n"
    e = _error(rc3)
    assert "quality factor Q of vth needs a second-order denominator" in str(e)
    assert "of order 3 in s" in str(e)


def test_two_second_order_sections_are_named_per_factor():
    stage2 = ("resistor R3 between out and a2 = 10 kohm ±1%\n"
              "resistor R4 between a2 and p2 = 10 kohm ±1%\n"
              "capacitor C3 between a2 and out2 = 22 nF ±5%\n"
              "capacitor C4 between p2 and gnd = 2.2 nF ±5%\n"
              "opamp U2 inputs p2, out2 output out2\n"
              "port o2 between out2 and gnd\n")
    e = _error(PARTS + stage2 + "find tolerance of w0 of gain from Vin to o2\n")
    msg = str(e)
    assert "of order 4 in s; it factors into order 2 (" in msg and ") and order 2 (" in msg
    assert "C1*C2*R1*R2*s**2" in msg and "C3*C4*R3*R4*s**2" in msg
    # each section alone is fine: the first stage's port still gives its own Q
    assert _json(PARTS + stage2 + "find tolerance of Q of gain from Vin to o\n")[0][
        "spread"]["nominal"] == pytest.approx(w0_q(**NOM)[1], rel=1e-12)


def test_resistive_result_has_no_natural_frequency():
    e = _error("voltage source V between a and gnd = 1 V\n"
               "resistor R between a and b = 1k ±1%\nresistor R2 between b and gnd = 1k\n"
               "port o between b and gnd\nfind tolerance of w0 of vth at o\n")
    assert "does not depend on s" in str(e) and "no natural frequency ω0" in str(e)


@pytest.mark.parametrize("line, words", [
    ("find drift of Q of gain from Vin to o", "not by 'find drift of'"),
    ("find tolerance of f0 of model from o to o", "takes a single quantity"),
])
def test_refused_combinations(tmp_path, capsys, line, words):
    p = tmp_path / "s.eqv"
    p.write_text(PARTS + line + "\n")
    assert main(["record", str(p)]) == 2
    err = capsys.readouterr().err
    assert words in err and f"s.eqv:{PARTS.count(chr(10)) + 1}:" in err


def test_response_words_stay_names_elsewhere():
    rec = derive_text("voltage source Q between f0 and gnd = 2 V\n"
                      "resistor w0 between f0 and m = 1 kohm\n"
                      "resistor R between m and gnd = 1 kohm\n"
                      "port o between m and gnd\nfind vth at o\n")
    assert rec.results[0].quantities["vth"].value == 1.0      # 2 V halved
