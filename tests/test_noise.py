"""find noise at P from F1 to F2, against the outside world.

References: the Johnson–Nyquist thermal noise density 4kTR (J. B. Johnson, H. Nyquist, Phys.
Rev. 32, 1928: classical); the kT/C noise of an RC low-pass (classical, any noise textbook);
the output noise of a non-inverting amplifier (textbook sum, from memory); a numpy nodal solve
written in this file; scipy.integrate.quad for band integrals.
"""
from __future__ import annotations

import json
import math
import random
from fractions import Fraction

import numpy as np
import pytest
import sympy

import derive
from derive.cli import main
from derive.forms import band as bands

K = 1.380649e-23            # J/K, SI 2019 (exact)
T25 = 298.15                # K


def run(text):
    return derive.derive_text(text, "n.eqv")


def noise_of(text, i=0):
    rec = run(text)
    return rec.results[i].extra["noise"], rec


# ------------------------------------------------------------------ a numpy nodal solve
def nodal_solve(nodes, elements, f, inject):
    """Port-independent numpy MNA at frequency f: ``elements`` are (kind, name, a, b, value)
    with kinds 'R', 'C', 'V' (value in volts, a +), 'I' (current from a to b through the
    source), 'OA' (ideal op-amp: a = (inp, inn), b = out). ``inject`` replaces every
    independent source value by the given dict (name -> value), missing ones zero. Returns
    the node voltages as a dict."""
    idx = {n: i for i, n in enumerate(x for x in nodes if x != "gnd")}
    branches = [e for e in elements if e[0] in ("V", "OA")]
    n = len(idx) + len(branches)
    A = np.zeros((n, n), complex)
    b = np.zeros(n, complex)
    s = 2j * np.pi * f

    def at(i, j, v):
        if i is not None and j is not None:
            A[i, j] += v
    for kind, name, a, bb, value in elements:
        if kind in ("R", "C"):
            y = 1 / value if kind == "R" else s * value
            ia, ib = idx.get(a), idx.get(bb)
            at(ia, ia, y); at(ib, ib, y); at(ia, ib, -y); at(ib, ia, -y)
        elif kind == "I":
            v = inject.get(name, 0)
            if idx.get(a) is not None:
                b[idx[a]] -= v
            if idx.get(bb) is not None:
                b[idx[bb]] += v
    for k, (kind, name, a, bb, value) in enumerate(branches):
        j = len(idx) + k
        if kind == "V":
            ia, ib = idx.get(a), idx.get(bb)
            at(ia, j, 1); at(ib, j, -1); at(j, ia, 1); at(j, ib, -1)
            b[j] = inject.get(name, 0)
        else:
            inp, inn = a
            at(idx.get(bb), j, 1)
            at(j, idx.get(inp), 1); at(j, idx.get(inn), -1)
    x = np.linalg.solve(A, b)
    out = {nn: x[i] for nn, i in idx.items()}
    out["gnd"] = 0
    return out


# ------------------------------------------------------------------ resistor divider
DIVIDER = """voltage source V between a and gnd = 5 V
resistor R1 between a and out = 10 kohm
resistor R2 between out and gnd = 40 kohm
port p between out and gnd
find noise at p from 10 Hz to 10 kHz
"""


def test_divider_density_is_4kT_times_the_parallel_resistance():
    # Johnson–Nyquist (classical): the open-circuit noise of a resistive one-port is 4kT·Re Z;
    # for the divider seen at its tap Z = R1 || R2 = 8 kΩ.
    n, rec = noise_of(DIVIDER)
    R1, R2 = sympy.symbols("R1 R2")
    expr = rec.results[0].extra["noise"]["density"]["expr"]
    kT4 = 4 * sympy.Rational(1380649, 10 ** 29) * sympy.Rational(29815, 100)
    assert sympy.simplify(expr - kT4 * R1 * R2 / (R1 + R2)) == 0
    rp = 10e3 * 40e3 / 50e3
    assert n["rms"] == pytest.approx(math.sqrt(4 * K * T25 * rp * (10e3 - 10)), rel=1e-12)
    # R1's share is its current noise through R2's side: (R2/(R1+R2))^2·4kT R1 / (4kT Rp)
    assert n["contributions"]["R1"]["share"] == pytest.approx(
        (40 / 50) ** 2 * 10e3 / rp, rel=1e-12)
    assert sum(c["share"] for c in n["contributions"].values()) == pytest.approx(1, rel=1e-12)
    assert n["noise_bandwidth"] is None          # a white density has no finite NEB


def test_noiseless_resistor_and_temperature():
    text = DIVIDER.replace("= 40 kohm", "= 40 kohm noiseless") + "temperature 85 C\n"
    n, _ = noise_of(text)
    assert set(n["contributions"]) == {"R1"}
    # 4kT R1 (R2/(R1+R2))^2 at 358.15 K (85 °C + 273.15, exact)
    dens = 4 * K * 358.15 * 10e3 * (40 / 50) ** 2
    assert n["rms"] == pytest.approx(math.sqrt(dens * (10e3 - 10)), rel=1e-12)
    assert n["temperature"]["kelvin"] == pytest.approx(358.15)
    assert n["noiseless"] and n["noiseless"][0]["part"] == "R2"


def test_conductance_makes_4kTG():
    # a conductance G is a resistor 1/G: 4kTG current noise, so 4kT/G across it alone
    text = ("conductance G1 between out and gnd = 1 mS\nport p between out and gnd\n"
            "find noise at p from 0 Hz to 1 kHz\n")
    n, _ = noise_of(text)
    assert n["rms"] == pytest.approx(math.sqrt(4 * K * T25 * 1e3 * 1e3), rel=1e-12)


# ------------------------------------------------------------------ RC low-pass
def rc_text(R, C, f1, f2):
    return (f"voltage source V between a and gnd = 1 V\nresistor R between a and out = {R}\n"
            f"capacitor C between out and gnd = {C}\nport p between out and gnd\n"
            f"find noise at p from {f1} to {f2}\n")


def test_rc_total_noise_is_kT_over_C():
    # kT/C noise (classical): ∫_0^∞ 4kTR/(1 + (2πfRC)^2) df = 4kTR·1/(4RC) = kT/C, whatever R
    for R, C, c in (("10 kohm", "10 nF", 10e-9), ("1 Mohm", "1 pF", 1e-12),
                    ("47 ohm", "2.2 uF", 2.2e-6)):
        n, _ = noise_of(rc_text(R, C, "0 Hz", "1 kHz"))
        nb = n["noise_bandwidth"]
        assert nb["mean_square_0_to_inf"] == pytest.approx(K * T25 / c, rel=1e-12)
        assert nb["method"] == "closed form"


def test_rc_finite_band_arctan_by_hand():
    # ∫_{F1}^{F2} 4kTR/(1 + (2πfRC)^2) df = 4kTR/(2πRC)·[atan(2πF2RC) − atan(2πF1RC)]
    # (worked by hand: substitute x = 2πfRC)
    R, C, F1, F2 = 10e3, 10e-9, 10.0, 100e3
    n, _ = noise_of(rc_text("10 kohm", "10 nF", "10 Hz", "100 kHz"))
    tau = R * C
    ms = 4 * K * T25 * R / (2 * math.pi * tau) * (math.atan(2 * math.pi * F2 * tau) -
                                                   math.atan(2 * math.pi * F1 * tau))
    assert n["mean_square"]["value"] == pytest.approx(ms, rel=1e-12)
    assert n["rms"] == pytest.approx(math.sqrt(ms), rel=1e-12)
    assert "atan" in str(n["mean_square"]["closed_form"])
    # NEB of one pole: π/2·fc = 1/(4RC) (textbook)
    assert n["noise_bandwidth"]["value"] == pytest.approx(1 / (4 * tau), rel=1e-12)


# ------------------------------------------------------------------ non-inverting amplifier
NONINV = """voltage source Vin between src and gnd = 0 V
resistor Rs between src and p = 1 kohm
opamp U1 inputs p, n output o noise 4 nV/rtHz and 2 pA/rtHz
resistor R1 between n and gnd = 1 kohm
resistor R2 between o and n = 9 kohm
port out between o and gnd
find noise at out from 1 Hz to 1 kHz
"""


def test_non_inverting_amplifier_textbook_sum():
    # output noise density (textbook sum, from memory), G = 1 + R2/R1:
    #   G²(en² + in²Rs² + 4kTRs) + in²R2² + 4kTR1(R2/R1)² + 4kTR2
    n, _ = noise_of(NONINV)
    en, inn, Rs, R1, R2 = 4e-9, 2e-12, 1e3, 1e3, 9e3
    G = 1 + R2 / R1
    kT4 = 4 * K * T25
    parts = {"U1.en": G ** 2 * en ** 2, "U1.in+": G ** 2 * inn ** 2 * Rs ** 2,
             "Rs": G ** 2 * kT4 * Rs, "U1.in-": inn ** 2 * R2 ** 2,
             "R1": kT4 * R1 * (R2 / R1) ** 2, "R2": kT4 * R2}
    total = sum(parts.values())
    band = 1e3 - 1
    assert n["rms"] == pytest.approx(math.sqrt(total * band), rel=1e-12)
    for name, d in parts.items():
        assert n["contributions"][name]["share"] == pytest.approx(d / total, rel=1e-12)
        assert n["contributions"][name]["rms"] == pytest.approx(math.sqrt(d * band), rel=1e-12)


def _noninv_elements(vals):
    Rs, R1, R2, Cf = vals
    return [("V", "Vin", "src", "gnd", 0.0), ("R", "Rs", "src", "x", Rs),
            ("V", "EN", "x", "p", 0.0),               # en in series with the + input
            ("OA", "U1", ("x", "n"), "o", None), ("R", "R1", "n", "gnd", R1),
            ("R", "R2", "o", "n", R2), ("C", "Cf", "o", "n", Cf),
            ("I", "IRs", "src", "x", 0.0), ("I", "IR1", "n", "gnd", 0.0),
            ("I", "IR2", "o", "n", 0.0), ("I", "INP", "gnd", "p", 0.0),
            ("I", "INN", "gnd", "n", 0.0)]


def test_non_inverting_amplifier_with_cf_against_a_numpy_nodal_solve():
    text = NONINV.replace("port out", "capacitor Cf between o and n = 1 nF\nport out")
    text = text.replace("resistor Rs between src and p", "resistor Rs between src and p")
    rec = run(text)
    contrib = rec.results[0].extra["noise"]["contributions"]
    f = sympy.Symbol("f")
    nominal = rec.circuit.nominal_values()
    nodes = ["src", "x", "p", "n", "o", "gnd"]
    els = _noninv_elements((1e3, 1e3, 9e3, 1e-9))
    kT4 = 4 * K * T25
    # each source alone: (its density, the injected source, its value)
    alone = {"Rs": (kT4 / 1e3, "IRs"), "R1": (kT4 / 1e3, "IR1"), "R2": (kT4 / 9e3, "IR2"),
             "U1.en": ((4e-9) ** 2, "EN"), "U1.in+": ((2e-12) ** 2, "INP"),
             "U1.in-": ((2e-12) ** 2, "INN")}
    rnd = random.Random(3)
    for _ in range(5):
        fr = 10 ** rnd.uniform(0, 6)
        for name, (dens, src) in alone.items():
            v = nodal_solve(nodes, els, fr, {src: 1.0})
            want = dens * abs(v["o"]) ** 2
            expr = contrib[name]["density"]["expr"].xreplace(nominal)
            got = float(expr.subs(f, fr))
            assert got == pytest.approx(want, rel=1e-9), (name, fr)


def test_finite_gain_opamp_en_with_rin():
    # follower with finite gain A and input resistance Ri (rout none): en sees the same
    # loop as a signal at +: Vout/en = A/(1 + A) (from memory: follower with gain A),
    # independent of Ri since both inputs move together.
    text = ("voltage source Vin between p and gnd = 0 V\n"
            "opamp U1 inputs p, o output o gain A rin Ri noise 10 nV/rtHz\n"
            "nominal A = 1000\nnominal Ri = 1 Mohm\nport out between o and gnd\n"
            "find noise at out from 0 Hz to 100 Hz\n")
    n, _ = noise_of(text)
    assert n["rms"] == pytest.approx(10e-9 * 1000 / 1001 * 10, rel=1e-12)


# ------------------------------------------------------------------ band integrals vs scipy
def _ladder(rnd):
    R1, R2 = (10 ** rnd.uniform(2, 5) for _ in range(2))
    C1, C2 = (10 ** rnd.uniform(-10, -7) for _ in range(2))
    return R1, R2, C1, C2


def test_band_integral_against_scipy_quad_on_random_rc_ladders():
    from scipy.integrate import quad
    rnd = random.Random(11)
    for _ in range(4):
        R1, R2, C1, C2 = _ladder(rnd)
        # exact decimal values in the sheet (3 significant digits), the same in numpy
        R1, R2, C1, C2 = (float(f"{x:.3g}") for x in (R1, R2, C1, C2))
        F1 = float(f"{10 ** rnd.uniform(0, 2):.3g}")
        F2 = float(f"{10 ** rnd.uniform(4, 6):.3g}")
        text = (f"voltage source V between a and gnd = 0 V\n"
                f"resistor R1 between a and m = {R1!r}\ncapacitor C1 between m and gnd = {C1!r}\n"
                f"resistor R2 between m and out = {R2!r}\n"
                f"capacitor C2 between out and gnd = {C2!r}\nport p between out and gnd\n"
                f"find noise at p from {F1!r} to {F2!r}\n")
        n, _ = noise_of(text)
        nodes = ["a", "m", "out", "gnd"]
        els = [("V", "V", "a", "gnd", 0.0), ("R", "R1", "a", "m", R1), ("C", "C1", "m", "gnd", C1),
               ("R", "R2", "m", "out", R2), ("C", "C2", "out", "gnd", C2),
               ("I", "I1", "a", "m", 0.0), ("I", "I2", "m", "out", 0.0)]
        kT4 = 4 * K * T25

        def density(fr):
            v1 = nodal_solve(nodes, els, fr, {"I1": 1.0})["out"]
            v2 = nodal_solve(nodes, els, fr, {"I2": 1.0})["out"]
            return kT4 / R1 * abs(v1) ** 2 + kT4 / R2 * abs(v2) ** 2
        # integrate on a log scale: ∫ S(f) df = ∫ S(e^u) e^u du
        ms, err = quad(lambda u: density(math.exp(u)) * math.exp(u), math.log(F1),
                       math.log(F2), epsrel=1e-11, limit=200)
        assert n["mean_square"]["value"] == pytest.approx(ms, rel=1e-8)
        ms_n = n["mean_square"]
        assert ms_n["low"] * (1 - 1e-14) <= ms_n["value"] <= ms_n["high"] * (1 + 1e-14)


def test_ball_quadrature_bound_when_no_closed_form():
    # a fourth-order |H|^2 denominator beyond MAX_CLOSED: only the proved enclosure is given
    from flint import fmpq_poly
    P = fmpq_poly([1])
    Q = fmpq_poly([1, 0, 3, 0, 3, 0, 1]) * fmpq_poly([1, 0, 1])     # (1+w²)^3 (1+w²)
    bi = bands.band_integral(P, Q, Fraction(0), Fraction(1))
    # ∫_0^{2π} dw/(1+w²)^4 / (2π); scipy for the value (independent)
    from scipy.integrate import quad
    ref = quad(lambda w: 1 / (1 + w * w) ** 4, 0, 2 * math.pi, epsabs=1e-14)[0] / (2 * math.pi)
    assert float(bi.lo) <= ref + 1e-13 and ref - 1e-13 <= float(bi.hi)
    assert bi.method == "ball quadrature" and bi.error_bound < Fraction(1, 10 ** 10)


# ------------------------------------------------------------------ JSON and bad input
def test_json_shape_as_in_sheet_md_section_5(tmp_path, capsys):
    path = tmp_path / "d.eqv"
    path.write_text(NONINV, encoding="utf-8")
    assert main(["record", str(path), "--format", "json"]) == 0
    d = json.loads(capsys.readouterr().out)
    n = d["results"][0]["noise"]
    assert n["density"]["unit"] == "V^2/Hz"
    assert isinstance(n["density"]["expr"], str) and n["band"] == [1.0, 1000.0]
    assert isinstance(n["rms"], float)
    assert all(set(c) >= {"rms", "share"} for c in n["contributions"].values())
    steps = d["results"][0]["steps"]
    assert steps and all(s["verified"] for s in steps)


BAD = [
    ("find noise at p from 10 kHz to 10 Hz", "from low to high"),
    ("find noise at p from 1 kHz to 1 kHz", "from low to high"),
    ("find noise at nope from 1 Hz to 1 kHz", "unknown port"),
]


@pytest.mark.parametrize("line, words", BAD)
def test_bad_requests_are_located_errors(tmp_path, capsys, line, words):
    base = DIVIDER.rsplit("find", 1)[0]
    path = tmp_path / "b.eqv"
    path.write_text(base + line + "\n", encoding="utf-8")
    capsys.readouterr()
    assert main(["record", str(path)]) == 2
    err = capsys.readouterr().err
    assert err.startswith(f"{path}:5:") and words in err and "Traceback" not in err


def test_general_impedance_is_refused_unless_noiseless(tmp_path, capsys):
    text = ("voltage source V between a and gnd = 1 V\nresistor R1 between a and out = 1k\n"
            "impedance Z1 between out and gnd\nport p between out and gnd\n"
            "find noise at p from 1 Hz to 1 kHz\n")
    path = tmp_path / "z.eqv"
    path.write_text(text, encoding="utf-8")
    capsys.readouterr()
    assert main(["record", str(path)]) == 2
    err = capsys.readouterr().err
    assert err.startswith(f"{path}:3:1: error: find noise: impedance 'Z1' has no noise model")
    # marked noiseless it is accepted; R1's noise alone then reaches the port through Z1
    path.write_text(text.replace("between out and gnd\nport", "between out and gnd "
                                 "noiseless\nport"), encoding="utf-8")
    assert main(["record", str(path), "--format", "json"]) == 0
    n = json.loads(capsys.readouterr().out)["results"][0]["noise"]
    assert set(n["contributions"]) == {"R1"} and n["rms"] is None   # Z1 has no value


def test_pole_in_the_band_is_a_located_error(tmp_path, capsys):
    # an integrator: R into an ideal op-amp with C feedback: the density ~ 1/f^2 at 0 Hz
    text = ("voltage source V between a and gnd = 0 V\nresistor R1 between a and n = 1k\n"
            "opamp U1 inputs gnd, n output o\ncapacitor C1 between o and n = 1 uF\n"
            "port p between o and gnd\nfind noise at p from 0 Hz to 1 kHz\n")
    path = tmp_path / "i.eqv"
    path.write_text(text, encoding="utf-8")
    capsys.readouterr()
    assert main(["record", str(path)]) == 2
    err = capsys.readouterr().err
    assert err.startswith(f"{path}:6:") and "unbounded" in err
    path.write_text(text.replace("from 0 Hz", "from 1 Hz"), encoding="utf-8")
    assert main(["record", str(path), "--format", "json"]) == 0
    n = json.loads(capsys.readouterr().out)["results"][0]["noise"]
    # 4kTR/(2πfRC)^2 integrated from F1 to F2: 4kTR/(2πRC)^2·(1/F1 − 1/F2) (by hand)
    R, C = 1e3, 1e-6
    ms = 4 * K * T25 * R / (2 * math.pi * R * C) ** 2 * (1 / 1 - 1 / 1e3)
    assert n["rms"] == pytest.approx(math.sqrt(ms), rel=1e-12)


# ------------------------------------------------------------------ the checks can fail
def test_checks_reject_a_wrong_transfer_and_a_wrong_density():
    """Mutations: a wrong |H|^2, a wrong total density and a wrong H must not verify."""
    from derive.analyses.run import Context, Options
    from derive.derivation import noise_steps
    from derive.derivation.nodal_steps import random_solve_check
    from derive.forms import noise as nforms
    text = NONINV.replace("port out", "capacitor Cf between o and n = 1 nF\nport out")
    c = derive.circuit_of(text, "m.eqv")
    ctx = Context(c, Options())
    req = c.requests[0]
    model = nforms.contributions(ctx, req)
    nodal = noise_steps.nodal_of(ctx)
    plus, minus = ctx.port(req.port)
    form = nodal.v(plus) - nodal.v(minus)
    con = model.contributions[0]
    vec = noise_steps.source_vector(nodal, ctx, con.source)
    ok, _ = noise_steps.jw_check(nodal, form, [[(1, vec)]], [con.mag2])[0]
    assert ok
    bad, _ = noise_steps.jw_check(nodal, form, [[(1, vec)]], [con.mag2 * sympy.Rational(10001, 10000)])[0]
    assert not bad
    f = sympy.Symbol("f")
    shifted = con.mag2.xreplace({f: f * sympy.Rational(101, 100)})
    assert not noise_steps.jw_check(nodal, form, [[(1, vec)]], [shifted])[0][0]
    assert random_solve_check(nodal, form, vec, con.H)[0]
    assert not random_solve_check(nodal, form, vec, -con.H * 2)[0]
    # the en vector of another op-amp input is not this source's vector
    en = next(x for x in model.contributions if x.source.role == "en")
    wrong = nodal.test_vector(en.source.nodes[0], "gnd")
    assert not random_solve_check(nodal, form, wrong, en.H)[0]


def test_input_referred_noise_of_the_non_inverting_amplifier():
    # with `find gain from Vin to out` on the same port: S_in = S_out/G², G = 1 + R2/R1 = 10
    # (non-inverting gain, from memory); the input-referred density of Rs is 4kTRs itself
    n, rec = noise_of(NONINV + "find gain from Vin to out\n")
    ir = n["input_referred"]["Vin"]
    assert ir["unit"] == "V" and ir["rms"] == pytest.approx(n["rms"] / 10, rel=1e-12)
    expr = ir["density"]["expr"].xreplace(rec.circuit.nominal_values())
    en, inn, Rs, R1, R2 = 4e-9, 2e-12, 1e3, 1e3, 9e3
    want = en ** 2 + inn ** 2 * Rs ** 2 + 4 * K * T25 * Rs + (
        inn ** 2 * R2 ** 2 + 4 * K * T25 * (R1 * (R2 / R1) ** 2 + R2)) / 100
    assert float(expr) == pytest.approx(want, rel=1e-12)


def test_notebook_summary_and_markdown_record_show_the_rms():
    rec = run(DIVIDER)
    rms = math.sqrt(4 * K * T25 * 8e3 * (10e3 - 10))          # 4kT(R1||R2)·band, as above
    from derive.sheet.units import format_eng, format_value
    md = rec.results[0]._repr_markdown_()
    assert f"output noise {format_value(rms, 'V')} rms" in md
    assert f"output noise: {format_eng(rms, 'V', digits=4)} rms" in rec.to_markdown()
