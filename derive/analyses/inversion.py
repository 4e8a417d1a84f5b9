"""``solve Q at P for X``: a derived quantity inverted for one symbol (calibration formulas).

The quantity becomes a symbol of its own name (``vth``). Its closed form is a rational
function ``num/den`` in X, so ``num - vth*den = 0`` is a polynomial in X: degree 1 is
solved directly, degree 2 by the quadratic formula, higher degrees by sympy's polynomial
root finder (``sympy.roots``; it may not find every root in radicals, and says so). Every
root is substituted back and must give the quantity identically. The root that is real and
positive at nominal values is marked; the conditions (denominators not zero) and the range
of the measured quantity over which the marked root stays real and positive are stated.
"""
from __future__ import annotations

import sympy
from derive.sheet.expressions import as_expr

from derive.forms import results as analysis
from derive.solver import convert as edge
from derive.forms import select as forms
from derive.forms import elimination as sequence
from derive.circuit.build import key_of
from derive.errors import SheetError
from derive.sheet import quantities
from derive.forms.text import to_text
from derive.derivation.steps import Equation, Step, compare


def quantity_of(ctx, req):
    """(name, closed form, QuantityResult) of the single quantity a solve/check names."""
    q = quantities.quantity(req.quantity)
    if q.family == "basic" and len(q.members) > 1:
        pair = " or ".join(q.members)
        raise SheetError(f"'{req.statement}' takes one quantity: {pair}, not "
                         f"{req.quantity}", req.loc.line, req.loc.col)
    if not quantities.accepts(req.statement, req.quantity):
        raise SheetError(f"'{req.statement}' is not offered for {req.quantity}",
                         req.loc.line, req.loc.col)
    q = forms.port_quantities(ctx, req)[0]
    expr = q.expr
    if expr is None and q.sequence:
        expr = sequence.inline(q.sequence, q.in_sequence)
    if expr is None:
        raise SheetError(f"no closed form of {q.name} to work with", req.loc.line, req.loc.col)
    return q.name, expr, q


def measured_symbol(ctx, name: str) -> sympy.Symbol:
    """The symbol standing for the measured quantity: its own name unless a circuit symbol
    already has it (then ``name_meas``)."""
    taken = set(ctx.circuit.symbols) | {"s"}
    while name in taken:
        name += "_meas"
    return sympy.Symbol(name)


def polynomial_roots(poly: sympy.Poly):
    """(roots, method) of a univariate polynomial with symbolic coefficients.

    >>> x, a, b = sympy.symbols('x a b')
    >>> polynomial_roots(sympy.Poly(a*x - b, x))
    ([b/a], 'linear')
    """
    d = poly.degree()
    cs = poly.all_coeffs()
    if d == 1:
        return [edge.factor(-cs[1] / cs[0])], "linear"
    if d == 2:
        a, b, c = cs
        disc = edge.factor(b**2 - 4*a*c)
        r = sympy.sqrt(disc)
        return [(-b + r) / (2*a), (-b - r) / (2*a)], "quadratic formula"
    found = sympy.roots(poly, multiple=True)
    return found, f"sympy.roots on a degree-{d} polynomial (roots in radicals where found)"


def _num(e):
    """A complex number from an exact expression (high precision), or None."""
    try:
        v = complex(sympy.N(e, 30))
    except (TypeError, ValueError, ZeroDivisionError):
        return None
    return v


def _sub_back(expr, x, root, q) -> tuple:
    """(method, holds, points): whether ``expr`` with ``x`` replaced by ``root`` is ``q``
    identically, by :func:`derive.derivation.steps.compare` with ``x`` a named intermediate
    standing for the root (exact rational evaluation at random points, or exact sympy
    substitution where the root has radicals). An error while checking counts as not
    verified.

    >>> a, b, x, q = sympy.symbols('a b x q')
    >>> _sub_back(a*x/(b + x), x, b*q/(a - q), q)[:2]
    ('points', True)
    """
    try:
        return compare(expr, q, {x: root})
    except Exception:
        return None, False, None


def derived_equation(sym, expr, fq) -> Equation:
    """``sym = expr`` for a derived closed form, checked against the solver's exact ratio
    (or, where only a sequence exists, against the sequence it was inlined from)."""
    if fq.ratio is not None:
        return Equation(sym, expr, check=edge.to_sympy(fq.ratio))
    if fq.sequence:
        return Equation(sym, expr, check=fq.in_sequence, defs=dict(fq.sequence))
    return Equation(sym, expr)          # nothing independent to compare with: not verified


def _chosen(x, root, listed) -> Equation:
    """The chosen root again: verified as its root step was (substituted back exactly)."""
    eq = Equation(x, root)
    eq.mark(listed["verified_by"] or "points", listed["verified"], listed["points"])
    return eq


def _critical(poly, x, q, nominal):
    """Real values of q (others at nominal) where a root may change sign or stop being
    real: zeros of the leading and constant coefficients and of the discriminant."""
    cs = poly.all_coeffs()
    exprs = [cs[0], cs[-1]]
    if poly.degree() >= 2:
        exprs.append(sympy.discriminant(poly.as_expr(), x))
    pts = {}
    for e in exprs:
        e = sympy.together(as_expr(e))
        n_sym, _ = sympy.fraction(e)
        for fac, _m in edge.factor_list(n_sym)[1]:
            if q not in fac.free_symbols:
                continue
            pq = sympy.Poly(fac, q)
            if pq.degree() == 1:
                sym = edge.factor(-pq.all_coeffs()[1] / pq.all_coeffs()[0])
                v = sym.xreplace(nominal)
                if v.is_number and v.is_real:
                    pts[sympy.nsimplify(v)] = sym
                continue
            num_fac = sympy.Poly(fac.xreplace(nominal), q)
            if num_fac.free_symbols - {q}:
                continue
            for r in num_fac.real_roots():
                pts.setdefault(r, None)
    return sorted(pts.items(), key=lambda kv: float(kv[0]))


def valid_range(root, poly, x, q, nominal):
    """Intervals of q, others at nominal, where ``root`` is real and positive, as
    [(low, high)] with each end (exact value, symbolic end or None); None ends unbounded."""
    nominal = {k: v for k, v in nominal.items() if k != q}
    crit = _critical(poly, x, q, nominal)
    bounds = [(None, None)] + crit + [(None, None)]
    out = []
    for i in range(len(bounds) - 1):
        lo, hi = bounds[i], bounds[i + 1]
        if lo[0] is None and hi[0] is None:
            probe = sympy.Integer(1)
        elif lo[0] is None:
            probe = hi[0] - 1 - abs(hi[0])
        elif hi[0] is None:
            probe = lo[0] + 1 + abs(lo[0])
        else:
            probe = (lo[0] + hi[0]) / 2
        v = _num(root.xreplace(nominal).xreplace({q: probe}))
        if v is not None and abs(v.imag) <= 1e-20 * max(1.0, abs(v.real)) and v.real > 0:
            if out and out[-1][1] == lo and lo[0] is not None:
                out[-1] = (out[-1][0], hi)
            else:
                out.append((lo, hi))
    return out


def _end_text(end, q, side):
    v, sym = end
    if v is None:
        return None
    return to_text(sym) if sym is not None else f"{float(v):.6g}"


def solve_request(ctx, req) -> analysis.RequestResult:
    name, expr, fq = quantity_of(ctx, req)
    x = sympy.Symbol(key_of(req.solve_for))
    loc = req.name_locs.get("solve_for", req.loc)
    if x not in expr.free_symbols:
        why = " (it was given a numeric value before solving)" if x.name in ctx.numeric_subs() \
            or x in ctx.numeric_subs() else ""
        raise SheetError(f"{name} at {req.port} does not depend on {req.solve_for}{why}",
                         loc.line, loc.col)
    q = measured_symbol(ctx, name)
    try:                                    # cancelled in python-flint
        num, den = edge.cancelled(expr)
    except (sympy.PolynomialError, TypeError, ValueError):     # roots, irrational constants
        num, den = sympy.fraction(sympy.cancel(sympy.together(expr)))
    try:
        poly = sympy.Poly(sympy.expand(num - q * den), x)
    except sympy.PolynomialError:
        poly = None
    if poly is None or any(not c.is_polynomial(x) or c.has(x) for c in poly.coeffs()):
        raise SheetError(f"{name} at {req.port} is not a rational function of "
                         f"{req.solve_for} (it depends on it through a root or another "
                         f"function), so it cannot be solved for {req.solve_for}",
                         loc.line, loc.col,
                         hint=f"solve for a symbol that {name} depends on rationally, or give "
                         f"the value under the root a symbol of its own")
    roots, method = polynomial_roots(poly)
    if not roots:
        raise SheetError(f"{name} is a degree-{poly.degree()} polynomial in {req.solve_for}; no "
                         "root in closed form was found", req.loc.line, req.loc.col)
    nominal = dict(ctx.nominal)
    info = ctx.circuit.symbols[x.name]
    q_nom = expr.xreplace(nominal)
    # a measured value infinite (the circuit singular at nominal) or not real has no use as
    # a nominal measurement: the inversion stays symbolic and the record says why
    undefined = q_nom.is_number and not (q_nom.is_finite and q_nom.is_extended_real)
    have_nominal = q_nom.is_number and not undefined
    if have_nominal:
        nominal[q] = q_nom
    steps = [Step(f"Write the measured {name} as a symbol of its own, {q}, equal to its "
                  "closed form.", [derived_equation(q, expr, fq)], kind="inversion"),
             Step(f"Multiply out the denominator (assumed not zero): {q}·({to_text(den)}) = "
                  f"{to_text(num)}, a polynomial of degree {poly.degree()} in {x} that must "
                  "vanish.",       # checked against (closed form - q)·den
                  [Equation(sympy.expand(num - q * den), poly.as_expr(),
                            check=(expr - q) * den)], kind="inversion")]
    listed, chosen = [], None
    for i, r in enumerate(roots):
        how, ok, used = _sub_back(expr, x, r, q)
        v = _num(r.xreplace(nominal)) if have_nominal else None
        real_pos = v is not None and abs(v.imag) <= 1e-20 * max(1.0, abs(v.real)) and v.real > 0
        matches = info.nominal is not None and v is not None and \
            abs(v - float(info.nominal)) <= 1e-9 * abs(float(info.nominal))
        listed.append({"expr": r, "latex": r,
                       "value": v.real if v is not None and real_pos else None,
                       "real_positive_at_nominal": bool(real_pos), "verified": ok,
                       "verified_by": how, "points": used})
        if real_pos and (chosen is None or matches):
            chosen = i
        eq = Equation(x, r)
        back = Equation(q, expr.xreplace({x: r}))
        back.mark(how or "points", ok, used)
        eq.mark(how or "points", ok, used)    # the root is checked by substituting it back
        steps.append(Step(f"Root {i + 1} ({method}); substituting it back into the closed form "
                          f"gives {q} identically.", [eq, back], [req.solve_for],
                          kind="inversion"))
    pick = chosen if chosen is not None else 0
    root = roots[pick]
    for i, d in enumerate(listed):
        d["chosen"] = i == pick
    conditions = []
    rnum, rden = sympy.fraction(sympy.together(root))
    for fac, _m in edge.factor_list(rden)[1]:
        if fac.free_symbols:
            conditions.append(f"{to_text(fac)} != 0")
    for fac, _m in edge.factor_list(den)[1]:
        if fac.free_symbols:
            conditions.append(f"{to_text(fac)} != 0 (the closed form of {name} is defined)")
    rng = valid_range(root, poly, x, q, nominal) if have_nominal else []
    rng_json = [{"low": _end_text(lo, q, "low"), "high": _end_text(hi, q, "high"),
                 "low_value": None if lo[0] is None else float(lo[0]),
                 "high_value": None if hi[0] is None else float(hi[0])} for lo, hi in rng]
    for r in rng_json:
        lo = f"{r['low']} < " if r["low"] is not None else ""
        hi = f" < {r['high']}" if r["high"] is not None else ""
        conditions.append(f"{lo}{q}{hi} (where {x} is real and positive, others at nominal)")
    value = listed[pick]["value"]
    unit = info.unit
    out = analysis.RequestResult(req)
    if undefined:
        out.notes.append(f"{name} has no finite real value at nominal values (its closed form "
                         "is not defined or not real there), so no nominal measurement is "
                         "used: roots and conditions are given symbolically")
    out.quantities[x.name] = analysis.QuantityResult(x.name, root, value, unit, form="inverted")
    if rng and all((e[0] is None) or (e[1] is not None) for lo, hi in rng for e in (lo, hi)):
        out.quantities[x.name].validity = [(lo[1], hi[1]) for lo, hi in rng]
    out.extra.update({
        "measured": {"symbol": q.name, "quantity": name, "unit": fq.unit,
                     "value": float(q_nom) if have_nominal else None,
                     "closed_form": expr},
        "method": method,
        "roots": listed,
        "chosen_root": pick if chosen is not None else None,
        "conditions": conditions,
        "valid_range": rng_json,
    })
    why = "the root that is real and positive at nominal values" if chosen is not None else \
        "no root is real and positive at nominal values (or some symbol has none); root 1 is given"
    steps.append(Step(f"The formula for {x} is {why}. It holds where " +
                      "; ".join(conditions) + "." if conditions else
                      f"The formula for {x} is {why}.", [_chosen(x, root, listed[pick])],
                      [req.solve_for], kind="inversion"))
    for st in steps:
        st.verify()
    out.steps = steps
    return out
