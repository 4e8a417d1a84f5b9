"""Frequency-domain annotation of s-dependent results."""
import json
import math

import numpy as np
import pytest
import scipy.signal
import sympy

import derive
from derive.export import plots
from derive.analyses import frequency

sym = sympy.Symbol
s = sym("s")


def results(text):
    return derive.derive_text(text).results


SALLEN_KEY = """
voltage source Vin between in and gnd = 1 V
resistor R1 between in and a = {R1}
resistor R2 between a and b = {R2}
capacitor C1 between a and out = {C1}
capacitor C2 between b and gnd = {C2}
opamp U1 inputs b, out output out
port o between out and gnd
port i between in and gnd
find gain from Vin to o
find model from i to o
"""


def _sk(R1="10 kohm", R2="10 kohm", C1="22 nF", C2="10 nF"):
    return results(SALLEN_KEY.format(R1=R1, R2=R2, C1=C1, C2=C2))


def test_sallen_key_w0_and_q():
    r = _sk()[0]
    f = frequency.rational_form(r.quantities["gain"].expr)
    R1, R2, C1, C2 = (sym(n) for n in ("R1", "R2", "C1", "C2"))
    # unity-gain Sallen-Key low pass (textbook): w0 = 1/sqrt(R1 R2 C1 C2),
    # Q = sqrt(R1 R2 C1 C2)/(C2 (R1 + R2)) with C1 the feedback capacitor
    assert sympy.simplify(f["w0"] - 1 / sympy.sqrt(R1 * R2 * C1 * C2)) == 0
    assert sympy.simplify(f["Q"] - sympy.sqrt(R1 * R2 * C1 * C2) / (C2 * (R1 + R2))) == 0
    assert f["dc_gain"] == 1
    d = r.extra["frequency"]["gain"]
    assert d["w0_value"] == pytest.approx(1 / math.sqrt(1e4 * 1e4 * 22e-9 * 10e-9))
    # normalised sensitivities: every element -1/2 for w0 (from the closed form)
    for x in ("R1", "R2", "C1", "C2"):
        assert d["sensitivity"]["w0"][x]["value"] == pytest.approx(-0.5)
    assert d["sensitivity"]["Q"]["C1"]["normalized"] == sympy.Rational(1, 2)
    assert d["sensitivity"]["Q"]["R1"]["value"] == pytest.approx(0.0)     # equal resistors
    assert all(st.verified for st in r.steps)


def test_sallen_key_butterworth_matches_scipy():
    # equal resistors and C1 = 2*C2 give Q = 1/sqrt(2) (Butterworth)
    r = _sk(R1="10 kohm", R2="10 kohm", C1="20 nF", C2="10 nF")[0]
    d = r.extra["frequency"]["gain"]
    assert d["Q_value"] == pytest.approx(1 / math.sqrt(2))
    w0 = d["w0_value"]
    # reference: scipy.signal.butter, analog second-order Butterworth at w0
    b, a = scipy.signal.butter(2, w0, analog=True)
    nominal = derive.derive_text(SALLEN_KEY.format(R1="10 kohm", R2="10 kohm", C1="20 nF",
                                                   C2="10 nF")).circuit.nominal_values()
    f = frequency.rational_form(r.quantities["gain"].expr)
    den = [float(c.xreplace(nominal)) for c in f["denominator"]]      # ascending, den[0] = 1
    num = [float(c.xreplace(nominal)) for c in f["numerator"]]
    # scale scipy's monic polynomial to a constant term of 1
    np.testing.assert_allclose(list(reversed(a / a[-1])), den, rtol=1e-12)
    np.testing.assert_allclose(list(reversed(b / a[-1])), num, rtol=1e-12, atol=1e-30)
    _z, p, _k = scipy.signal.butter(2, w0, analog=True, output="zpk")
    ours = [complex(*z) for z in d["poles_value"]]
    np.testing.assert_allclose(sorted(p, key=lambda z: z.imag), sorted(ours, key=lambda z: z.imag),
                               rtol=1e-9)


def test_rc_low_pass_corner_and_bode():
    text = """
voltage source V between in and gnd = 1 V
resistor R between in and out = 1 kohm
capacitor C between out and gnd = 100 nF
port o between out and gnd
find gain from V to o
find impedance at o
"""
    rs = results(text)
    d = rs[0].extra["frequency"]["gain"]
    assert d["w_corner"] == 1 / (sym("C") * sym("R"))
    assert d["f_corner_value"] == pytest.approx(1 / (2 * math.pi * 1e3 * 100e-9))
    assert d["poles_value"] == [[pytest.approx(-1e4), 0.0]]
    assert d["sensitivity"]["w_corner"]["R"]["value"] == pytest.approx(-1)
    # at the corner a first-order low pass is 3.01 dB down at -45 degrees (common practice,
    # no source)
    fc = d["f_corner_value"]
    num, den = [1.0], [1.0, 1e-4]
    f, mag, ph = frequency.bode_data(num, den, points=1, f_range=(fc, fc))
    assert mag[0] == pytest.approx(-10 * math.log10(2))
    assert ph[0] == pytest.approx(-45)
    # the impedance R || 1/(sC) has the same corner
    dz = rs[1].extra["frequency"]["impedance"]
    assert dz["dc_gain"] == sym("R")
    assert dz["w_corner_value"] == pytest.approx(1e4)


def test_figures_drawn_and_json_clean(tmp_path):
    rec = derive.derive_text(SALLEN_KEY.format(R1="10 kohm", R2="10 kohm", C1="22 nF",
                                               C2="10 nF"))
    figs = rec.results[0].extra["figures"]
    assert [f.name for f in figs] == ["bode_find_gain_from_Vin_to_o_gain"]
    path = tmp_path / "bode.png"
    plots.draw(figs[0], str(path))
    assert path.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    data = json.loads(rec.to_json())
    fr = data["results"][0]["frequency"]["gain"]
    assert fr["denominator"] == ["1", "C2*(R1 + R2)", "C1*C2*R1*R2"]
    # the model of the same section: rin has a pole at the origin (C2 to ground in series)
    m = data["results"][1]
    assert m["frequency"]["rin"]["s_power"] == -1
    assert m["frequency"]["rin"]["dc_gain"] is None


def test_third_order_numeric_poles():
    # three equal RC sections (R = 1 ohm, C = 1 F): denominator s^3 + 5 s^2 + 6 s + 1
    # (from memory); poles compared with numpy.roots
    text = """
voltage source V between n0 and gnd = 1 V
resistor R1 between n0 and n1 = 1 ohm
capacitor C1 between n1 and gnd = 1 F
resistor R2 between n1 and n2 = 1 ohm
capacitor C2 between n2 and gnd = 1 F
resistor R3 between n2 and n3 = 1 ohm
capacitor C3 between n3 and gnd = 1 F
port o between n3 and gnd
find gain from V to o
"""
    d = results(text)[0].extra["frequency"]["gain"]
    assert d["poles"] is None and d["w0"] is None
    ours = sorted(complex(*z).real for z in d["poles_value"])
    ref = sorted(np.roots([1, 5, 6, 1]).real)
    np.testing.assert_allclose(ours, ref, rtol=1e-9)


def test_rational_form_high_pass_and_roots():
    R, C = sym("R"), sym("C")
    f = frequency.rational_form(s * R * C / (1 + s * R * C))
    assert f["s_power"] == 1 and f["dc_gain"] == 0
    assert f["zeros"] == [0]
    assert f["poles"] == [-1 / (C * R)]
    L = sym("L")
    g = frequency.rational_form(1 / (1 + s**2 * L * C))       # lossless: Q infinite
    assert g["Q"] is None and sympy.simplify(g["w0"] - 1 / sympy.sqrt(L * C)) == 0


def test_w0_q_sensitivities_against_sympy_derivatives():
    """The flint route (S of w0, Q from S of the reduced denominator's coefficients) against
    sympy's own derivative of the displayed w0 and Q, and the unity-gain Sallen-Key closed
    forms (common practice, no source): S(w0) = -1/2 for every part; S(Q) = +1/2 for C1,
    -1/2 for C2, (R2 - R1)/(2 (R1 + R2)) for R1."""
    r = _sk()
    fr = r[0].extra["frequency"]["gain"]
    R1, R2, C1, C2 = sympy.symbols("R1 R2 C1 C2")
    w0 = 1 / sympy.sqrt(R1 * R2 * C1 * C2)
    Q = sympy.sqrt(R1 * R2 * C1 * C2) / (C2 * (R1 + R2))
    for key, f in (("w0", w0), ("Q", Q)):
        got = fr["sensitivity"][key]
        for x in (R1, R2, C1, C2):
            want = sympy.simplify(x / f * sympy.diff(f, x))
            assert sympy.simplify(got[str(x)]["normalized"] - want) == 0, (key, x)
            nominal = {R1: 10e3, R2: 10e3, C1: 22e-9, C2: 10e-9}
            assert got[str(x)]["value"] == pytest.approx(float(want.subs(nominal)), abs=1e-12)
    assert sympy.simplify(fr["sensitivity"]["Q"]["R1"]["normalized"]
                          - (R2 - R1) / (2 * (R1 + R2))) == 0


def test_minus_3db_point_and_decade_table_of_a_sallen_key():
    """-3 dB point of a second-order low-pass against the closed form (common practice, no
    source): f3dB = f0*sqrt(1 - 1/(2Q^2) + sqrt((1 - 1/(2Q^2))^2 + 1)); the decade table
    against scipy.signal.freqs (an independent evaluation of the same H(s))."""
    r = _sk()
    d = r[0].extra["frequency"]["gain"]
    R1 = R2 = 1e4
    C1, C2 = 22e-9, 10e-9
    f0 = 1 / (2 * math.pi * math.sqrt(R1 * R2 * C1 * C2))
    Q = math.sqrt(R1 * R2 * C1 * C2) / (C2 * (R1 + R2))
    a = 1 - 1 / (2 * Q * Q)
    want = f0 * math.sqrt(a + math.sqrt(a * a + 1))
    (got,) = d["minus_3dB_values"]
    assert got == pytest.approx(want, rel=1e-9)
    table = [s for s in r[0].steps if s.kind == "frequency" and s.table][0].table
    b, a_ = [1.0], [R1 * R2 * C1 * C2, C2 * (R1 + R2), 1.0]      # descending powers of s
    for f, mag, ph in table[1:]:
        w, h = scipy.signal.freqs(b, a_, worN=[2 * math.pi * float(f)])
        assert float(mag) == pytest.approx(20 * math.log10(abs(h[0])), abs=0.006)
        assert float(ph) == pytest.approx(math.degrees(np.angle(h[0])), abs=0.06)


# ------------------------------------------------------------------ cascades of sections
def _sk_chain(n, values=None):
    """n unity-gain Sallen-Key low-pass stages in cascade (op-amp followers); ``values``
    maps element name -> sheet value text (symbolic where absent)."""
    values = values or {}
    v = lambda name: f" = {values[name]}" if name in values else ""
    lines = ["voltage source Vin between n0 and gnd = 1 V"]
    for k in range(1, n + 1):
        lines += [f"resistor R{k}a between n{k-1} and a{k}{v(f'R{k}a')}",
                  f"resistor R{k}b between a{k} and b{k}{v(f'R{k}b')}",
                  f"capacitor C{k}a between a{k} and n{k}{v(f'C{k}a')}",
                  f"capacitor C{k}b between b{k} and gnd{v(f'C{k}b')}",
                  f"opamp U{k} inputs b{k}, n{k} output n{k}"]
    lines += [f"port out between n{n} and gnd", "find gain from Vin to out"]
    return "\n".join(lines) + "\n"


def _sk_stage(k):
    """Unity-gain Sallen-Key low pass (textbook closed form, C{k}a the feedback capacitor):
    1/(1 + C2 (R1 + R2) s + R1 R2 C1 C2 s^2)."""
    R1, R2, C1, C2 = sympy.symbols(f"R{k}a R{k}b C{k}a C{k}b")
    return 1 / (1 + C2 * (R1 + R2) * s + R1 * R2 * C1 * C2 * s**2), (R1, R2, C1, C2)


def _mna_gain(n, vals, w):
    """A separately written numpy modified nodal solve of the Sallen-Key chain at s = jw:
    node voltages, the source current and one output current per ideal op-amp (v+ = v-)."""
    nodes = ["n0"] + [f"{x}{k}" for k in range(1, n + 1) for x in ("a", "b", "n")]
    idx = {x: i for i, x in enumerate(nodes)}
    m = len(nodes) + 1 + n
    A = np.zeros((m, m), dtype=complex)
    rhs = np.zeros(m, dtype=complex)
    sv = 1j * w

    def admit(a, b, y):
        for p, q in ((a, b), (b, a)):
            if p == "gnd":
                continue
            A[idx[p], idx[p]] += y
            if q != "gnd":
                A[idx[p], idx[q]] -= y
    for k in range(1, n + 1):
        admit(f"n{k-1}", f"a{k}", 1 / vals[f"R{k}a"])
        admit(f"a{k}", f"b{k}", 1 / vals[f"R{k}b"])
        admit(f"a{k}", f"n{k}", sv * vals[f"C{k}a"])
        admit(f"b{k}", "gnd", sv * vals[f"C{k}b"])
    src = len(nodes)
    A[idx["n0"], src] += 1            # the source's current into n0
    A[src, idx["n0"]] = 1
    rhs[src] = 1.0
    for k in range(1, n + 1):
        row = src + k
        A[idx[f"n{k}"], row] += 1     # the op-amp output current into n{k}
        A[row, idx[f"b{k}"]] = 1
        A[row, idx[f"n{k}"]] = -1
    x = np.linalg.solve(A, rhs)
    return x[idx[f"n{n}"]]


@pytest.mark.parametrize("n", [3, 6])
def test_sallen_key_cascade_factored_per_section(n):
    """Every section's ω0 and Q against the textbook closed forms (ω0 = 1/sqrt(R1 R2 C1
    C2), Q = sqrt(R1 R2 C1 C2)/(C2 (R1 + R2))); the factored H against the product of the
    textbook stages at exact rational points; the step verified. n = 3 is multiplied out
    too (its coefficient lists exist), n = 6 is beyond EXPAND_LIMIT (factors only)."""
    r = results(_sk_chain(n))[0]
    d = r.extra["frequency"]["gain"]
    assert len(d["sections"]) == n
    assert (d["denominator"] is None) == (4 ** n > frequency.EXPAND_LIMIT)
    by_stage = {}
    for sec in d["sections"]:
        assert sec["order"] == 2 and sec["power"] == 1
        k = int(str(sec["w0"]).split("C")[1][0])          # C{k}a... names the stage
        by_stage[k] = sec
    assert sorted(by_stage) == list(range(1, n + 1))
    ref = sympy.Integer(1)
    for k, sec in by_stage.items():
        hk, (R1, R2, C1, C2) = _sk_stage(k)
        ref *= hk
        assert sympy.simplify(sec["w0"] - 1 / sympy.sqrt(R1 * R2 * C1 * C2)) == 0
        assert sympy.simplify(sec["Q"] - sympy.sqrt(R1 * R2 * C1 * C2) / (C2 * (R1 + R2))) == 0
        assert sec["sensitivity"]["w0"][str(R1)]["normalized"] == sympy.Rational(-1, 2)
    step = [st for st in r.steps if st.kind == "frequency" and st.equations][0]
    assert step.verified and all(e.verified_by in ("exact", "points") for e in step.equations)
    normal = step.equations[0].rhs
    rnd = __import__("random").Random(5)
    syms = sorted(ref.free_symbols, key=str)
    for _ in range(3):
        pt = {x: sympy.Rational(rnd.randint(1, 99), rnd.randint(1, 99)) for x in syms}
        want = ref.xreplace(pt)
        assert normal.xreplace(pt) == want
        assert r.quantities["gain"].expr.xreplace(pt) == want
    # the factored function equals the cancelled, multiplied-out one exactly
    from derive.solver import rational
    expr = r.quantities["gain"].expr
    f = rational.factored(expr, extra=[s])
    (g,) = rational.common([expr], extra=[s])
    assert f.expanded() == g


def test_sallen_key_cascade_matches_numpy_and_scipy():
    """Four stages with values: H(jω) from the per-section ω0 and Q (each
    1/(1 + s/(ω0 Q) + s²/ω0²)), from scipy.signal.freqs of the Bode coefficients, and from a
    numpy MNA solve written here agree; the poles against numpy.roots of the product of the
    textbook stage polynomials."""
    n = 4
    vals = {}
    text_vals = {}
    for k in range(1, n + 1):
        r1, r2, c1, c2 = 1e3 * (k + 1), 2.2e3 * k, 10e-9 * (k + 1), 4.7e-9 * k
        vals.update({f"R{k}a": r1, f"R{k}b": r2, f"C{k}a": c1, f"C{k}b": c2})
        text_vals.update({f"R{k}a": f"{(k + 1)} kohm", f"R{k}b": f"{2.2 * k:g} kohm",
                          f"C{k}a": f"{10 * (k + 1)} nF", f"C{k}b": f"{4.7 * k:g} nF"})
    r = results(_sk_chain(n, text_vals))[0]
    d = r.extra["frequency"]["gain"]
    fig = r.extra["figures"][0].data
    den = [1.0]
    for k in range(1, n + 1):
        r1, r2, c1, c2 = (vals[f"{x}{k}{y}"] for x, y in (("R", "a"), ("R", "b"),
                                                           ("C", "a"), ("C", "b")))
        den = np.polymul(den, [r1 * r2 * c1 * c2, c2 * (r1 + r2), 1.0])   # descending
    for w in (1e3, 2e4, 1e5, 7e5):
        ref = _mna_gain(n, vals, w)
        h = 1.0
        for sec in d["sections"]:
            w0, q = sec["w0_value"], sec["Q_value"]
            h /= 1 + 1j * w / (w0 * q) + (1j * w) ** 2 / w0 ** 2
        assert h == pytest.approx(ref, rel=1e-9)
        _w, hs = scipy.signal.freqs(list(reversed(fig["num"])), list(reversed(fig["den"])),
                                    worN=[w])
        assert hs[0] == pytest.approx(ref, rel=1e-9)
        _w, hp = scipy.signal.freqs([1.0], den, worN=[w])
        assert hp[0] == pytest.approx(ref, rel=1e-9)
    key = lambda z: (round(z.real, 3), round(z.imag, 3))
    ours = sorted((complex(*z) for z in d["poles_value"]), key=key)
    want = sorted(np.roots(den), key=key)
    np.testing.assert_allclose(ours, want, rtol=1e-9)


def test_integrator_chain_poles_at_the_origin():
    """n inverting integrators (ideal op-amp, R in, C feedback): each -1/(s R C) (textbook
    closed form), so H = (-1)^n / (s^n prod R_k C_k), n poles at 0, no finite zero."""
    n = 5
    lines = ["voltage source Vin between n0 and gnd = 1 V"]
    for k in range(1, n + 1):
        lines += [f"resistor R{k} between n{k-1} and m{k}",
                  f"capacitor C{k} between m{k} and n{k}",
                  f"opamp U{k} inputs gnd, m{k} output n{k}"]
    lines += [f"port out between n{n} and gnd", "find gain from Vin to out"]
    r = results("\n".join(lines) + "\n")[0]
    d = r.extra["frequency"]["gain"]
    K = sympy.Integer(-1) ** n
    for k in range(1, n + 1):
        K /= sym(f"R{k}") * sym(f"C{k}")
    assert d["s_power"] == -n and d["dc_gain"] is None
    assert sympy.simplify(d["k"] - K) == 0
    assert d["poles"] == [0] * n and d["zeros"] == []
    assert all(st.verified for st in r.steps)


def test_a_wrong_section_w0_is_not_verified():
    """Mutation: a section's ω0 off by a factor 2 fails its independent check (Taylor
    coefficients of the factor by differentiation)."""
    r = results(_sk_chain(2))[0]
    q = r.quantities["gain"]
    _d, step, _c = frequency.analyse_quantity(q, {})
    eq = [e for e in step.equations if str(e.lhs) == "omega_0,1"][0]
    eq.rhs = 2 * eq.rhs
    assert step.verify() is False
    assert eq.verified is False
