"""Mutation tests of the internal vth = isc*rth cross-check (derive.forms.cross_check).

The solver's short-circuit current is replaced, in the test only, by a wrong ratio; the
derivation must then refuse (AssertionError: a bug in derive, never the user's sheet)
instead of reporting a result.
"""
from __future__ import annotations

import flint
import pytest

import derive
from derive.forms import select as forms
from derive.solver.cramer import Ratio, Solver

# Divider with a load, symbolic: vth = V*R2*R3/(R1*R2 + R1*R3 + R2*R3) (common practice,
# no source); the values do not matter here, only that the check runs.
SHEET = """
voltage source V between a and gnd = 10 V
resistor R1 between a and b = 1 kohm
resistor R2 between b and gnd = 4 kohm
resistor R3 between b and gnd = 12 kohm
port out between b and gnd
find thevenin at out
"""


def _run():
    return derive.derive_text(SHEET, "test.eqv")


def test_unmutated_sheet_passes_the_check():
    rec = _run()
    checks = [s for s in rec.results[0].steps if s.kind == "check"]
    assert checks and all(s.verified for s in checks)


@pytest.mark.parametrize("mutation", ["scaled", "shifted", "swapped"])
def test_wrong_isc_is_refused(monkeypatch, mutation):
    true_isc = Solver.isc

    def wrong_isc(self, port):
        r = true_isc(self, port)
        if mutation == "scaled":          # 2*isc
            return Ratio(2 * r.num, r.den, r.system)
        if mutation == "shifted":         # isc + 1
            return Ratio(r.num + r.den, r.den, r.system)
        return Ratio(r.den, r.num, r.system)              # 1/isc

    monkeypatch.setattr(Solver, "isc", wrong_isc)
    with pytest.raises(AssertionError, match="vth != isc\\*rth"):
        _run()


def test_check_refuses_when_no_usable_point_exists():
    # a denominator that vanishes identically: no point is usable, so the check must raise
    # (refuse) rather than pass
    c = flint.fmpq_mpoly_ctx.get(("a", "b"), "lex")
    a, b = c.gens()
    good = Ratio(a, b, None)
    broken = Ratio(a, b - b, None)
    with pytest.raises(AssertionError, match="refused"):
        forms.product_identity_holds(good, [broken])


def test_identity_check_rejects_a_near_miss():
    # (a+b)/(a*b) versus 1/a + 1/b + 1/(a*b)^3: equal nowhere near "usually"; a single
    # wrong term must be caught
    c = flint.fmpq_mpoly_ctx.get(("a", "b"), "lex")
    a, b = c.gens()
    lhs = Ratio(a + b, a * b, None)
    right = Ratio(a ** 3 * b ** 3 * (a + b) + 1, a ** 4 * b ** 4, None)
    assert forms.product_identity_holds(lhs, [Ratio(a + b, a * b, None)])
    assert not forms.product_identity_holds(lhs, [right])
