"""An 8-bit R-2R ladder with every resistor symbolic: thevenin, sensitivity, tolerance.

These sheets used to hang (the sensitivity's rational rebuild multiplied every nested
factor out before cancelling; derivatives were expanded over d^2); the speed claim lives in
benchmarks/bench_verify.py, these tests check the answers. References: a separately
written numpy nodal solve (common practice, no source), central differences of it for the
sensitivities, and its values at the corners of the tolerance box for the extremes.
"""
from __future__ import annotations

import itertools

import numpy as np
import pytest

from helpers import run

BITS = 8
RS, RP, RT, VREF = 10e3, 20e3, 20e3, 5.0


def ladder_sheet(n: int, requests) -> str:
    lines = [f'title "{n}-bit R-2R ladder, every resistor symbolic"',
             f"voltage source Vref between ref and gnd = {VREF:g} V"]
    prev = "ref"
    for k in range(1, n + 1):
        lines.append(f"resistor Rs{k} between {prev} and n{k} = {RS / 1e3:g} kohm ±1%")
        lines.append(f"resistor Rp{k} between n{k} and gnd = {RP / 1e3:g} kohm ±1%")
        prev = f"n{k}"
    lines.append(f"resistor Rt between n{n} and gnd = {RT / 1e3:g} kohm ±1%")
    lines.append(f"port out between n{n} and gnd")
    return "\n".join(lines + list(requests)) + "\n"


def names(n):
    return [f"Rs{k}" for k in range(1, n + 1)] + [f"Rp{k}" for k in range(1, n + 1)] + ["Rt"]


def nominal(n):
    return {**{f"Rs{k}": RS for k in range(1, n + 1)}, **{f"Rp{k}": RP for k in range(1, n + 1)},
            "Rt": RT}


def numpy_thevenin(n, r):
    """(vth, rth) by a nodal solve written here: unknowns v1..vn, ref held at VREF."""
    G = np.zeros((n, n))
    b = np.zeros(n)
    for k in range(1, n + 1):
        g = 1 / r[f"Rs{k}"]
        i = k - 1
        G[i, i] += g
        if k == 1:
            b[i] += g * VREF
        else:
            G[i - 1, i - 1] += g
            G[i, i - 1] -= g
            G[i - 1, i] -= g
        G[i, i] += 1 / r[f"Rp{k}"]
    G[n - 1, n - 1] += 1 / r["Rt"]
    vth = np.linalg.solve(G, b)[n - 1]
    e = np.zeros(n)
    e[n - 1] = 1.0
    rth = np.linalg.solve(G, e)[n - 1]
    return vth, rth


@pytest.fixture(scope="module")
def record():
    return run(ladder_sheet(BITS, ["find thevenin at out", "find sensitivity of vth at out",
                                   "find tolerance of vth at out"]))


def test_thevenin_values_and_every_step_verified(record):
    vth, rth = numpy_thevenin(BITS, nominal(BITS))
    q = record.results[0].quantities
    assert q["vth"].value == pytest.approx(vth, rel=1e-12)
    assert q["rth"].value == pytest.approx(rth, rel=1e-12)
    steps = record.results[0].steps
    assert any(s.kind == "check" for s in steps)
    assert all(s.verified for s in steps)


def test_sensitivities_match_central_differences(record):
    sens = record.results[1].extra["sensitivities"]
    r0 = nominal(BITS)
    v0 = numpy_thevenin(BITS, r0)[0]
    assert set(sens) >= set(names(BITS))
    for x in names(BITS):
        h = r0[x] * 1e-6
        up = numpy_thevenin(BITS, {**r0, x: r0[x] + h})[0]
        dn = numpy_thevenin(BITS, {**r0, x: r0[x] - h})[0]
        s_ref = r0[x] / v0 * (up - dn) / (2 * h)
        assert sens[x]["value"] == pytest.approx(s_ref, rel=1e-6, abs=1e-12), x
    assert all(s.verified for s in record.results[1].steps)


def test_tolerance_extremes_are_the_numpy_corner_extremes(record):
    tol = record.results[2].extra
    r0 = nominal(BITS)
    v0 = numpy_thevenin(BITS, r0)[0]
    # the sign of each partial derivative from central differences picks the corner
    hi, lo = dict(r0), dict(r0)
    for x in names(BITS):
        h = r0[x] * 1e-6
        up = numpy_thevenin(BITS, {**r0, x: r0[x] + h})[0]
        sgn = 1 if up > v0 else -1
        hi[x] = r0[x] * (1 + 0.01 * sgn)
        lo[x] = r0[x] * (1 - 0.01 * sgn)
    assert tol["spread"]["high"] == pytest.approx(numpy_thevenin(BITS, hi)[0], rel=1e-12)
    assert tol["spread"]["low"] == pytest.approx(numpy_thevenin(BITS, lo)[0], rel=1e-12)
    assert tol["spread"]["method"].startswith("corners: monotone in every toleranced part")
    assert set(tol["monotone"].values()) <= {"increasing", "decreasing"}
    # and no sampled corner beats them (a few hundred random corners)
    rng = np.random.default_rng(3)
    for _ in range(200):
        pt = {x: r0[x] * (1 + 0.01 * rng.choice((-1, 1))) for x in names(BITS)}
        v = numpy_thevenin(BITS, pt)[0]
        assert tol["spread"]["low"] * (1 - 1e-12) <= v <= tol["spread"]["high"] * (1 + 1e-12)


def test_exact_monotonicity_proof_claims_only_what_holds():
    import sympy
    from derive.analyses.sensitivity import Form
    from derive.analyses.tolerance import exact_signs
    V, R1, R2 = sympy.symbols("V R1 R2")
    nom = {V: sympy.Integer(10), R1: sympy.Integer(1000), R2: sympy.Integer(4000)}
    box = {R1: (nom[R1], nom[R1] / 100), R2: (nom[R2], nom[R2] / 100)}
    # divider V*R2/(R1+R2): decreasing in R1, increasing in R2 (by hand)
    assert exact_signs(Form([], V * R2 / (R1 + R2)), nom, box) == {R1: -1, R2: 1}
    # the same through a sequence of named intermediates
    p = sympy.Symbol("p")
    assert exact_signs(Form([(p, R1 + R2)], V * R2 / p), nom, box) == {R1: -1, R2: 1}
    # a denominator with mixed signs (R2 - R1) could vanish: nothing is claimed
    assert exact_signs(Form([], V / (R2 - R1)), nom, box) == {}
    # a numerator of dQ/dx with mixed signs: (R1 - R2)^2 has a minimum inside some boxes
    assert R1 not in exact_signs(Form([], (R1 - R2) ** 2 / R2), nom, box)
