"""``check Q at P equals EXPR``: a hand-derived claim verified against the derived quantity.

The verdict comes from exact algebra: the difference ``claim - Q`` is cancelled as a
rational function over the rationals (Q is the exact ratio of the nodal solution where it
was expanded). Where only a sequence of named intermediates exists, both sides are
evaluated exactly (rational arithmetic) at random rational points, and the verdict says so.
A claim that does not hold gets a counterexample point (nominal values where given), its
relative error at nominal values, and a diagnosis: a dimension error naming the offending
term, a constant factor or a sign, or a single symbol whose limit (0 or infinity) makes the
claim agree with Q. :func:`check_lines` backs ``derive check``.

``check Q equals EXPR within E% [from F1 to F2]`` asks whether a short hand-written formula
stays within relative error E of Q over the whole tolerance box (and band): the bound is
established as for ``approximately within``
(:func:`derive.analyses.approximation.within_claim`); the verdict says "proven" or "at all
N searched points (not proven)", and a failing claim gives the worst point found.
"""
from __future__ import annotations

import random

import sympy

from derive.forms import results as analysis
from derive.circuit import dimensions
from derive.circuit.build import S, key_of
from derive.sheet.expressions import to_sympy
from derive.analyses import approximation
from derive.errors import SheetError
from derive.sheet import quantities
from derive.analyses.inversion import quantity_of
from derive.forms.text import to_text
from derive.analyses.inversion import derived_equation
from derive.derivation.steps import Equation, Step
from derive.solver import rational
from derive.sheet.units import format_value

POINTS = 12
SHOWN = 160        # longest ratio written out in a diagnosis (characters)


def claim_expr(ctx, req) -> sympy.Expr:
    """The claim as sympy, built node by node from the sheet's expression tree."""
    e = to_sympy(req.claim, lambda n: S if n.name == "s" else sympy.Symbol(key_of(n.name)))
    return e.xreplace(ctx.numeric_subs())


def _degenerate(v) -> bool:
    return v is None or v is rational.INFINITE or v.is_zero()


def diagnose(q_expr, claim, name: str, nominal: dict | None = None) -> str:
    """What an engineer can use: a constant factor, a sign, or single-symbol limits (each
    limit of a rational function at 0 or infinity read off its extreme-degree terms, in
    python-flint).

    >>> a, b, c = sympy.symbols('Ra Rb Rc')
    >>> diagnose(a*b*c/(a*b + b*c + a*c), a*b/(a + b), 'rth')
    'agrees with rth when Rc → ∞ (the claim leaves out Rc)'
    >>> diagnose(a*b/(a + b), -a*b/(a + b), 'rth')
    'differs in sign: the claim is -rth'
    """
    if q_expr == 0:          # e.g. rth at a port across an ideal voltage source
        return (f"{name} is identically 0 (a short or an ideal voltage source across the "
                f"port), while the claim "
                f"{to_text(claim)} is not")
    if claim == 0:
        return f"the claim is 0, but {name} is not identically zero"
    try:
        fq, fc = rational.common([q_expr, claim])
    except (rational.NotPolynomial, ZeroDivisionError):
        return "not a rational function of its symbols: no diagnosis by limits"
    if fq.is_zero():
        return f"{name} is identically zero"
    r = fc / fq
    if r.is_constant():
        k = r.to_sympy()
        if k == -1:
            return f"differs in sign: the claim is -{name}"
        return f"differs by a factor {to_text(k)}: the claim is {to_text(k)}·{name}"
    agree, relative = [], []
    for x in fq.symbols:
        for at_inf, label in ((False, "0"), (True, "∞")):
            lq = fq.limit(x, at_inf)
            lc = fc.limit(x, at_inf)
            if not _degenerate(lq) and lc is not rational.INFINITE:
                if lc == lq:
                    missing = " (the claim leaves out " + x.name + ")" \
                        if x not in claim.free_symbols else ""
                    agree.append(f"{x.name} → {label}{missing}")
            else:
                lr = r.limit(x, at_inf)
                if lr is not rational.INFINITE and lr == 1:
                    relative.append(f"{x.name} → {label}")
    at_nominal = ""
    if nominal:
        k = r.to_sympy().xreplace(nominal)
        if k.is_Rational and k in (-1, 1):
            at_nominal = (f"; at nominal values the claim is exactly {'-' if k == -1 else ''}"
                          f"{name}" + (" (opposite sign: check the sign convention, the "
                                       "direction of the port or the order of the inputs)"
                                       if k == -1 else ""))
    ratio = to_text(r.to_sympy())
    ratio = f"claim/{name} = {ratio}" if len(ratio) <= SHOWN else \
        f"claim/{name} (a ratio of {len(r.num)}- and {len(r.den)}-term polynomials)"
    if agree:
        return f"agrees with {name} when " + " or when ".join(agree) + at_nominal
    if relative:
        return (f"agrees with {name} only approximately: the relative error vanishes when "
                + " or when ".join(relative) + f" ({ratio})" + at_nominal)
    return (f"no single symbol sent to 0 or ∞ makes it agree, and {ratio} is not constant"
            + at_nominal)


def _point(ctx, syms, rnd, use_nominal: bool) -> dict:
    nom = ctx.nominal
    pt = {}
    for x in syms:
        if use_nominal and x in nom and x != S:
            pt[x] = nom[x]
        else:
            pt[x] = sympy.Rational(rnd.randint(1, 10**6), rnd.randint(1, 10**3))
    return pt


def _eval_seq(q, pt):
    env = dict(pt)
    for s, e in q.sequence:
        env[s] = e.xreplace(env)
    return q.in_sequence.xreplace(env)


def _agree_at_points(q, claim, syms):
    """(agrees, points used): the quantity's sequence and the claim in exact rational
    arithmetic (python-flint) at ``POINTS`` random rational points; undefined points are
    redrawn a bounded number of times, and with no usable point the claim is not held."""
    from derive.derivation.steps import ATTEMPTS, NotRational, Program, random_point
    rnd = random.Random(5)
    try:
        prog = Program([q.in_sequence, claim], dict(q.sequence))
    except NotRational:
        return False, 0
    used = 0
    for _ in range(ATTEMPTS * POINTS):
        try:
            vq, vc = prog.run(random_point(rnd, prog.symbols() | set(syms)))
        except ZeroDivisionError:
            continue
        if vq != vc:
            return False, used + 1
        used += 1
        if used == POINTS:
            break
    return used > 0, used


def _value(v):
    try:
        return float(v)
    except (TypeError, ValueError):
        return None


def dimension_verdict(ctx, req, q_unit, q_expr):
    """(error text or None, note): dimensional analysis of the claim against Q."""
    dims = dimensions.symbol_dims(ctx.circuit)
    want = dimensions.OF_UNIT.get(q_unit)
    if want is None:
        return None, f"dimension not checked: the unit of the quantity ({q_unit}) is not known"
    own = dimensions.of_sympy(q_expr, dims)
    if own != want:
        return None, ("dimension not checked: the derived quantity is not consistent with the "
                      "symbols' dimensions (a symbol without a unit?)")
    try:
        got = dimensions.of_tree(req.claim, dims, key_of, want=want)
    except dimensions.DimensionError as e:
        return f"dimension error: {e.why}", "dimensions checked"
    if got != want:
        return (f"dimension error: the claim is {dimensions.show(got)}, {req.quantity} is "
                f"{dimensions.show(want)}"), "dimensions checked"
    return None, f"dimensions agree ({dimensions.show(want)})"


def check_request(ctx, req) -> analysis.RequestResult:
    name, q_expr, q = quantity_of(ctx, req)
    claim = claim_expr(ctx, req)
    qs = sympy.Symbol(name)
    steps = [Step(f"The derived {name} ({q.form} form).", [derived_equation(qs, q_expr, q)],
                  kind="check"),
             Step("The claim, built from the sheet's expression.",
                  [Equation(sympy.Symbol(f"{name}_claimed"), claim, definition=True)],
                  kind="check")]
    syms = sorted(q_expr.free_symbols | claim.free_symbols, key=lambda s: s.name)
    if q.expr is not None:
        method = ("exact cancellation of claim - quantity over the rationals" +
                  (" (the quantity is the exact ratio of the nodal solution)"
                   if q.ratio is not None else ""))
        raw = claim - q_expr
        try:                                  # cancelled and factored in python-flint
            (fd,) = rational.common([raw])
            diff = fd.to_sympy()
        except (rational.NotPolynomial, ZeroDivisionError):     # roots: sympy
            diff = sympy.factor(sympy.cancel(sympy.together(raw)))
        holds = diff == 0
        steps.append(Step(f"The difference claim - {name} cancels " +
                          ("to zero exactly." if holds else "to a non-zero expression."),
                          [Equation(sympy.Symbol("difference"), diff, check=raw)], kind="check"))
    else:
        method = (f"exact rational evaluation at {POINTS} random rational points (only a "
                  "sequence of intermediates exists); a wrong claim agrees at all of them with "
                  "negligible probability (Schwartz-Zippel lemma)")
        holds, used = _agree_at_points(q, claim, syms)
        steps.append(Step(f"Exact evaluation at {used} random rational points: the claim "
                          + ("agrees at every one." if holds else
                             "differs." if used else "could not be evaluated at any point "
                             "(undefined everywhere tried)."), kind="check"))
    dim_error, dim_note = dimension_verdict(ctx, req, q.unit, q_expr)
    if dim_error:
        holds = False
    if getattr(req, "within", None) is not None and not dim_error:
        return _within_request(ctx, req, name, q, q_expr, claim, steps, holds, method,
                               dim_note)
    counter, rel, diagnosis = None, None, None
    if not holds:
        rnd = random.Random(11)
        for attempt in range(20):
            pt = _point(ctx, syms, rnd, attempt == 0)
            try:
                vq = _eval_seq(q, pt) if q.expr is None else q_expr.xreplace(pt)
                vc = claim.xreplace(pt)
            except ZeroDivisionError:
                continue
            if vq.is_number and vc.is_number and vq.is_finite and vc.is_finite \
                    and sympy.simplify(vq - vc) != 0:
                found = {"point": {x.name: _value(v) for x, v in pt.items()},
                         "at_nominal": attempt == 0 and all(x in ctx.nominal for x in syms),
                         "quantity": _value(vq), "claim": _value(vc)}
                if found["quantity"] is not None and found["claim"] is not None:
                    counter = found
                    break
                # a value that is not real (a root of a negative number): kept, as a pair
                # [real, imaginary], only if no point with real values is found
                for key, v in (("quantity", vq), ("claim", vc)):
                    if found[key] is None:
                        z = complex(v)
                        found[key + "_complex"] = [z.real, z.imag]
                counter = counter or found
        nom = ctx.nominal
        if S not in syms and all(x in nom for x in syms):
            vq = q_expr.xreplace(nom) if q.expr is not None else _eval_seq(q, nom)
            vc = claim.xreplace(nom)
            if vq.is_number and vq != 0:
                rel = _value((vc - vq) / vq)
        diagnosis = dim_error or diagnose(q_expr, claim, name, ctx.nominal)
        dg = ctx.options.digits
        rows = [["symbol", "value"]] + [[k, format_value(v, None, dg)] for k, v in
                                        (counter or {"point": {}})["point"].items()]
        if counter:
            for label, key in ((name, "quantity"), ("claim", "claim")):
                v = counter[key]
                z = counter.get(key + "_complex")
                rows.append([label, format_value(v, None, dg) if v is not None else
                             format_value(complex(z[0], z[1]), None, dg) + " (not real)"])
        steps.append(Step(f"The claim does not hold: {diagnosis}." +
                          (f" Relative error at nominal values: {format_value(rel, None, dg)}."
                           if rel is not None else ""), kind="check",
                          table=rows if counter else None))
    else:
        steps.append(Step(f"The claim holds ({dim_note}).", kind="check"))
    for st in steps:
        st.verify()
    out = analysis.RequestResult(req, steps=steps)
    out.extra.update({"holds": bool(holds), "counterexample": counter, "diagnosis": diagnosis,
                      "relative_error": rel, "method": method, "dimensions": dim_note})
    return out


def _within_request(ctx, req, name, q, q_expr, claim, steps, exact, method, dim_note):
    """``check Q equals EXPR within E%``: the verdict is the largest relative error of the
    claim over the tolerance box (and band) against E
    (:func:`derive.analyses.approximation.within_claim`); a claim that equals Q exactly holds
    without a search."""
    if not quantities.accepts("within", req.quantity):
        loc = req.name_locs.get("within", req.loc)
        raise SheetError(f"'within' is not offered for {req.quantity}", loc.line, loc.col)
    within = float(req.within)
    if exact:
        verdict = (f"holds within {within * 100:.3g} % (proven): the claim equals {name} "
                   "exactly, so its relative error is 0 everywhere")
        w = {"holds": True, "within": within, "bound": 0.0, "max_error": 0.0, "proven": True,
             "method_word": "proven", "method": "exact: " + method, "points": 0,
             "worst": None, "verdict": verdict}
    else:
        w = approximation.within_claim(ctx, req, name, q, q_expr, claim)
        steps.append(w.pop("step"))
        verdict = w["verdict"]
    diagnosis = None if w["holds"] else verdict
    if not exact:
        # what the claim leaves out, in limits: the assumption a short formula makes
        w["assumption"] = diagnose(q_expr, claim, name, ctx.nominal)
    steps.append(Step(f"The claim {verdict} ({dim_note}).", kind="check"))
    for st in steps:
        st.verify()
    out = analysis.RequestResult(req, steps=steps)
    out.extra.update({"holds": bool(w["holds"]), "counterexample": None,
                      "diagnosis": diagnosis, "relative_error": None,
                      "method": w["method"], "dimensions": dim_note, "within": w})
    return out


NO_CLAIMS = "no check claims in the sheet"


def check_lines(record):
    """(lines, ok): one ``PASS``/``FAIL`` line per ``check`` claim of a derived record."""
    lines, ok = [], True
    digits = getattr(record, "digits", None) or 4
    for r in record.results:
        if r.request.statement != "check":
            continue
        holds = r.extra.get("holds", False)
        ok = ok and holds
        line = f"{'PASS' if holds else 'FAIL'} line {r.request.loc.line}: {r.request.text}"
        if r.extra.get("within"):               # a bound: say how it was established
            line += f" — {r.extra['within']['verdict']}"
        elif not holds:
            line += f" — {r.extra.get('diagnosis')}"
            if r.extra.get("relative_error") is not None:
                line += (" (relative error at nominal "
                         f"{format_value(r.extra['relative_error'], None, digits)})")
        lines.append(line)
        lines += [f"  note: {n}" for n in r.notes]
    if not lines:
        lines.append(NO_CLAIMS)
    return lines, ok
