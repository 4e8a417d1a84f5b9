"""Mutation tests: every internal check refuses a deliberately wrong intermediate.

Each test feeds one wrong value into the derivation (monkeypatched inside the test only) and
asserts that the record does not call it verified: the step's ``verified`` is false, the
wrong equation's ``verified_by`` claims no check, and the Markdown record does not print
"(verified)" for that step. Derivations whose failed check is a bug in derive raise
:class:`derive.derivation.port_steps.StepFailed`, which carries the steps as they were verified; those
are put into an otherwise unmutated record to render it.

The circuits are invented; the mutations are "common practice, no source" (mutation
testing): a perturbation by a factor 2 or 101/100 that no correct check can let through.
"""
import json
from types import SimpleNamespace

import pytest
import sympy

import derive
import derive.analyses.run  # noqa: F401  (the handler table and every analysis module)
from derive.derivation import port_steps as derivation
from derive.derivation import nodal_steps as derivation_nodal
from derive.analyses import inversion
from derive.forms import series_parallel as reduce
from derive.analyses import sensitivity
from derive.derivation import steps
from derive.derivation.port_steps import StepFailed
from derive.export.markdown import md_text
from derive.derivation.steps import Equation, Step, compare

DIVIDER = """voltage source V between a and gnd = 10 V
resistor R1 between a and b = 1 kohm
resistor R2 between b and gnd = 2 kohm
resistor R3 between b and gnd = 3 kohm
port out between b and gnd
find thevenin at out
"""

# a dependent source: solved by nodal analysis and Cramer's rule
NODAL = """current source I1 from gnd to a = 1 mA
resistor R1 between a and gnd = 1 kohm
voltage source Vb between b and gnd = 2 V
resistor R2 between a and b = 2 kohm
current source G1 from a to gnd = g*across(b, gnd)
nominal g = 1m
port p between a and gnd
find norton at p
"""

SENS = """voltage source V between a and gnd = 10 V
resistor R1 between a and b = 1 kohm
resistor R2 between b and gnd = 4 kohm
port out between b and gnd
find sensitivity of vth at out
"""

SOLVE = """voltage source V between a and gnd = 5 V
resistor Rpu between a and b = 10 kohm
resistor Rt between b and gnd = 10 kohm
port p between b and gnd
solve vth at p for Rt
"""


def _step_line(md: str, step) -> str:
    head = md_text(step.text)
    lines = [l for l in md.splitlines() if head in l]
    assert lines, f"step not in the Markdown: {step.text}"
    return lines[0]


def _refused(rec, i, step):
    """The record does not call ``step`` verified anywhere it shows it."""
    assert step.verified is False
    bad = [e for e in step.equations if not e.verified]
    assert bad and all(e.verified_by is None for e in bad)
    md = rec.to_markdown()
    assert "*(verified)*" not in _step_line(md, step)
    js = json.loads(rec.to_json())
    sj = [s for s in js["results"][i]["steps"] if s["text"] == step.text][0]
    assert sj["verified"] is False
    assert any(v["method"] is None for v in sj["verified_by"])
    assert "were not verified" in md or "was not verified" in md
    # LaTeX: "(verified)" exactly on the steps whose every equation verified
    from derive.export import latex as export_latex
    from derive.export import view as record_view
    v = record_view.view(rec)
    marked = sum(1 for r in v["results"] for s in r["steps"] if s["verified"] and s["equations"])
    assert export_latex.latex_source(rec).count(r"\emph{(verified)}") == marked
    assert not [s for s in v["results"][i]["steps"] if s["text"] == step.text][0]["verified"]


def _failed_record(sheet, ei, i=0):
    """An unmutated record with the steps of a failed derivation put in request ``i``."""
    rec = derive.derive_text(sheet)
    rec.results[i].steps = ei.value.steps
    bad = [s for s in ei.value.steps if not s.verified]
    assert bad
    return rec, bad


def test_unmutated_sheets_verify_completely():
    for sheet in (DIVIDER, NODAL, SENS, SOLVE):
        rec = derive.derive_text(sheet)
        for r in rec.results:
            assert r.steps and all(s.verified for s in r.steps), r.request.text
            assert all(e.verified_by in steps.METHODS for s in r.steps for e in s.equations)
        assert "*(verified)*" in rec.to_markdown()
        for r in json.loads(rec.to_json())["results"]:
            for sj in r["steps"]:
                assert len(sj["verified_by"]) == len(sj["equations"])
                for v in sj["verified_by"]:
                    assert v["method"] in steps.METHODS
                    assert ("points" in v) <= (v["method"] in ("points", "system"))


# ------------------------------------------------------------------ the equality check
def test_points_branch_of_equality_refuses_a_wrong_identity():
    a, b, d = sympy.symbols("a b d")
    # with a named intermediate the check always takes the random-point branch
    assert compare(d / (a + b), a * b / (a + b) ** 2, {d: a * b / (a + b)}) == \
        ("points", True, 3)
    method, ok, _ = compare(d / (a + b), a * b / (a + b) ** 2, {d: a * b / (a + b + 1)})
    assert method == "points" and ok is False


def test_no_usable_point_is_no_pass():
    a, b, d = sympy.symbols("a b d")
    # 1/(d - a + b) with d = a - b is undefined at every point: no vacuous pass
    method, ok, n = compare(1 / (d - a + b), a, {d: a - b})
    assert (method, ok) == ("points", False)
    st = Step("undefined", [Equation(sympy.Symbol("x"), 1 / (d - a + b), a, {d: a - b})])
    assert st.verify() is False and st.equations[0].verified_by is None


def test_an_exception_while_checking_never_verifies():
    a = sympy.Symbol("a")
    eq = Equation(sympy.Symbol("x"), a, check=sympy.Matrix([a]))     # a - Matrix raises
    assert Step("raises", [eq]).verify() is False and eq.verified_by is None


def test_an_equation_without_check_or_method_is_not_verified():
    a, b = sympy.symbols("a b")
    plain = Equation(sympy.Symbol("x"), a + b)
    claimed = Equation(sympy.Symbol("y"), a * b)
    claimed.verified = True                 # a claim without a method is no claim
    derived = Equation(a + b, a * b, definition=True)     # only a plain name can be defined
    for eq in (plain, claimed, derived):
        assert Step("t", [eq]).verify() is False and eq.verified_by is None
    named = Equation(sympy.Symbol("z"), a * b, definition=True)
    assert Step("t", [named]).verify() and named.verified_by == "definition"


# ------------------------------------------------------------------ reduction moves
def test_a_wrong_reduced_value_is_caught(monkeypatch):
    orig = reduce.reduction

    def wrong(ctx, port, zero):
        res = orig(ctx, port, zero)
        final, moves, defs = res
        (s0, e0), rest = defs[0], defs[1:]
        return final, moves, [(s0, e0 * sympy.Rational(101, 100))] + list(rest)
    monkeypatch.setattr(reduce, "reduction", wrong)
    with pytest.raises(StepFailed) as ei:
        derive.derive_text(DIVIDER)
    monkeypatch.undo()
    rec, bad = _failed_record(DIVIDER, ei)
    assert any(s.kind == "reduction" for s in bad)
    for s in bad:
        _refused(rec, 0, s)


# ------------------------------------------------------------------ nodal steps
def test_random_solve_agreement_refuses_a_wrong_result(monkeypatch):
    orig = derivation.cramer_step
    monkeypatch.setattr(derivation_nodal, "MAX_CRAMER", 0)    # use the random-solve branch

    def wrong(nodal, name, form, b, expected, why, tag=""):
        if name == "vth":
            expected = 2 * expected
        return orig(nodal, name, form, b, expected, why, tag)
    monkeypatch.setattr(derivation, "cramer_step", wrong)
    with pytest.raises(StepFailed) as ei:
        derive.derive_text(NODAL)
    monkeypatch.undo()
    rec, bad = _failed_record(NODAL, ei)
    cr = [s for s in bad if s.kind == "cramer"]
    assert cr and cr[0].equations[0].lhs == sympy.Symbol("vth")
    _refused(rec, 0, cr[0])


def test_a_nodal_row_that_disagrees_with_the_stamped_system_is_caught(monkeypatch):
    orig = derivation_nodal.Nodal._build

    def wrong(self):
        orig(self)
        n, l, r, t = self.kcl[0]
        self.kcl[0] = (n, 2 * l, r, t)       # a KCL row off by a factor 2
    monkeypatch.setattr(derivation_nodal.Nodal, "_build", wrong)
    with pytest.raises(StepFailed) as ei:
        derive.derive_text(NODAL)
    monkeypatch.undo()
    rec, bad = _failed_record(NODAL, ei)
    kinds = {s.kind for s in bad}
    assert {"nodal", "matrix"} <= kinds
    for s in bad:
        _refused(rec, 0, s)


def test_a_wrong_cramer_determinant_is_caught(monkeypatch):
    orig = derivation_nodal.symbolic_det
    calls = []

    def wrong(M):
        calls.append(M)
        d = orig(M)
        return 2 * d if len(calls) == 2 else d      # the first column-replaced determinant
    monkeypatch.setattr(derivation_nodal, "symbolic_det", wrong)
    with pytest.raises(StepFailed) as ei:
        derive.derive_text(NODAL)
    monkeypatch.undo()
    rec, bad = _failed_record(NODAL, ei)
    cr = [s for s in bad if s.kind == "cramer"][0]
    assert [e.verified for e in cr.equations].count(False) >= 2   # Delta_i and the ratio
    _refused(rec, 0, cr)


def test_a_wrong_short_circuit_current_is_caught(monkeypatch):
    orig = derivation._exact

    def wrong(ctx, req, name):
        e = orig(ctx, req, name)
        return 2 * e if name == "vth" else e
    monkeypatch.setattr(derivation, "_exact", wrong)
    with pytest.raises(StepFailed) as ei:
        derive.derive_text(NODAL)
    monkeypatch.undo()
    rec, bad = _failed_record(NODAL, ei)
    res = [s for s in bad if s.kind == "result"]
    assert res
    _refused(rec, 0, res[0])


def test_a_wrong_nominal_value_is_caught(monkeypatch):
    orig = derivation._ratio_value
    monkeypatch.setattr(derivation, "_ratio_value",
                        lambda ratio, nominal: (lambda v: None if v is None else v + 1)(
                            orig(ratio, nominal)))
    with pytest.raises(StepFailed, match="at nominal values disagrees"):
        derive.derive_text(DIVIDER)


# ------------------------------------------------------------------ sensitivity
def test_a_wrong_derivative_is_caught(monkeypatch):
    orig = sensitivity._rational_derivative

    def wrong(e, x, **kw):
        r = orig(e, x, **kw)
        if r is None:
            return r
        return 2 * r[0], (2 * r[1] if r[1] is not None else None)
    monkeypatch.setattr(sensitivity, "_rational_derivative", wrong)
    rec = derive.derive_text(SENS)
    st = [s for s in rec.results[0].steps if s.kind == "sensitivity"][0]
    _refused(rec, 0, st)
    # the derivatives the mutation reached (where the shorter form was not sympy's own) are
    # refused; those still verified are right (sympy.simplify as an independent oracle)
    for e in st.equations:
        if e.verified:
            assert sympy.simplify(e.rhs - e.check) == 0


def test_a_wrong_derivative_of_a_large_form_is_caught_by_forward_differentiation(monkeypatch):
    """Large closed forms get no sympy derivative to compare with: their derivative steps are
    checked by forward-mode differentiation in exact rationals (Program.dual). Forced here
    on a small sheet (RAW_OPS = 0) with a wrong quotient-rule derivative."""
    monkeypatch.setattr(sensitivity, "RAW_OPS", 0)
    rec = derive.derive_text(SENS)
    st = [s for s in rec.results[0].steps if s.kind == "sensitivity"][0]
    assert st.verified and st.equations
    assert all(e.verified_by == "points" and e.check is None for e in st.equations)
    # every verified derivative is right (sympy's own derivative as the oracle, in the test)
    R1, R2, V = sympy.symbols("R1 R2 V")
    vth = R2 * V / (R1 + R2)
    for e in st.equations:
        x = sympy.Symbol(str(e.lhs).split("/d")[-1]) if str(e.lhs).startswith("d") else None
        if x is not None:
            assert sympy.simplify(e.rhs - sympy.diff(vth, x)) == 0

    orig = sensitivity._rational_derivative

    def wrong(e, x, **kw):
        r = orig(e, x, **kw)
        if r is None or r == sensitivity.TOO_LONG:
            return r
        return 2 * r[0], (2 * r[1] if r[1] is not None else None)
    monkeypatch.setattr(sensitivity, "_rational_derivative", wrong)
    rec = derive.derive_text(SENS)
    st = [s for s in rec.results[0].steps if s.kind == "sensitivity"][0]
    _refused(rec, 0, st)


# ------------------------------------------------------------------ inversion
def test_a_wrong_inverted_formula_is_caught(monkeypatch):
    orig = inversion.polynomial_roots

    def wrong(poly):
        roots, method = orig(poly)
        return [r * sympy.Rational(101, 100) for r in roots], method
    monkeypatch.setattr(inversion, "polynomial_roots", wrong)
    rec = derive.derive_text(SOLVE)
    st = rec.results[0].steps
    roots = [s for s in st if s.text.startswith("Root 1")]
    final = [s for s in st if s.text.startswith("The formula for")]
    assert roots and final
    _refused(rec, 0, roots[0])
    _refused(rec, 0, final[0])
    assert json.loads(rec.to_json())["results"][0]["roots"][0]["verified"] is False


# ------------------------------------------------------------------ claims
def test_a_claim_undefined_at_every_point_does_not_hold():
    from derive.analyses.claims import _agree_at_points
    a, b, d = sympy.symbols("a b d")
    q = SimpleNamespace(sequence=[(d, a - b)], in_sequence=1 / (d - a + b))
    assert _agree_at_points(q, a, [a, b]) == (False, 0)
    q_ok = SimpleNamespace(sequence=[(d, a - b)], in_sequence=d + b)
    assert _agree_at_points(q_ok, a, [a, b]) == (True, 12)


# ------------------------------------------------------------------ regressions
def test_an_open_branch_in_parallel_drops_out_instead_of_infinite_algebra():
    """Regression: a conductance of value 0 (an open) gave the reduction step
    ``Zeq2 = zoo*R1/(R1 + zoo)``, which the old random-point check passed vacuously (every
    point undefined). The open now drops out of the parallel combination."""
    t = ("voltage source V between a and gnd = 5 V\nresistor R1 between a and b = 1k\n"
         "conductance G2 between b and gnd = G - G\nnominal G = 1m\n"
         "port p between b and gnd\nfind thevenin at p\n")
    rec = derive.derive_text(t)
    st = rec.results[0].steps
    assert all(s.verified for s in st)
    assert not any(e.has(sympy.zoo) for s in st for q in s.equations for e in (q.lhs, q.rhs))
    assert any("infinite impedance" in s.text for s in st)
    # an unloaded divider: vth = V, rth = R1 (common practice, no source)
    assert rec.results[0].quantities["vth"].value == 5.0
    assert rec.results[0].quantities["rth"].value == 1000.0


# ------------------------------------------------------------------ long chains (sparse checks)
LONG_CHAIN = ("voltage source V between n0 and gnd = 10 V\n" +
              "".join(f"resistor R{i} between n{i - 1} and n{i} = {i} ohm\n"
                      for i in range(1, 251)) +
              "resistor RL between n250 and gnd = 10 kohm\nport out between n250 and gnd\n"
              "find thevenin at out\n")


def test_a_wrong_result_of_a_long_chain_is_caught_by_the_sparse_solves(monkeypatch):
    # beyond 200 elements the result is checked by exact sparse nodal solves; a reduced
    # branch whose impedance is off by 1 % must not pass them
    orig = reduce.reduction

    def wrong(ctx, port, zero):
        final, moves, defs = orig(ctx, port, zero)
        bad = reduce.Branch(final.name, final.a, final.b, final.E,
                            final.Z * sympy.Rational(101, 100), final.K, final.members)
        return bad, moves, defs
    monkeypatch.setattr(reduce, "reduction", wrong)
    # the value at nominal values, checked by a sparse exact solve there, stops it first
    with pytest.raises(StepFailed, match="disagrees with an independent exact computation"):
        derive.derive_text(LONG_CHAIN)
    # with the value step out of the way, the result step's sparse solves refuse it
    monkeypatch.setattr(derivation, "_value_step",
                        lambda ctx, req, q: Step("value not checked here", [], kind="value"))
    with pytest.raises(StepFailed) as ei:
        derive.derive_text(LONG_CHAIN)
    monkeypatch.undo()
    rec, bad = _failed_record(LONG_CHAIN, ei)
    assert {s.kind for s in bad} == {"result"}
    assert any(e.verified_by is None for e in bad[0].equations)
    for s in bad:
        _refused(rec, 0, s)


WITHIN = """voltage source Vin between a and gnd = 1 V
resistor R1 between a and n = 10 kohm ±1%
resistor R2 between n and out = 100 kohm ±1%
opamp U1 inputs gnd, n output out gain A
nominal A = 100000 ±50%
port o between out and gnd
check gain from Vin to o equals -R2/R1 within 1%
"""


def test_a_within_bound_below_the_true_error_is_not_verified(monkeypatch):
    # the bound of a within-claim is rechecked at the corners and, independently, in sympy
    # at the worst point: a bound established as half the true largest error fails both
    from derive.analyses import approximation
    orig = approximation.establish

    def low(pb, sc, cand):
        b = orig(pb, sc, cand)
        b.err2 = b.err2 / 4
        return b
    monkeypatch.setattr(approximation, "establish", low)
    rec = derive.derive_text(WITHIN)
    monkeypatch.undo()
    step = next(s for s in rec.results[0].steps if s.text.startswith("The claim against"))
    _refused(rec, 0, step)
