"""``find budget of Q``: initial tolerances and temperature drift together.

The tolerance box of :mod:`derive.analyses.tolerance` gets one more variable, the
temperature offset ``dT = T - T0`` over the sheet's range (every part at the same
temperature): a part x with a tc becomes ``x (1 + tc dT)``, where x itself varies over its
tolerance. The extremes over box × range are then taken by the same machinery as ``find
tolerance`` (:func:`derive.analyses.tolerance.extremes`): corners where Q is proven monotone
in every variable (interval arithmetic on the derivatives, or the exact coefficient signs),
exact univariate extremes where exactly one variable is not proven monotone, and otherwise
corners plus bounded local searches, the method string saying which.

The RSS figure is first order, from the derivatives at nominal values (T = T0): the
initial tolerances are independent, ``c_x = |dQ/dx| |x0| t_x``; the temperature is one
variable shared by all parts, so the drift terms of the parts are added with their signs
into one temperature term ``c_T = |sum_x dQ/dx x0 tc_x| max|dT|``, and
``rss = sqrt(sum_x c_x^2 + c_T^2)``. The ranked table lists every contribution: the initial
tolerance of each part and the drift of each part (``|dQ/dx x0 tc_x| max|dT|``) with its
share of the sum of the contributions column. The linear worst case adds the tolerance terms and the one temperature term.

JSON: ``"budget": {"nominal", "low", "high", "rss", "method", "worst_case_linear",
"temperature_term", "range"}``, ``"budget_contributions": [{"part", "source", "value",
"share"}]`` (ranked), ``"budget_by_quantity"``.
"""
from __future__ import annotations

import math
from fractions import Fraction

import sympy

from derive.analyses import drift as _drift
from derive.analyses import sensitivity as _sens
from derive.analyses import tolerance as _tol
from derive.derivation.steps import Equation, Step
from derive.errors import SheetError
from derive.forms.results import Context, RequestResult
from derive.sheet.units import format_value


def temperature_symbol(ctx) -> sympy.Symbol:
    """The temperature offset's symbol, a name no circuit symbol has."""
    name = "dT"
    while name in ctx.circuit.symbols:
        name = "_" + name
    return sympy.Symbol(name)


def with_temperature(form, tcs: dict, tau) -> "_sens.Form":
    """``form`` with every part x that has a tc replaced by ``x (1 + tc tau)``."""
    sub = {x: x * (1 + sympy.Rational(tc.numerator, tc.denominator) * tau)
           for x, tc in tcs.items()}
    return _sens.Form([(q, e.xreplace(sub)) for q, e in form.defs], form.final.xreplace(sub))


def budget_of(ctx: Context, a, tcs: dict, req) -> tuple:
    """(JSON dict, contributions, steps) of one analysed quantity."""
    name, unit = a.q.name, a.q.unit
    d = ctx.options.digits

    def v(x):
        return format_value(x, unit, d)
    if a.nominal_value is None:
        missing = sorted(str(x) for x in a.form.base_symbols() if x not in ctx.nominal)
        raise SheetError(f"the budget of {name} needs nominal values of: {', '.join(missing)}",
                         req.loc.line, req.loc.col)
    q0 = _tol._real(a.nominal_value)
    base = a.form.base_symbols()
    tcs = {x: tc for x, tc in tcs.items() if x in base}
    t0, ta, tb = _drift.temperature_offsets(ctx)
    tau = temperature_symbol(ctx)
    if ta == tb:            # no range: every part at T0, the box of tolerances alone
        tcs = {}
    form = with_temperature(a.form, tcs, tau) if tcs else a.form
    box = _tol.box_of(ctx, base)
    if tcs and ta != tb:
        box[tau] = (sympy.Rational(ta + tb) / 2, sympy.Rational(tb - ta) / 2)
    nominal = dict(ctx.nominal)
    nominal[tau] = sympy.Integer(0)
    dforms = {}
    for x in box:
        dforms[x], _ = _sens.derivative(form, x, set(ctx.circuit.symbols) | {str(tau)})
    lo, hi, method, mono = _tol.extremes(form, dforms, nominal, box, ctx.options.mc_seed)
    # first-order contributions from the derivatives at nominal values (T = T0)
    dval = {s.symbol: s.d_value for s in a.sens}
    span = float(max(abs(ta), abs(tb)))
    rows, tol_sq, slope = [], 0.0, sympy.Integer(0)
    for x in sorted(base, key=str):
        dv = dval.get(x)
        if dv is None:
            continue
        info = ctx.circuit.symbols.get(str(x))
        if x in box and x != tau:
            c = abs(float(dv)) * float(box[x][1])
            tol_sq += c * c
            rows.append({"part": str(x), "source": "initial tolerance",
                         "detail": f"±{float(info.tolerance) * 100:g} %", "value": c})
        if x in tcs:
            term = dv * nominal[x] * sympy.Rational(tcs[x].numerator, tcs[x].denominator)
            slope += term
            rows.append({"part": str(x), "source": "drift",
                         "detail": f"{float(tcs[x] * 10**6):g} ppm/K over ±{span:g} K",
                         "value": abs(float(term)) * span})
    c_t = abs(float(slope)) * span
    rss = math.sqrt(tol_sq + c_t * c_t)
    table_sum = sum(r["value"] for r in rows)
    for r in rows:
        r["share"] = r["value"] / table_sum if table_sum else 0.0
    # linear worst case: the tolerances one by one, the temperature as the one shared term
    linear = sum(r["value"] for r in rows if r["source"] == "initial tolerance") + c_t
    rows.sort(key=lambda r: (-r["value"], r["part"], r["source"]))
    out = {"nominal": q0, "unit": unit, "low": lo, "high": hi, "rss": rss, "method":
           f"extremes over the tolerance box × temperature range ({float(t0 + ta):g} °C to "
           f"{float(t0 + tb):g} °C, every part at the same temperature, temperature as the "
           f"variable {tau} = T − T0): {method}; rss: first order, from the derivatives at "
           "nominal values, tolerances independent, the parts' drift terms added with their "
           "signs into one temperature term",
           "worst_case_linear": {"low": q0 - linear, "high": q0 + linear},
           "temperature_term": c_t, "range": [float(t0 + ta), float(t0 + tb)],
           "monotone": {str(x): m for x, m in mono.items()}}
    # steps
    eqs = []
    if tcs:
        dtau, _ = _sens.derivative(form, tau, set(ctx.circuit.symbols) | {str(tau)})
        at = dtau.value(nominal)
        if at is not None:
            e = Equation(sympy.Symbol(f"d{name}/dT"), sympy.nsimplify(slope),
                         check=sympy.Rational(at))
            eqs.append(e)
    table = [["part", "source", "amount", f"contribution ({unit or '-'})", "share of the column sum"]]
    for r in rows:
        table.append([r["part"], r["source"], r["detail"], format_value(r["value"], None, d),
                      f"{format_value(r['share'] * 100, None, d)} %"])
    sub = ", ".join(f"{x} → {x}·(1 + tc·{tau})" for x in sorted(map(str, tcs))) or "none"
    steps = [
        Step(f"Tolerance and temperature together: each toleranced part varies over its "
             f"tolerance, and {tau} = T − T0 over {float(ta):g} K to {float(tb):g} K, every "
             f"part at the same temperature; parts with a tc: {sub}. At T0, d{name}/dT = "
             f"Σ d{name}/dx·x0·tc_x (checked against the derivative of {name} with the "
             f"temperature variable, exactly).", eqs, [str(x) for x in tcs], kind="budget"),
        Step(f"First-order contributions at nominal values, ranked (the parts' drift terms "
             f"share one temperature and add with their signs: together ± {v(c_t)}). "
             f"RSS (first order, independent tolerances and the one temperature term): "
             f"± {v(rss)}, so {v(q0 - rss)} to {v(q0 + rss)}.",
             kind="budget", table=table),
        Step(f"Extreme values over the tolerance box and the temperature range: {v(lo)} to "
             f"{v(hi)} (nominal {v(q0)}). Method: {method}.", kind="budget"),
    ]
    for s in steps:
        s.verify()
    return _tol._clean(out), rows, steps


def answer(ctx: Context, req) -> RequestResult:
    res = RequestResult(req)
    tcs = _drift.tc_of_symbols(ctx, req)
    by, contrib = {}, {}
    for a in _sens.analysed(ctx, req):
        try:
            out, rows, steps = budget_of(ctx, a, tcs, req)
        except (_tol.Unbounded, ZeroDivisionError):
            raise SheetError(f"the budget of {a.q.name} cannot be given: it is not finite "
                             "everywhere on the tolerance box and temperature range",
                             req.loc.line, req.loc.col) from None
        by[a.q.name] = out
        contrib[a.q.name] = rows
        res.steps.extend(steps)
    first = next(iter(by))
    res.extra["budget"] = by[first]
    res.extra["budget_of"] = first
    res.extra["budget_contributions"] = contrib[first]
    res.extra["budget_by_quantity"] = by
    return res
