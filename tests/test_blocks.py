"""Blocks and instances: qualified names, `with` mappings, nesting."""
from __future__ import annotations

import sympy

from helpers import run, same, sym

DIV = """
block divider (hi, mid, lo)
  resistor Rt between hi and mid
  resistor Rb between mid and lo
end
"""


def test_qualified_names_and_mappings():
    rec = run(DIV + """voltage source V between top and gnd
use divider div1 (top, tap, gnd)
use divider div2 (top, tap2, gnd) with Rt = R1, Rb = R2
port a between tap and gnd
port b between tap2 and gnd
find vth at a
find vth at b
""")
    V, R1, R2 = sym("V R1 R2")
    t, b = sympy.Symbol("div1_Rt"), sympy.Symbol("div1_Rb")
    assert same(rec.results[0].quantities["vth"].expr, V * b / (t + b))
    assert same(rec.results[1].quantities["vth"].expr, V * R2 / (R1 + R2))
    assert set(rec.circuit.symbols) >= {"div1_Rt", "div1_Rb", "R1", "R2", "V"}
    assert rec.circuit.symbols["div1_Rt"].display == "div1.Rt"


def test_nested_blocks_and_through_qualified():
    rec = run(DIV + """block pair (a, m, b)
  use divider d (a, m, b)
  resistor Rx between a and m
end
voltage source V between top and gnd
use pair p1 (top, tap, gnd)
port o between tap and gnd
find vth at o
find current through p1.d.Rt
""")
    V = sympy.Symbol("V")
    rt, rb, rx = sympy.symbols("p1_d_Rt p1_d_Rb p1_Rx")
    top = rt * rx / (rt + rx)
    assert same(rec.results[0].quantities["vth"].expr, V * rb / (top + rb))
    assert same(rec.results[1].quantities["current"].expr, V / (top + rb) * rx / (rt + rx))


def test_nominal_values_flow_into_expressions():
    rec = run("""nominal R = 10 kohm ±1%
voltage source V between a and gnd = 5 V
resistor R1 between a and b = R
resistor R2 between b and gnd = 3*R
port o between b and gnd
find thevenin at o
""")
    q = rec.results[0].quantities
    R = sympy.Symbol("R")
    assert same(q["rth"].expr, 3 * R / 4)
    assert abs(q["rth"].value - 7500) < 1e-9
    assert abs(q["vth"].value - 3.75) < 1e-12
    assert float(rec.circuit.symbols["R"].tolerance) == 0.01


def test_numeric_statement_and_symbolic_option():
    text = """voltage source V between a and gnd = 5 V
resistor R1 between a and b = 1 kohm
resistor R2 between b and gnd = 3 kohm
numeric R2
port o between b and gnd
find vth at o
"""
    R1, V = sym("R1 V")
    q = run(text).results[0].quantities["vth"]
    assert same(q.expr, 3000 * V / (R1 + 3000))
    q2 = run(text, symbolic=["R2"]).results[0].quantities["vth"]
    R2 = sympy.Symbol("R2")
    assert same(q2.expr, 5 * R2 / (1000 + R2))
    assert abs(q2.value - 3.75) < 1e-12
