"""solve Q at P for X: exact inversion, roots, conditions, valid range, verified steps."""
import json

import numpy
import pytest
import sympy

import derive
from derive.errors import SheetError

DIVIDER = """voltage source Vref between ref and gnd = 3.3 V
resistor R1 between ref and sense = 10 kohm
resistor Rt between sense and gnd = 10 kohm
port divider between sense and gnd
solve vth at divider for Rt
"""

SERIES_PARALLEL = """nominal R = 1 kohm
resistor Ra between a and b = R
resistor Rb between b and gnd = R
resistor Rc between b and gnd = 2 kohm
port p between a and gnd
solve rth at p for R
"""

Rt, R1, Vref, vth, R, Rc, rth = sympy.symbols("Rt R1 Vref vth R Rc rth")


def solve_of(text):
    return derive.derive_text(text, "t.eqv").results[0]


def test_thermistor_divider_inverse():
    r = solve_of(DIVIDER)
    q = r.quantities["Rt"]
    # thermistor below a pull-up: Rt = R1*v/(Vref - v) (common practice, no source)
    assert sympy.cancel(q.expr - R1 * vth / (Vref - vth)) == 0
    assert q.value == pytest.approx(10000.0, rel=1e-15)
    assert q.unit == "ohm"
    assert r.extra["method"] == "linear"
    assert r.extra["measured"]["value"] == pytest.approx(1.65)
    assert "Vref - vth != 0" in r.extra["conditions"]
    (rng,) = r.extra["valid_range"]
    assert (rng["low"], rng["high"]) == ("0", "Vref")
    assert rng["high_value"] == pytest.approx(3.3)
    assert all(st.verified for st in r.steps)


def test_json_record_has_inverted_formula():
    d = json.loads(derive.derive_text(DIVIDER, "t.eqv").to_json())
    res = d["results"][0]
    assert res["request"] == "solve vth at divider for Rt"
    assert res["quantities"]["Rt"]["expr"] == "R1*vth/(Vref - vth)"
    assert "latex" in res["quantities"]["Rt"]
    assert res["roots"][0]["chosen"] is True
    assert all(s["verified"] for s in res["steps"])


def test_quadratic_roots_against_numpy():
    r = solve_of(SERIES_PARALLEL)
    roots = r.extra["roots"]
    assert r.extra["method"] == "quadratic formula"
    assert len(roots) == 2 and [x["chosen"] for x in roots] == [True, False]
    # the forward formula is R + R||Rc; R**2 + (2*Rc - rth)*R - rth*Rc = 0 at nominal values,
    # solved independently with numpy.roots (reference library: numpy)
    rth_nom = 1000 + 1000 * 2000 / 3000
    ref = sorted(numpy.roots([1.0, 2 * 2000 - rth_nom, -rth_nom * 2000]))
    chosen = r.quantities["R"].expr.xreplace({rth: sympy.Rational(5000, 3), Rc: 2000})
    other = roots[1]["expr"].xreplace({rth: sympy.Rational(5000, 3), Rc: 2000})
    assert float(chosen) == pytest.approx(ref[1], rel=1e-12)
    assert float(other) == pytest.approx(ref[0], rel=1e-12)
    assert r.quantities["R"].value == pytest.approx(1000.0)
    assert all(x["verified"] for x in roots)
    (rng,) = r.extra["valid_range"]
    assert rng["low"] == "0" and rng["high"] is None


def test_substituting_back_is_checked_exactly():
    from derive.analyses.inversion import _sub_back
    expr = Rt * Vref / (R1 + Rt)
    assert _sub_back(expr, Rt, R1 * vth / (Vref - vth), vth)[1]
    assert not _sub_back(expr, Rt, R1 * vth / (Vref + vth), vth)[1]


def test_solve_for_symbol_not_in_quantity():
    text = DIVIDER.replace("solve vth at divider for Rt", "solve rth at divider for Vref")
    with pytest.raises(SheetError) as e:
        derive.derive_text(text, "t.eqv")
    assert "does not depend on Vref" in str(e.value)
    assert e.value.line == 5


def test_solve_a_pair_is_refused():
    text = DIVIDER.replace("solve vth at", "solve thevenin at")
    with pytest.raises(SheetError) as e:
        derive.derive_text(text, "t.eqv")
    assert "vth or rth" in str(e.value)


def _mesh():
    """Every pair of five nodes joined by a resistor, four pairs twice (the size benchmark's
    mesh, benchmarks/bench_analyses_size.py)."""
    import itertools
    nodes = ["top", "n1", "n2", "n3", "gnd"]
    pairs = list(itertools.combinations(nodes, 2))
    pairs += pairs[:4]
    lines = ["voltage source V between top and gnd = 5 V"]
    for i, (a, b) in enumerate(pairs, 1):
        lines.append(f"resistor R{i} between {a} and {b} = {1 + i % 5} kohm")
    lines.append("port out between n3 and gnd")
    return "\n".join(lines) + "\n", pairs


def _mesh_vth(pairs, values, v_source=5.0):
    """vth at n3 by a numpy nodal solve written here (top driven at V, gnd the reference)."""
    unknown = ["n1", "n2", "n3"]
    G = numpy.zeros((3, 3))
    b = numpy.zeros(3)
    for i, (a, c) in enumerate(pairs, 1):
        g = 1.0 / values[f"R{i}"]
        for p, o in ((a, c), (c, a)):
            if p in unknown:
                k = unknown.index(p)
                G[k, k] += g
                if o in unknown:
                    G[k, unknown.index(o)] -= g
                elif o == "top":
                    b[k] += g * v_source
    return numpy.linalg.solve(G, b)[2]


def test_mesh_inverse_in_flint_against_a_nodal_solve():
    text, pairs = _mesh()
    r = solve_of(text + "solve vth at out for R5\n")
    q = r.quantities["R5"]
    assert r.extra["method"] == "linear" and all(st.verified for st in r.steps)
    values = {f"R{i}": 1000.0 * (1 + i % 5) for i in range(1, 15)}
    assert q.value == pytest.approx(values["R5"], rel=1e-12)
    assert r.extra["measured"]["value"] == pytest.approx(_mesh_vth(pairs, values), rel=1e-12)
    # the formula at another resistance: measure vth by the nodal solve with R5 = 3.7 kohm
    # and invert it
    other = dict(values, R5=3700.0)
    meas = _mesh_vth(pairs, other)
    sub = {sympy.Symbol(k): sympy.Rational(int(v)) for k, v in other.items() if k != "R5"}
    sub[sympy.Symbol("V")] = 5
    f = sympy.lambdify(sympy.Symbol("vth"), q.expr.xreplace(sub))
    assert f(meas) == pytest.approx(3700.0, rel=1e-9)
    # the valid range is bounded by vth at R5 = 0 and R5 -> infinity (vth is monotone in
    # R5 here), both from the nodal solve (R5 = 0.1 mohm and 1 Tohm: near enough to the
    # limits for 1e-6, and the conductance matrix still well conditioned)
    (rng,) = r.extra["valid_range"]
    ends = sorted([_mesh_vth(pairs, dict(values, R5=1e-4)),
                   _mesh_vth(pairs, dict(values, R5=1e12))])
    assert (rng["low_value"], rng["high_value"]) == pytest.approx(ends, rel=1e-6)


def test_a_substituted_form_too_long_to_print_is_shown_with_the_root_named():
    text, _ = _mesh()
    r = solve_of(text + "solve vth at out for R5\n")
    st = [s for s in r.steps if s.text.startswith("Root 1")][0]
    assert "R5 stands for the root" in st.text
    root_eq, back = st.equations
    assert back.rhs == r.extra["measured"]["closed_form"] and back.verified
    # the small divider keeps the substituted form written out
    st = [s for s in solve_of(DIVIDER).steps if s.text.startswith("Root 1")][0]
    assert "stands for the root" not in st.text
    assert sympy.Symbol("Rt") not in st.equations[1].rhs.free_symbols
