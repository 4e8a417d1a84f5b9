"""Classical results of network theory, derived by derive and compared to their closed forms."""
from __future__ import annotations

import itertools

import sympy

from helpers import closed, quantity, run, same, sym

R = sympy.Symbol("R")


def cube_sheet(a, b):
    # vertices of a cube as 3-bit numbers; edges join vertices differing in one bit
    lines = ["nominal R = 1 kohm"]
    k = 0
    for u in range(8):
        for bit in (1, 2, 4):
            v = u ^ bit
            if u < v:
                k += 1
                lines.append(f"resistor R{k} between v{u} and v{v} = R")
    lines += ["ground v0", f"port p between v{a} and v{b}", "find resistance at p"]
    return "\n".join(lines)


def test_cube_body_face_edge():
    # The 12-resistor cube: body diagonal 5R/6, face diagonal 3R/4, edge 7R/12
    # (classical result, e.g. any circuits textbook problem set; from memory)
    for b, want in ((7, 5 * R / 6), (3, 3 * R / 4), (1, 7 * R / 12)):
        q = quantity(cube_sheet(0, b), "resistance")
        assert same(closed(q), want), (b, q.expr)
        assert abs(q.value - float(want.subs(R, 1000))) < 1e-9


BRIDGE = """
voltage source V between top and gnd = 10 V
resistor Ra between top and left = 1 kohm
resistor Rb between left and gnd = 2 kohm
resistor Rc between top and right = 3 kohm
resistor Rg between right and gnd = 4 kohm
port out between left and right
find thevenin at out
find norton at out
"""


def test_wheatstone_thevenin_pair():
    # Wheatstone bridge: vth = V*(Rb/(Ra+Rb) - Rg/(Rc+Rg)), rth = Ra||Rb + Rc||Rg
    # (common practice, no source)
    V, Ra, Rb, Rc, Rg = sym("V Ra Rb Rc Rg")
    rec = run(BRIDGE)
    q = rec.results[0].quantities
    assert same(q["vth"].expr, V * (Rb / (Ra + Rb) - Rg / (Rc + Rg)))
    assert same(q["rth"].expr, Ra * Rb / (Ra + Rb) + Rc * Rg / (Rc + Rg))
    assert abs(q["vth"].value - 10 * (2 / 3 - 4 / 7)) < 1e-12
    n = rec.results[1].quantities
    assert same(n["isc"].expr * q["rth"].expr, q["vth"].expr)
    assert same(n["rn"].expr, q["rth"].expr)


def r2r_sheet(bits):
    # R-2R ladder DAC: bit k drives a 2R leg from source Vk; the MSB is next to the output
    lines = ["nominal R = 10 kohm"]
    lines.append("resistor Rterm between n0 and gnd = 2*R")
    for k in range(bits):
        lines.append(f"voltage source V{k} between s{k} and gnd")
        lines.append(f"resistor Rleg{k} between s{k} and n{k} = 2*R")
        if k + 1 < bits:
            lines.append(f"resistor Rser{k} between n{k} and n{k+1} = R")
    lines.append(f"port out between n{bits-1} and gnd")
    lines.append("find thevenin at out")
    return "\n".join(lines)


def test_r2r_ladder_output_resistance_and_binary_weights():
    # R-2R ladder: output resistance R, and bit k weighs 2^k / 2^n of its source
    # (standard DAC practice; common practice, no source)
    bits = 5
    q = run(r2r_sheet(bits)).results[0].quantities
    assert same(closed(q["rth"]), R)
    vth = closed(q["vth"])
    for k in range(bits):
        coef = sympy.diff(vth, sympy.Symbol(f"V{k}"))
        assert same(coef, sympy.Rational(2 ** k, 2 ** bits)), (k, coef)


def ladder_sheet(n):
    lines = ["nominal R = 1 kohm"]
    for i in range(n):
        lines.append(f"resistor Rs{i} between n{i} and n{i+1} = R")
        lines.append(f"resistor Rp{i} between n{i+1} and gnd = R")
    lines += ["port inp between n0 and gnd", "find resistance at inp"]
    return "\n".join(lines)


def test_finite_ladder_tends_to_golden_ratio():
    # Infinite R-R ladder input resistance R(1+sqrt 5)/2 (classical result; from memory)
    golden = (1 + 5 ** 0.5) / 2 * 1000
    errs = [abs(quantity(ladder_sheet(n), "resistance").value - golden) for n in (2, 4, 8, 12)]
    assert all(a > b for a, b in zip(errs, errs[1:]))
    assert errs[-1] < 1e-6 * golden
    # exact finite value: ratio of Fibonacci numbers, R*F(2n+1)/F(2n) (from memory)
    q = quantity(ladder_sheet(4), "resistance")
    assert same(closed(q), R * sympy.fibonacci(9) / sympy.fibonacci(8))


def test_inverting_and_noninverting_ideal():
    # ideal op-amp: inverting gain -Rf/Ri, non-inverting 1 + Rf/Rg (common practice, no source)
    Rf, Ri, Rg = sym("Rf Ri Rg")
    inv = quantity("""voltage source Vin between i and gnd
resistor Ri between i and n
resistor Rf between n and out
opamp U1 inputs gnd, n output out
port o between out and gnd
find gain from Vin to o""", "gain")
    assert same(inv.expr, -Rf / Ri)
    non = quantity("""voltage source Vin between i and gnd
opamp U1 inputs i, n output out
resistor Rf between out and n
resistor Rg between n and gnd
port o between out and gnd
find gain from Vin to o""", "gain")
    assert same(non.expr, 1 + Rf / Rg)


def test_noninverting_finite_gain():
    # finite open-loop gain A: closed-loop A/(1 + A*beta), beta = Rg/(Rf+Rg)
    # (negative-feedback formula; common practice, no source)
    A, Rf, Rg = sym("A Rf Rg")
    q = quantity("""voltage source Vin between i and gnd
opamp U1 inputs i, n output out gain A
resistor Rf between out and n
resistor Rg between n and gnd
port o between out and gnd
find gain from Vin to o""", "gain")
    beta = Rg / (Rf + Rg)
    assert same(q.expr, A / (1 + A * beta))


def test_source_transformation_equivalence():
    # V in series with R equals V/R in parallel with R, seen from the terminals
    # (source transformation; common practice, no source)
    a = run("""voltage source V between x and gnd
resistor R between x and t
resistor RL between t and gnd
port p between t and gnd
find thevenin at p""").results[0].quantities
    b = run("""current source I from gnd to t = V/R
resistor R between t and gnd
resistor RL between t and gnd
nominal V = 1 V
port p between t and gnd
find thevenin at p""").results[0].quantities
    assert same(a["vth"].expr, b["vth"].expr)
    assert same(a["rth"].expr, b["rth"].expr)


def test_three_parallel_resistors():
    # 1/R = 1/R1 + 1/R2 + 1/R3 (common practice, no source)
    R1, R2, R3 = sym("R1 R2 R3")
    q = quantity("""resistor R1 between a and gnd
resistor R2 between a and gnd
resistor R3 between a and gnd
port p between a and gnd
find resistance at p""", "resistance")
    assert same(q.expr, 1 / (1 / R1 + 1 / R2 + 1 / R3))


def test_parallel_operator_precedence_in_values():
    # `2*R||R` is (2R)||R = 2R/3 (sheet language precedence)
    q = quantity("""resistor Rx between a and gnd = 2*R||R
port p between a and gnd
find resistance at p""", "resistance")
    assert same(q.expr, 2 * R / 3)
