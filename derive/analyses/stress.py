"""``find stress``: every rated element's worst case against its derated rating.

For every element with ``rated P W`` (its absorbed DC power) or ``rated V V`` (the DC voltage
across it; a resistor may give both) the quantity is taken exactly (the power as ``find
power in X`` gives it, the voltage from the same solver factors), and its worst case is
found over the box of tolerances AND the temperature range of the sheet's ``temperature``
line: every part is at the same temperature T, a part with ``tc`` drifts as
``x(T) = x0·(1 + tc·(T − T0))`` (``x0`` anywhere in its tolerance band), parts without tc do
not drift. T is one more coordinate of the box, so the extremes are those of
:func:`derive.analyses.tolerance.extremes` (corners where monotonicity is proven, an exact
univariate extreme where one coordinate is not, a bounded interior search otherwise); the
record says which method found each worst case, and where (which parts at which end, and T).

The worst case is the maximum power, or the largest |voltage|; the limit is rating × derating
(the ``derating`` line, default 100 %); the verdict is ``worst <= limit``. ``derive check``
counts a failed verdict like a failed claim (:func:`check_lines`, exit status 1).

JSON (``RequestResult.extra["stress"]``): one entry per rated quantity, keyed by the element
name (a resistor's voltage rating, when it also has a power rating, under ``"X (voltage)"``):
``{"element", "quantity": "power" | "voltage", "unit", "nominal", "worst", "rating",
"limit", "ok", "margin" (limit − worst), "use" (worst/limit), "corner" {part: value, "T":
°C}, "at" (the corner in words), "method"}``.
"""
from __future__ import annotations

import sympy

from derive.analyses import sensitivity as sens
from derive.analyses import tolerance
from derive.derivation.steps import Equation, Step
from derive.errors import SheetError
from derive.forms import power as power_forms
from derive.forms import select as forms
from derive.forms.results import RequestResult
from derive.sheet.model import Request
from derive.sheet.units import DEFAULT_DIGITS, format_exact, format_value
from derive.solver import convert as edge

CAUTION = ("Caution: these figures are a DC calculation against the ratings entered in the "
           "sheet. Ratings depend on ambient temperature, mounting, airflow, altitude and "
           "pulse or surge conditions; check every part against its datasheet (derating "
           "curves, pulse load and working-voltage limits), and where mains or high energy is "
           "involved follow the applicable standards and licensed practice.")

UNITS = {"power": "W", "voltage": "V"}


def rated(circuit) -> list:
    """(element, quantity, rating) for every rating given in the sheet, in sheet order."""
    out = []
    for e in circuit.elements:
        o = e.origin
        if o is None or e.internal:
            continue
        if getattr(o, "power_rating", None) is not None:
            out.append((e, "power", o.power_rating))
        if getattr(o, "voltage_rating", None) is not None:
            out.append((e, "voltage", o.voltage_rating))
    return out


def _rat(x) -> sympy.Rational:
    return sympy.Rational(x.numerator, x.denominator)


def _fresh_t(circuit) -> sympy.Symbol:
    name = "T"
    while name in circuit.symbols or name == "s":
        name += "_"
    return sympy.Symbol(name)


def drift_map(circuit, T, T0) -> tuple:
    """({Symbol: x·(1 + tc·(T − T0))} for every element with a tc whose value is its own
    symbol, notes for tc's that cannot be applied)."""
    subs, notes = {}, []
    for e in circuit.elements:
        tc = getattr(e.origin, "tc", None) if e.origin is not None else None
        if tc is None or e.internal:
            continue
        x = sympy.Symbol(e.key)
        if e.value != x:
            notes.append(f"the tc of {e.name} is not applied: its value is an expression of "
                         "other symbols, which other parts may share")
            continue
        subs[x] = x * (1 + _rat(tc) * (T - _rat(T0)))
    return subs, notes


def quantity_form(ctx, fctx, req, e, quantity) -> sens.Form:
    """The exact DC power (or voltage) of element ``e`` as a Form in the circuit's symbols."""
    if quantity == "power":
        sub = Request("find", "power", f"find power in {e.name}", req.loc, element=e.name)
        q = forms.port_quantities(fctx, sub)[0]
        return sens.form_of(q)
    v, _i = power_forms.element_factors(fctx, e.name, req, "find stress")
    return sens.Form([], edge.to_sympy(v))


def _drifted(form: sens.Form, subs: dict) -> sens.Form:
    if not subs:
        return form
    return sens.Form([(q, x.xreplace(subs)) for q, x in form.defs], form.final.xreplace(subs))


def _num(v) -> float:
    return float(v)


def _corner_words(point: dict, box: dict, T, circuit, digits: int = DEFAULT_DIGITS) -> str:
    """Where a worst case lies, in words: each part at its low/high end or inside, and T."""
    parts = []
    for x in sorted(box, key=str):
        if x == T:
            continue
        c, h = box[x]
        v = point.get(x)
        if v is None:
            continue
        info = circuit.symbols.get(str(x))
        unit = info.unit if info else None
        name = info.display if info else str(x)
        if isinstance(v, sympy.Basic) and v == c + h:
            parts.append(f"{name} high (+{float(h / abs(c)) * 100:g} %)")
        elif isinstance(v, sympy.Basic) and v == c - h:
            parts.append(f"{name} low (−{float(h / abs(c)) * 100:g} %)")
        elif isinstance(v, sympy.Basic) and v == c:
            parts.append(f"{name} nominal")
        else:
            parts.append(f"{name} = {format_value(float(v), unit, digits)} (inside its band)")
    if T in point:
        parts.append(f"T = {_deg(point[T])}")
    return ", ".join(parts) if parts else "nominal (no toleranced or drifting part)"


def _drift_derivative(base, form, x, subs, T) -> sens.Form:
    """A Form with the sign of d(drifted Q)/dx everywhere on the box: for a part, dQ/dy of the
    undrifted Q at the drifted values (the chain rule's other factor, 1 + tc·(T − T0), is
    positive, so the sign is the same, and it is free of x exactly when Q is affine in y);
    for T itself the drifted form's own derivative."""
    if x == T or base.defs:
        return _derivative(form, x)
    d = _derivative(base, x)
    return sens.Form([], d.final.xreplace(subs)) if subs else d


def _poly_expr(p, syms) -> sympy.Expr:
    """A flint polynomial as an expanded sympy expression in ``syms``."""
    terms = []
    for exps, c in p.to_dict().items():
        t = sympy.Rational(int(c.p), int(c.q))
        for x, k in zip(syms, exps):
            if k:
                t *= x ** k
        terms.append(t)
    return sympy.Add(*terms)


def _derivative(form, x) -> sens.Form:
    """dQ/dx as a Form: exactly, as (n'd - nd')/d² of the cancelled flint ratio n/d of a
    single rational expression; through :func:`derive.analyses.sensitivity.derivative`
    otherwise."""
    r = None if form.defs else sens.rational(form.final)
    if r is None or x not in r[2]:
        return sens.derivative(form, x)[0]
    n, d, syms = r
    i = syms.index(x)
    num = n.derivative(i) * d - n * d.derivative(i)
    return sens.Form([], _poly_expr(num, syms) / _poly_expr(d, syms) ** 2)


def proven_signs(ctx, base, nominal, box, subs, T, trange, T0) -> tuple:
    """({coordinate: +1 or -1}, how) for coordinates of the box in which the drifted quantity
    is proven strictly monotone.

    A part's drifted value is y = x·(1 + tc·(T − T0)) with a positive factor, so the drifted
    quantity moves with x as the undrifted one moves with y: the sign of dQ/dy is proven
    exactly (:func:`derive.analyses.tolerance.exact_signs`, coefficient signs of the exact
    numerator and denominator) over the hull of every y's band (its tolerance band widened
    by the drift at both ends of the temperature range). Then dQ/dT = Σ dQ/dy·x·tc: where
    every drifting part's term has the same proven sign, so has dQ/dT."""
    Tlo, Thi = (_rat(t) for t in trange)
    hull = {}
    for x in base.base_symbols():
        if x not in box and x not in subs:
            continue
        c, h = box.get(x, (nominal[x], sympy.Integer(0)))
        ends = [sympy.Integer(1)]
        if x in subs:
            f = subs[x] / x
            ends = [f.xreplace({T: Tlo}), f.xreplace({T: Thi})]
        if min(ends) <= 0:
            return {}, ""
        lo, hi = (c - h) * min(ends), (c + h) * max(ends)
        hull[x] = ((lo + hi) / 2, (hi - lo) / 2)
    if not hull:
        return {}, ""
    try:
        dy = tolerance.exact_signs(base, nominal, hull)
    except (ArithmeticError, ValueError, TypeError):
        return {}, ""
    signs = {x: sg for x, sg in dy.items() if x in box}
    if T in box:
        terms = set()
        for x in subs:
            if x not in base.base_symbols():
                continue
            tc = subs[x].diff(T) / x
            terms.add(None if x not in dy else dy[x] * (1 if tc > 0 else -1))
        if len(terms) == 1 and None not in terms:
            signs[T] = terms.pop()
    if not signs:
        return {}, ""
    return signs, ("monotonicity in " + ", ".join(sorted(map(str, signs), key=str)) +
                   " proven on the closed form without drift over the hull of each drifted "
                   "band (signs of the coefficients of its exact numerator and denominator"
                   + ("; for T: every drifting part's term of dQ/dT = Σ dQ/dy·x·tc has one "
                      "sign" if T in signs else "") + ")")


def analyse(ctx, req, e, quantity, rating, subs, T, temp) -> dict:
    """The stress entry of one rated quantity (plus internal keys for the steps)."""
    c = ctx.circuit
    fctx = sens.full_context(ctx)
    T0, (Tlo, Thi) = temp
    base = quantity_form(ctx, fctx, req, e, quantity)
    form = _drifted(base, subs)
    nominal = dict(ctx.nominal)
    nominal[T] = _rat(T0)
    missing = sorted(str(x) for x in form.base_symbols() if x not in nominal)
    if missing:
        raise SheetError(f"the stress of {e.name} needs nominal values of: {', '.join(missing)}",
                         req.loc.line, req.loc.col)
    box = tolerance.box_of(ctx, form.base_symbols())
    if Thi > Tlo and T in form.base_symbols():
        box[T] = ((_rat(Tlo) + _rat(Thi)) / 2, (_rat(Thi) - _rat(Tlo)) / 2)
    signs, proof = proven_signs(ctx, base, nominal, box, subs, T, (Tlo, Thi), T0)
    # derivatives only where monotonicity is still to be decided; a proven coordinate's
    # derivative is not used by the search beyond "not identically zero", so its proven
    # sign stands in for it
    dforms = {x: (sens.Form([], sympy.Integer(signs[x])) if x in signs
                  else _drift_derivative(base, form, x, subs, T)) for x in box}
    at: dict = {}
    try:
        lo, hi, method, mono = tolerance.extremes(form, dforms, nominal, box, at=at,
                                                  signs=signs)
        q0 = form.value(nominal)
    except (tolerance.Unbounded, ZeroDivisionError):
        raise SheetError(f"the stress of {e.name} cannot be given: its {quantity} is not finite "
                         "everywhere on the box of tolerances and temperatures",
                         req.loc.line, req.loc.col) from None
    if quantity == "power":
        worst, side = hi, "high"
    else:
        worst, side = (hi, "high") if abs(hi) >= abs(lo) else (abs(lo), "low")
    point = {**{x: v for x, v in nominal.items() if x in form.base_symbols()},
             **at.get(side, {})}
    exact = None
    if all(isinstance(v, sympy.Basic) and v.is_Rational for v in point.values()):
        exact = form.value(point)
        if exact is not None and quantity == "voltage":
            exact = abs(exact)
    limit = _rat(rating) * _rat(c.sheet.derating_factor)
    if exact is not None:
        ok = bool(exact <= limit)
    else:
        ok = bool(worst <= float(limit))
    if box and T in box:
        method = ("over the box of tolerances and the temperature range, T being one more "
                  "coordinate of the box; " + method)
    if proof:
        method += "; " + proof
    unit = UNITS[quantity]
    q0f = float(q0) if quantity == "power" else abs(float(q0))
    wf = float(exact) if exact is not None else float(worst)
    entry = {"element": e.name, "quantity": quantity, "unit": unit, "nominal": q0f,
             "worst": wf, "rating": float(rating), "limit": float(limit), "ok": ok,
             "margin": float(limit) - wf, "use": wf / float(limit),
             "corner": {str(x): float(v) for x, v in point.items()
                        if x in box},
             "at": _corner_words(point, box, T, c, ctx.options.digits), "method": method}
    internal = {"form": form, "point": point, "exact": exact, "box": box, "mono": mono,
                "subs": subs, "limit": limit, "q0": q0, "base": base}
    return entry, internal


def _deg(t) -> str:
    """A temperature in °C with a true minus sign (no line break after it)."""
    return f"{float(t):g} °C".replace("-", "−")


def _eng(v, unit, digits: int = DEFAULT_DIGITS) -> str:
    return format_value(float(v), unit, digits)


def _entered(v, unit) -> str:
    """An entered value (a rating, a nominal) with the digits it was written with."""
    from fractions import Fraction
    try:
        return format_exact(Fraction(v) if not isinstance(v, float) else Fraction(repr(v)),
                            unit)
    except (TypeError, ValueError):
        return format_value(float(v), unit)


def _verify_worst(ctx, req, e, quantity, internal, T) -> Equation | None:
    """The worst value at its corner, recomputed independently: the undrifted closed form at
    the drifted part values x0·(1 + tc·(T − T0)), exactly."""
    exact, point, subs = internal["exact"], internal["point"], internal["subs"]
    if exact is None:
        return None
    drifted = {x: (subs[x].xreplace(point) if x in subs else v) for x, v in point.items()
               if x != T}
    again = internal["base"].value({**ctx.nominal, **drifted})
    if again is None:
        return None
    if quantity == "voltage":
        again = abs(again)
    if again != exact:
        raise StressFailed(f"internal check failed in the stress of {e.name}: the worst value "
                           f"{exact} is {again} when recomputed without drift")
    internal["checked"] = "exact"
    if len(str(exact)) > SHOWN_DIGITS:       # shown in words, as the value steps do
        return None
    name = "P" if quantity == "power" else "|v|"
    eq = Equation(sympy.Symbol(f"{name}_{e.name.replace('.', '_')},worst"), exact)
    eq.mark("exact", True)
    return eq


SHOWN_DIGITS = 24       # an exact worst value up to this long is shown as an equation


class StressFailed(AssertionError):
    """An exact recomputation of a worst case disagreed (a bug in derive)."""


def answer(ctx, req) -> RequestResult:
    res = RequestResult(req)
    c = ctx.circuit
    items = rated(c)
    sheet = c.sheet
    T0, (Tlo, Thi), k = sheet.nominal_temperature, sheet.temperature_range, \
        sheet.derating_factor
    if not items:
        res.notes.append("no element has a rating ('rated 0.25 W' on a resistor, 'rated 50 V' "
                         "on a resistor, capacitor or inductor): there is nothing to check")
        res.extra["stress"] = {}
        st = Step("No rated element: give ratings with 'rated P W' or 'rated V V' after an "
                  "element's value.", kind="stress")
        st.verify()
        res.steps = [st]
        return res
    T = _fresh_t(c)
    subs, notes = drift_map(c, T, T0)
    res.notes += notes
    res.notes.append(CAUTION)
    out, internals = {}, {}
    for e, quantity, rating in items:
        key = e.name if quantity == "power" or not any(
            x is e and q == "power" for x, q, _ in items) else f"{e.name} (voltage)"
        entry, internal = analyse(ctx, req, e, quantity, rating, subs, T, (T0, (Tlo, Thi)))
        out[key] = entry
        internals[key] = internal
    res.extra["stress"] = out
    res.steps = _steps(ctx, req, out, internals, T, (T0, Tlo, Thi, k), subs)
    return res


def _steps(ctx, req, out, internals, T, temp, subs) -> list:
    c = ctx.circuit
    d = ctx.options.digits
    T0, Tlo, Thi, k = temp
    drift = ", ".join(f"{x} {float(c.element(str(x)).origin.tc) * 1e6:g} ppm/K"
                      for x in sorted(subs, key=str) if str(x) in _names(c)) or "none"
    rng = (f"from {_deg(Tlo)} to {_deg(Thi)} (nominal {_deg(T0)})"
           if Thi > Tlo else f"at {_deg(T0)} only (no temperature range given)")
    intro = Step(f"Stress of every rated element at DC: the absorbed power (passive sign "
                 f"convention) or the voltage across it, at its worst over the tolerances and "
                 f"the temperature range {rng}; every part at the same temperature T, a part "
                 f"with a temperature coefficient drifting as x(T) = x0·(1 + tc·(T − T0)) "
                 f"(here: {drift}); parts without one do not drift. Limit = rating × derating "
                 f"({float(k) * 100:g} %).", kind="stress")
    rows = [["element", "quantity", "nominal", "worst", "rating", "limit", "margin", "use",
             "verdict"]]
    for key, s in out.items():
        u = s["unit"]
        rows.append([s["element"], s["quantity"], _eng(s["nominal"], u, d),
                     _eng(s["worst"], u, d), _entered(s["rating"], u),
                     _entered(s["limit"], u), _eng(s["margin"], u, d),    # limit: exact
                     f"{s['use'] * 100:.1f} %",        # a share of the limit: one decimal
                     "ok" if s["ok"] else "EXCEEDED"])
    n_bad = sum(1 for s in out.values() if not s["ok"])
    table = Step(("Every rated quantity within its limit." if not n_bad else
                  f"{n_bad} rated quantit{'y exceeds' if n_bad == 1 else 'ies exceed'} "
                  "the limit.") + " Worst cases:", kind="stress", table=rows)
    steps = [intro, table]
    for key, s in out.items():
        it = internals[key]
        what = "power" if s["quantity"] == "power" else "|voltage|"
        eqs = []
        eq = _verify_worst(ctx, req, c.element(s["element"]), s["quantity"], it, T)
        if eq is not None:
            eqs.append(eq)
        mono_rows = [["part", "nominal", "tolerance", "tc", "on the box"]]
        for x in sorted(it["box"], key=str):
            if x == T:
                mono_rows.append(["T", _deg(T0), f"{_deg(Tlo)[:-3]} to {_deg(Thi)}", "",
                                  it["mono"].get(x, "")])
                continue
            info = c.symbols.get(str(x))
            el = _element_of(c, str(x))
            tc = getattr(el.origin, "tc", None) if el is not None and el.origin else None
            mono_rows.append([info.display if info else str(x),
                              _entered(info.nominal, info.unit) if info and info.nominal is not None
                              else "", f"±{float(info.tolerance) * 100:g} %"
                              if info and info.tolerance else "",
                              f"{float(tc) * 1e6:g} ppm/K" if tc is not None else "",
                              it["mono"].get(x, "")])
        txt = (f"{key}: worst {what} {_eng(s['worst'], s['unit'], d)} (nominal "
               f"{_eng(s['nominal'], s['unit'], d)}; limit {_entered(s['limit'], s['unit'])}: "
               f"{'ok' if s['ok'] else 'EXCEEDED'}), at {s['at']}. Method: {s['method']}."
               + (" The worst value was recomputed exactly from the closed form without "
                  "drift at the drifted part values of that corner, and agrees."
                  if it.get("checked") else ""))
        s["worst_check"] = it.get("checked")
        steps.append(Step(txt, eqs, [s["element"]], kind="stress",
                          table=mono_rows if len(mono_rows) > 1 else None))
    for st in steps:
        st.verify()
    return steps


def _names(circuit) -> set:
    return {e.key for e in circuit.elements}


def _element_of(circuit, key):
    for e in circuit.elements:
        if e.key == key:
            return e
    return None


def check_lines(record) -> tuple:
    """(lines, ok): one ``PASS``/``FAIL`` line per rated quantity of every ``find stress``."""
    lines, ok = [], True
    d = getattr(record, "digits", None) or DEFAULT_DIGITS
    for r in record.results:
        if r.request.quantity != "stress" or r.request.statement != "find":
            continue
        for key, s in (r.extra.get("stress") or {}).items():
            ok = ok and bool(s["ok"])
            u = s["unit"]
            label = f"{key} ({s['quantity']})" if key == s["element"] else key
            lines.append(f"{'PASS' if s['ok'] else 'FAIL'} line {r.request.loc.line}: stress "
                         f"of {label}: worst {_eng(s['worst'], u, d)} "
                         f"{'<=' if s['ok'] else '>'} limit {_entered(s['limit'], u)}")
    return lines, ok
