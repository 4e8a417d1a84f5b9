"""Size estimates that decide between forms (derive.forms.cost) and the forms they choose.

The bounds must never exceed what factoring and printing give (checked against the
factoring bound and the printed length themselves); the chosen forms must equal the
solver's exact answer at rational points and a numpy nodal solve written here.
"""
import random
from types import SimpleNamespace

import flint
import numpy
import pytest
import sympy

import derive
from derive.forms import cost, select
from derive.forms.elimination import inline
from derive.forms.series_parallel import port_form
from derive.forms.results import Context, Options
from derive.solver import convert


def ladder(n: int, values: bool = False) -> str:
    v = (lambda k, base: f" = {k + base} kohm") if values else (lambda k, base: "")
    lines = ["voltage source V between n0 and gnd" + (" = 10 V" if values else "")]
    for k in range(1, n + 1):
        lines.append(f"resistor Rs{k} between n{k - 1} and n{k}" + v(k, 0))
        lines.append(f"resistor Rp{k} between n{k} and gnd" + v(k, 10))
    lines.append(f"port out between n{n} and gnd")
    return "\n".join(lines) + "\nfind thevenin at out\n"


BRIDGE = """voltage source V between a and gnd
resistor R1 between a and b
resistor R2 between a and c
resistor R3 between b and c
resistor R4 between b and gnd
resistor R5 between c and gnd
port out between c and gnd
find thevenin at out
"""

RC = """voltage source V between a and gnd
resistor R1 between a and b
capacitor C1 between b and c
resistor R2 between c and gnd
capacitor C2 between c and gnd
port out between c and gnd
find thevenin at out
"""


def ratios(text):
    rec = derive.derive_text(text, "t.eqv")
    ctx = Context(rec.circuit, Options())
    req = rec.results[0].request
    return [select.exact_ratio(ctx, req, n) for n in ("vth", "rth")]


@pytest.mark.parametrize("text", [ladder(n) for n in range(2, 7)] + [BRIDGE, RC])
def test_bounds_never_exceed_factoring_and_printing(text):
    for r in ratios(text):
        printed = len(str(convert.to_sympy(r)))
        factoring = convert.printed_length_at_least(r)
        bound = cost.printed_length_bound(r)
        if bound is not None:
            assert bound <= factoring <= printed
        terms = cost.factor_terms_bound(r)
        if terms is not None:
            num, den, *_ = convert.to_symbols(r)
            actual = sum(len(f) - 1 for p in (num, den) if not p.is_zero()
                         for f, _e in p.factor()[1])
            assert terms <= actual


def test_the_bound_is_tight_for_an_irreducible_ladder_denominator():
    # ladder 5's denominator has 89 terms (a Fibonacci number, prime): irreducible, so the
    # bound and the factoring bound coincide
    vth, _ = ratios(ladder(5))
    assert cost.printed_length_bound(vth) == convert.printed_length_at_least(vth)


def test_reducible_multilinear_products():
    # (a + b)(c + d)(e + f) / (a c + e): N = 8 terms, every symbol in 4 of them, so each
    # factor holding it has at least 8/gcd(8, 4) = 2 terms (worked by hand)
    names = ("a", "b", "c", "d", "e", "f")
    ctx = flint.fmpq_mpoly_ctx.get(names, "lex")
    a, b, c, d, e, f = ctx.gens()
    system = SimpleNamespace(vars=[SimpleNamespace(kind="expr", expr=sympy.Symbol(x))
                                   for x in names])
    r = SimpleNamespace(num=(a + b) * (c + d) * (e + f), den=a * c + e, system=system)
    (n_num, cn), (n_den, cd) = cost.symbol_counts(r)
    assert n_num == 8 and set(cn.values()) == {4} and n_den == 2
    bound = cost.printed_length_bound(r)
    syms = sympy.symbols(names)
    A, B, C, D, E, F = syms
    printed = len(str(sympy.factor((A + B) * (C + D) * (E + F)) / (A * C + E)))
    # by hand: numerator 6 names + 3*(2 - 1); denominator a, c, e once each + 3*(2 - 1)
    assert bound == 6 + 3 + 3 + 3 <= printed
    assert cost.factor_terms_bound(r) == 1 + 1 <= 3 + 1


def test_a_symbol_of_higher_degree_is_left_to_factoring():
    ctx = flint.fmpq_mpoly_ctx.get(("a", "b"), "lex")
    a, b = ctx.gens()
    system = SimpleNamespace(vars=[SimpleNamespace(kind="expr", expr=sympy.Symbol(x))
                                   for x in "ab"])
    r = SimpleNamespace(num=a * a + b, den=b + 1, system=system)
    assert cost.symbol_counts(r) is None and cost.printed_length_bound(r) is None


def test_printed_length_lower_bound_of_sympy_expressions():
    rnd = random.Random(7)
    syms = sympy.symbols("x y Rload C12")
    for _ in range(200):
        e = rnd.choice(syms)
        for _k in range(rnd.randint(1, 8)):
            o = rnd.choice(syms + (sympy.Rational(rnd.randint(-5, 5), rnd.randint(1, 4)),))
            op = rnd.randint(0, 3)
            e = e + o if op == 0 else e * o if op == 1 else e - o if op == 2 else \
                (e / o if o != 0 else e)
        assert cost.printed_length_at_least(e) <= len(str(e))


def _nodal_ladder(n, values, out="vth"):
    """vth and rth of a ladder by a numpy nodal solve (written here, independent of derive):
    nodes n1..nn, source V at n0."""
    V = values["V"]
    G = numpy.zeros((n, n))
    b = numpy.zeros(n)
    for k in range(1, n + 1):
        gs, gp = 1 / values[f"Rs{k}"], 1 / values[f"Rp{k}"]
        i = k - 1
        G[i, i] += gs + gp
        if k == 1:
            b[i] += gs * V
        else:
            G[i, i - 1] -= gs
            G[i - 1, i] -= gs
            G[i - 1, i - 1] += gs
    vth = numpy.linalg.solve(G, b)[-1]
    e = numpy.zeros(n)
    e[-1] = 1.0
    rth = numpy.linalg.solve(G, e)[-1]       # 1 A into the port, source shorted
    return vth, rth


@pytest.mark.parametrize("n", [2, 3, 5, 6, 8, 9, 11])
def test_chosen_ladder_forms_equal_the_exact_answer_and_a_nodal_solve(n):
    rec = derive.derive_text(ladder(n), "t.eqv")
    q = rec.results[0].quantities
    ctx = Context(rec.circuit, Options())
    req = rec.results[0].request
    rnd = random.Random(n)
    names = ["V"] + [f"R{t}{k}" for k in range(1, n + 1) for t in "sp"]
    for _ in range(3):
        pt = {sympy.Symbol(x): sympy.Rational(rnd.randint(1, 10 ** 6), rnd.randint(1, 1000))
              for x in names}
        for name in ("vth", "rth"):
            x = q[name]
            got = (x.expr if x.expr is not None else
                   inline(x.sequence, x.in_sequence)).xreplace(pt)
            if select.expandable(ctx):
                ref = convert.to_sympy(select.exact_ratio(ctx, req, name)).xreplace(pt)
                assert got == ref
            vals = {str(k): float(v) for k, v in pt.items()}
            nodal = _nodal_ladder(n, vals)[0 if name == "vth" else 1]
            assert float(got) == pytest.approx(nodal, rel=1e-9)


@pytest.mark.parametrize("n", [2, 3, 4, 5, 6])
def test_the_nested_form_is_chosen_exactly_where_it_prints_shorter(n):
    # brute force: print both forms and compare (the rule decides on a bound without
    # printing the expanded form; the outcome must be the same)
    rec = derive.derive_text(ladder(n), "t.eqv")
    q = rec.results[0].quantities
    ctx = Context(rec.circuit, Options())
    for name, r in zip(("vth", "rth"), ratios(ladder(n))):
        defs, final = port_form(ctx, rec.results[0].request, name)
        nested = len(str(inline(defs, final)))
        expanded = len(str(convert.to_sympy(r)))
        assert (q[name].form == "series-parallel") == (nested < expanded)


def test_a_nested_form_past_the_inline_limit_is_given_as_its_sequence():
    # ladder 8's nested form prints in about 5 800 characters and is kept; ladder 9's in
    # about 11 700 (over select.INLINE_LIMIT): it is given as its sequence of named
    # intermediates, which the test above checks against a numpy nodal solve (n = 9)
    q8 = derive.derive_text(ladder(8), "t.eqv").results[0].quantities
    q9 = derive.derive_text(ladder(9), "t.eqv").results[0].quantities
    for name in ("vth", "rth"):
        assert q8[name].form == "series-parallel" and q8[name].expr is not None
        assert len(str(q8[name].expr)) <= select.INLINE_LIMIT
        assert q9[name].form == "series-parallel" and q9[name].expr is None
        assert len(q9[name].sequence) > 1
        assert len(str(inline(q9[name].sequence, q9[name].in_sequence))) > select.INLINE_LIMIT


def test_a_closed_form_of_pages_is_named_in_the_record_and_whole_in_the_json():
    import json
    from derive.export import view
    rec = derive.derive_text(ladder(8), "t.eqv")
    md = rec.to_markdown()
    data = json.loads(rec.to_json())
    for name, tex in (("vth", r"v_{\mathrm{th}}"), ("rth", r"R_{\mathrm{th}}")):
        expr = data["results"][0]["quantities"][name]["expr"]
        assert len(expr) > view.RECORD_FORM_CHARS            # whole in the JSON
        assert (tex + r" = \text{(the closed form, %d characters: in full in the JSON "
                "record)}" % len(expr)) in md
        assert expr not in md                                # not typeset in the record
    assert md.count("as named intermediates below") == 2
    # a short closed form is still typeset in full, in the steps and the closed forms
    short = derive.derive_text(ladder(3), "t.eqv")
    assert "characters: in full in the JSON" not in short.to_markdown()
