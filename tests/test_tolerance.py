"""Tolerance analysis: worst case, RSS, extreme values against brute force, Monte Carlo."""
from __future__ import annotations

import itertools
import json
import math

import numpy as np
import pytest
import sympy

from derive.errors import SheetError
from derive.export import plots
from derive.analyses.sensitivity import Form
from derive.analyses.tolerance import derivative_sign, extremes, interval, monte_carlo
from helpers import run

BRIDGE = """
voltage source Vex between exc and gnd = 5 V ±0.2%
resistor Ra between exc and left = 350 ohm ±1%
resistor Rb between left and gnd = 330 ohm ±1%
resistor Rc between exc and right = 360 ohm ±2%
resistor Rg between right and gnd = 350.7 ohm ±1%
port out between left and right
find tolerance of vth at out
"""

# (Rn + d) || (Rn - d) = (Rn^2 - d^2)/(2 Rn): not monotone in d over a box containing d = 0.
NON_MONOTONE = """
nominal Rn = 1 kohm ±1%
nominal d = 10 ohm ±500%
resistor R1 between a and gnd = Rn + d
resistor R2 between a and gnd = Rn - d
port p between a and gnd
find tolerance of resistance at p
"""

SERIES = """
resistor R1 between a b1 = 1 kohm ±1%
resistor R2 between b1 and b2 = 2.2 kohm ±5%
resistor R3 between b2 and gnd = 470 ohm ±10%
port p between a and gnd
find tolerance of resistance at p
""".replace("between a b1", "between a and b1")


def _grid(f, ranges, n):
    axes = [np.linspace(lo, hi, n) for lo, hi in ranges]
    mesh = np.meshgrid(*axes, indexing="ij")
    v = f(*mesh)
    return float(v.min()), float(v.max())


def test_bridge_extremes_equal_brute_force_grid():
    # the unloaded bridge output is Vex*(Rb/(Ra+Rb) - Rg/(Rc+Rg)) (two voltage dividers,
    # common practice, no source); a dense grid over the box (endpoints included) is the
    # brute-force reference
    ex = run(BRIDGE).results[0].extra
    def vth(V, Ra, Rb, Rc, Rg):
        return V * (Rb / (Ra + Rb) - Rg / (Rc + Rg))
    noms = [(5, 0.002), (350, 0.01), (330, 0.01), (360, 0.02), (350.7, 0.01)]
    lo, hi = _grid(vth, [(x * (1 - t), x * (1 + t)) for x, t in noms], 9)
    assert ex["spread"]["low"] == pytest.approx(lo, rel=1e-12)
    assert ex["spread"]["high"] == pytest.approx(hi, rel=1e-12)
    assert ex["spread"]["method"].startswith("corners")
    assert ex["spread"]["nominal"] == pytest.approx(vth(5, 350, 330, 360, 350.7), rel=1e-13)
    # every resistor proven monotone; the output is affine in the excitation
    assert ex["monotone"]["Vex"] == "affine"
    assert {ex["monotone"][r] for r in ("Ra", "Rb", "Rc", "Rg")} <= {"increasing", "decreasing"}
    # first order limits bracket the nominal and are close to the true ones here
    wc = ex["worst_case_linear"]
    assert wc["low"] < ex["spread"]["nominal"] < wc["high"]
    assert wc["high"] == pytest.approx(hi, rel=0.02)


def test_non_monotone_extremes_equal_brute_force_grid():
    ex = run(NON_MONOTONE).results[0].extra
    def r(Rn, d):
        return (Rn + d) * (Rn - d) / (2 * Rn)
    lo, hi = _grid(r, [(990.0, 1010.0), (-40.0, 60.0)], 401)   # grid contains d = 0
    assert ex["spread"]["low"] == pytest.approx(lo, rel=1e-12)
    assert ex["spread"]["high"] == pytest.approx(hi, rel=1e-9)
    # the maximum is inside the box (d = 0), at Rn's upper end: 1010/2
    assert ex["spread"]["high"] == pytest.approx(505.0, rel=1e-9)
    # d alone is not monotone: the extreme in d comes from the exact real roots of dQ/dd
    assert "exact in d" in ex["spread"]["method"]
    assert "1 critical point(s) inside" in ex["spread"]["method"]
    assert ex["monotone"] == {"Rn": "increasing", "d": "not monotone"}   # a critical point inside
    # the linear worst case misses the curvature: its high limit exceeds the true maximum
    assert ex["worst_case_linear"]["high"] > ex["spread"]["high"]


def test_series_sum_methods_and_monte_carlo():
    # R = R1 + R2 + R3: linear, so the worst case is exact, and for independent uniform
    # parts on [x0 - h, x0 + h] the mean is sum(x0) and the variance sum(h^2/3)
    # (variance of a uniform distribution (b-a)^2/12, common practice, no source)
    ex = run(SERIES).results[0].extra
    x0 = np.array([1000.0, 2200.0, 470.0])
    h = x0 * np.array([0.01, 0.05, 0.10])
    assert ex["spread"]["low"] == pytest.approx(x0.sum() - h.sum(), rel=1e-14)
    assert ex["spread"]["high"] == pytest.approx(x0.sum() + h.sum(), rel=1e-14)
    assert ex["worst_case_linear"]["high"] == pytest.approx(x0.sum() + h.sum(), rel=1e-14)
    assert ex["rss"]["high"] - x0.sum() == pytest.approx(math.sqrt((h ** 2).sum()), rel=1e-12)
    mc = ex["monte_carlo"]
    assert (mc["samples"], mc["seed"], mc["distribution"]) == (100_000, 1, "uniform")
    sigma = math.sqrt((h ** 2 / 3).sum())
    n = mc["samples"]
    assert abs(mc["mean"] - x0.sum()) < 5 * sigma / math.sqrt(n)
    # standard error of a sample standard deviation is at most sigma/sqrt(2n) for a
    # distribution no heavier-tailed than the normal (from memory)
    assert abs(mc["std"] - sigma) < 5 * sigma / math.sqrt(2 * n)
    assert ex["spread"]["low"] <= mc["low"] < mc["mean"] < mc["high"] <= ex["spread"]["high"]


def test_monte_carlo_normal_and_seed():
    # normal with tolerance = 3 sigma: the sum has sigma = sqrt(sum (h/3)^2)
    # (sum of independent normal variables, common practice, no source)
    R1, R2 = sympy.symbols("R1 R2")
    form = Form([], R1 + 2 * R2)
    nominal = {R1: sympy.Integer(100), R2: sympy.Integer(50)}
    box = {R1: (sympy.Integer(100), sympy.Integer(3)), R2: (sympy.Integer(50), sympy.Integer(6))}
    v, mc = monte_carlo(form, nominal, box, 200_000, seed=7, distribution="normal")
    sigma = math.sqrt(1.0 ** 2 + (2 * 2.0) ** 2)
    assert abs(mc["mean"] - 200.0) < 5 * sigma / math.sqrt(200_000)
    assert abs(mc["std"] - sigma) < 5 * sigma / math.sqrt(2 * 200_000)
    # 0.135 % / 99.865 % quantiles of a normal lie at -3/+3 sigma (from memory)
    assert mc["low"] == pytest.approx(200.0 - 3 * sigma, rel=2e-3)
    assert mc["high"] == pytest.approx(200.0 + 3 * sigma, rel=2e-3)
    _, again = monte_carlo(form, nominal, box, 200_000, seed=7, distribution="normal")
    _, other = monte_carlo(form, nominal, box, 200_000, seed=8, distribution="normal")
    assert again == mc and other["mean"] != mc["mean"]


def test_interval_encloses_samples():
    x, y = sympy.symbols("x y")
    e = (x ** 2 - 3 * x * y + 1) / (y ** 2 + x) - x ** -3
    box = {x: (0.5, 2.0), y: (-1.0, 1.5)}
    lo, hi = interval(e, box)
    f = sympy.lambdify((x, y), e, "numpy")
    rng = np.random.default_rng(3)
    v = f(rng.uniform(0.5, 2.0, 20000), rng.uniform(-1.0, 1.5, 20000))
    assert lo <= v.min() and v.max() <= hi
    # division by an interval containing 0 cannot be bounded
    assert interval(1 / (x - 1), {x: (0.5, 2.0)}) is None


def test_derivative_sign_with_bisection():
    x, y = sympy.symbols("x y")
    # d/dx of x^2 - x*y on x in [1, 2], y in [0, 1.9]: 2x - y > 0 (needs bisection:
    # the plain enclosure is [0.1, 4])
    d = Form([], 2 * x - y)
    assert derivative_sign(d, {x: (1.0, 2.0), y: (0.0, 1.9)}, [x, y]) == 1
    assert derivative_sign(Form([], y - 2 * x), {x: (1.0, 2.0), y: (0.0, 1.9)}, [x, y]) == -1
    # sign changes on the box: not proven
    assert derivative_sign(Form([], 2 * x - y), {x: (0.0, 1.0), y: (0.0, 1.0)}, [x, y]) is None


def test_extremes_of_a_pure_expression():
    # x*(3 - x) on x in [1, 2] has its maximum 9/4 at x = 3/2 (calculus, common practice)
    x = sympy.Symbol("x")
    f = Form([], x * (3 - x))
    lo, hi, method, mono = extremes(f, {x: Form([], 3 - 2 * x)}, {x: sympy.Rational(3, 2)},
                                    {x: (sympy.Rational(3, 2), sympy.Rational(1, 2))})
    assert hi == pytest.approx(2.25, rel=1e-9) and lo == pytest.approx(2.0, rel=1e-12)
    assert mono == {x: "not monotone"}      # its critical point 3/2 is inside the box


def test_json_figure_and_errors(tmp_path):
    rec = run(BRIDGE)
    d = json.loads(rec.to_json())["results"][0]
    assert set(d["spread"]) == {"nominal", "low", "high", "method"}
    assert set(d["monte_carlo"]) >= {"samples", "seed", "mean", "std", "low", "high"}
    assert "figures" not in d
    fig = rec.results[0].extra["figures"][0]
    plots.draw(fig, str(tmp_path / "h.png"))
    assert (tmp_path / "h.png").read_bytes()[:4] == b"\x89PNG"
    steps = rec.results[0].steps
    assert len(steps) == 4 and steps[0].table[0][0] == "symbol" and len(steps[0].table) == 6
    no_nominal = BRIDGE.replace("resistor Rg between right and gnd = 350.7 ohm ±1%",
                                "resistor Rg between right and gnd")
    with pytest.raises(SheetError, match="nominal values of: Rg"):
        run(no_nominal)


def test_pole_inside_the_box_is_flagged():
    # (Rn+d)||(Rn-d)||R3 has a pole where (Rn^2 - d^2)/(2 Rn) = -R3, i.e. d = ±1732 ohm at
    # Rn = R3 = 1 kohm (algebra, common practice); d spans -1990..2010 ohm here
    text = NON_MONOTONE.replace("±500%", "±20000%").replace(
        "port p", "resistor R3 between a and gnd = 1k\nport p")
    # before: finite "extremes" with a warning; now the pole is proven (the exact
    # denominator takes both signs on the box) and the request is refused, located
    with pytest.raises(SheetError, match="unbounded on the box") as e:
        run(text)
    assert "changes sign" in str(e.value)
