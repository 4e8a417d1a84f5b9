"""``find drift of Q``: Q over the temperature range, every part at the same temperature.

A part with a temperature coefficient (``tc N ppm/K``) has the value
``x(T) = x0 (1 + tc (T - T0))`` (SHEET.md section 5); parts without one keep their nominal
value. With ``t = T - T0`` (kelvin, the same as a difference in degrees Celsius) Q becomes a
rational function ``N(t)/D(t)`` of the one variable t with rational coefficients, built
exactly from the derived closed form (python-flint polynomials: every part's nominal value
and tc are exact rationals). Its extremes over ``[Tlow - T0, Thigh - T0]`` are taken exactly
by :func:`derive.solver.univariate.extremes`: the ends and the real roots of the
derivative's numerator ``N'D - ND'`` inside the range (isolated exactly; an irrational
critical point is enclosed to 2^-60 and its value enclosed likewise). The drift coefficient
``(1/Q) dQ/dT`` at T0 is ``N'(0)/N(0) - D'(0)/D(0)``, exact, shown in ppm/K.

Independent checks (the step equations): Q(T) against the original closed form (or
sequence) evaluated exactly at random temperatures; the derivative's numerator against
sympy's derivative of Q(T); the values at the extremes against an exact evaluation of the
original form with every part at its value at that temperature; and the drift coefficient
against ``sum_x S_x tc_x`` from the normalized sensitivities at nominal values (exact).

JSON (``RequestResult.extra``): ``"drift": {"nominal", "low", "high", "at_low", "at_high",
"ppm_per_K", "method", "reference", "range", "tc_ppm_per_K", "critical"}`` for the
request's quantity (the first member of ``thevenin``/``norton``), and
``"drift_by_quantity"`` for every member. Temperatures are in degrees Celsius.

Tools shared with :mod:`derive.analyses.budget`: :func:`tc_of_symbols`,
:func:`temperature_offsets`.
"""
from __future__ import annotations

import random
from fractions import Fraction

import flint
import sympy

from derive.solver.numbers import fmpq_of, fraction_of
from derive.analyses import sensitivity as _sens
from derive.circuit.build import S as LAPLACE_S
from derive.derivation.steps import Equation, Step
from derive.errors import SheetError
from derive.forms import select as forms
from derive.forms.results import Context, RequestResult
from derive.forms.text import to_text
from derive.sheet import quantities
from derive.solver import univariate
from derive.sheet.units import DEFAULT_DIGITS, format_exact, format_value

T = sympy.Symbol("T")
PPM = Fraction(10 ** 6)


def _loc(req, key=None):
    loc = req.name_locs.get(key, req.loc) if key else req.loc
    return loc.line, loc.col


def tc_of_symbols(ctx: Context, req) -> dict:
    """Symbol -> tc (Fraction per kelvin) for every element with a ``tc`` attribute.

    The tc applies to the element's value; that value must be a single symbol (its own, or
    the symbol a ``with`` mapping gives it). An element whose value is an expression of
    other symbols, or two elements that give one symbol different tcs, is a located error."""
    out, where = {}, {}
    for e in ctx.circuit.elements:
        tc = getattr(e.origin, "tc", None) if e.origin is not None else None
        if tc is None:
            continue
        loc = (getattr(e.origin, "attr_locs", {}) or {}).get("tc", e.loc)
        if not isinstance(e.value, sympy.Symbol):
            raise SheetError(f"the tc of {e.name} applies to its value, but its value is the "
                             f"expression {to_text(e.value)}: give the tc to a part whose value "
                             "is a single symbol", loc.line, loc.col)
        x = e.value
        if x in out and out[x] != tc:
            raise SheetError(f"{e.name} gives {x} the tc {float(tc * PPM):g} ppm/K but "
                             f"{where[x]} gave it {float(out[x] * PPM):g} ppm/K",
                             loc.line, loc.col)
        out[x] = tc
        where[x] = e.name
    return out


def temperature_offsets(ctx: Context) -> tuple:
    """(T0, t_low, t_high) in degrees Celsius / kelvin, exact: t = T - T0 over the range."""
    sheet = ctx.circuit.sheet
    t0 = Fraction(sheet.nominal_temperature)
    lo, hi = (Fraction(v) for v in sheet.temperature_range)
    return t0, lo - t0, hi - t0




def univariate_in_t(n, d, syms, values: dict, tcs: dict):
    """(N, D) as ``fmpq_poly`` in t: the flint polynomials ``n``, ``d`` over ``syms`` with
    every symbol x at ``values[x] * (1 + tcs[x] t)`` (tcs missing: the constant value)."""
    one = flint.fmpq_mpoly_ctx.get(("t",), "lex")
    (t,) = one.gens()
    args = []
    for x in syms:
        x0 = fmpq_of(values[x])
        tc = tcs.get(x)
        args.append(one.constant(x0) + (x0 * fmpq_of(tc)) * t if tc else one.constant(x0))

    def poly(p):
        q = p.compose(*args, ctx=one)
        coeffs = {}
        for (k,), c in q.to_dict().items():
            coeffs[k] = c
        top = max(coeffs) if coeffs else 0
        return flint.fmpq_poly([coeffs.get(k, 0) for k in range(top + 1)])
    return poly(n), poly(d)


def _poly_expr(p: flint.fmpq_poly, var) -> sympy.Expr:
    return sum((sympy.Rational(int(p[k].p), int(p[k].q)) * var ** k
                for k in range(p.degree() + 1)), sympy.Integer(0))


def _where(pt) -> Fraction:
    """A candidate point of :class:`univariate.Extremes` as a rational (an enclosure's
    midpoint for an irrational critical point)."""
    if isinstance(pt, univariate.RealRoot):
        return pt.exact if pt.exact is not None else (pt.lo + pt.hi) / 2
    return fraction_of(pt)


def _value(ext) -> Fraction:
    return ext.value if ext.value is not None else (ext.lo + ext.hi) / 2


def _deg(t, digits: int = DEFAULT_DIGITS) -> str:
    """A temperature: an end of the range as entered, a critical point to ``digits``."""
    return f"{float(t):.{digits}g} °C"


class Drift:
    """The exact drift of one quantity: N, D in t, extremes, coefficient."""

    def __init__(self, ctx, a, tcs, req):
        self.name, self.unit = a.q.name, a.q.unit
        self.form = a.form
        nominal = ctx.nominal
        base = sorted(a.form.base_symbols(), key=str)
        missing = [str(x) for x in base if x not in nominal]
        if missing:
            raise SheetError(f"the drift of {self.name} needs nominal values of: "
                             f"{', '.join(missing)}", *_loc(req))
        r = _sens.rational(a.form.final, list(a.form.defs))
        if r is None:
            raise SheetError(f"the drift of {self.name} needs a rational closed form; this one "
                             "is not (roots or other functions)", *_loc(req))
        n, d, syms = r
        self.syms = syms
        self.nominal = {x: nominal[x] for x in syms}
        self.tcs = {x: tc for x, tc in tcs.items() if x in syms}
        self.N, self.D = univariate_in_t(n, d, syms, self.nominal, self.tcs)
        if self.D.is_zero() or self.D(0) == 0:
            raise SheetError(f"{self.name} is not finite at the nominal values", *_loc(req))
        self.t0, self.a, self.b = temperature_offsets(ctx)
        try:
            self.ext = univariate.extremes(self.N, self.D, self.a, self.b)
        except univariate.Unbounded:
            raise SheetError(f"the drift of {self.name} cannot be given: a denominator "
                             "vanishes inside the temperature range", *_loc(req)) from None
        self.q0 = fraction_of(self.N(0) / self.D(0))
        n0, d0 = fraction_of(self.N(0)), fraction_of(self.D(0))
        n1, d1 = fraction_of(self.N.derivative()(0)), fraction_of(self.D.derivative()(0))
        self.coefficient = (n1 / n0 - d1 / d0) if n0 != 0 else None     # 1/K, exact
        # independent: sum_x S_x tc_x from the multivariate derivatives at nominal
        point = [fmpq_of(self.nominal[x]) for x in syms]
        nv, dv = n(*point), d(*point)
        total = Fraction(0)
        for i, x in enumerate(syms):
            if x in self.tcs and nv != 0:
                dq = (n.derivative(i)(*point) * dv - nv * d.derivative(i)(*point)) / (dv * dv)
                s = fraction_of(self.nominal[x]) * fraction_of(dq) / fraction_of(nv / dv)
                total += s * self.tcs[x]
        self.coefficient_check = total if nv != 0 else None
        self.low = self.ext.minimum
        self.high = self.ext.maximum
        self.at_low = self.t0 + _where(self.low.at[0])
        self.at_high = self.t0 + _where(self.high.at[0])
        self.critical = [self.t0 + _where(c) for c in self.ext.critical
                         if _where(c) not in (self.a, self.b)]

    def q_at(self, t: Fraction) -> Fraction:
        """Q at temperature offset t from the original form (exact, independent of N/D)."""
        point = {x: sympy.Rational(v) * (1 + sympy.Rational(self.tcs.get(x, 0)) *
                                         sympy.Rational(t))
                 for x, v in self.nominal.items()}
        v = self.form.value(point)
        return None if v is None else fraction_of(v)

    def method(self) -> str:
        if not self.tcs:
            return "no part of this quantity has a tc: it does not drift"
        k = len(self.critical)
        return ("exact: Q(T) is a rational function of T; extremes at the ends of the range "
                "or at the real roots of the numerator of dQ/dT inside it "
                f"({k} critical point{'s' if k != 1 else ''} inside), isolated exactly")

    def json(self) -> dict:
        ppm = float(self.coefficient * PPM) if self.coefficient is not None else None
        return {"nominal": float(self.q0), "unit": self.unit, "low": float(_value(self.low)),
                "high": float(_value(self.high)), "at_low": float(self.at_low),
                "at_high": float(self.at_high), "ppm_per_K": ppm,
                "method": self.method(), "reference": float(self.t0),
                "range": [float(self.t0 + self.a), float(self.t0 + self.b)],
                "tc_ppm_per_K": {str(x): float(tc * PPM) for x, tc in self.tcs.items()},
                "critical": [float(c) for c in self.critical],
                "exact": {"nominal": str(self.q0), "ppm_per_K":
                          str(self.coefficient * PPM) if self.coefficient is not None else None}}

    def steps(self, digits: int = DEFAULT_DIGITS) -> list:
        name, unit = self.name, self.unit

        def v_(x):
            return format_value(float(x), unit, digits)
        t0 = self.t0
        rows = [["part", "x0", "tc (ppm/K)", f"x at {_deg(t0 + self.a)}",
                 f"x at {_deg(t0 + self.b)}"]]
        for x in self.syms:
            tc = self.tcs.get(x)
            x0 = fraction_of(self.nominal[x])
            rows.append([str(x), format_exact(x0), f"{float(tc * PPM):g}" if tc else "0",
                         format_value(float(x0 * (1 + (tc or 0) * self.a)), None, digits),
                         format_value(float(x0 * (1 + (tc or 0) * self.b)), None, digits)])
        s1 = Step(f"Every part at the same temperature T, from {_deg(t0 + self.a)} to "
                  f"{_deg(t0 + self.b)} (T0 = {_deg(t0)}); a part with a temperature "
                  "coefficient has x(T) = x0·(1 + tc·(T − T0)), the others keep x0.",
                  [], [str(x) for x in self.tcs], kind="drift", table=rows)
        # Q(T) as an exact rational function of T, checked against the original form
        tt = T - sympy.Rational(t0)
        qt = _poly_expr(self.N, tt) / _poly_expr(self.D, tt)
        qt_show = sympy.factor(sympy.cancel(qt))
        e1 = Equation(sympy.Symbol(f"{name}(T)"), qt_show)
        rnd, used, ok = random.Random(7), 0, True
        for _ in range(12):
            t = Fraction(rnd.randint(-10 ** 6, 10 ** 6), rnd.randint(1, 10 ** 4))
            want = self.q_at(t)
            if want is None or self.D(fmpq_of(t)) == 0:
                continue
            ok = ok and fraction_of(self.N(fmpq_of(t)) / self.D(fmpq_of(t))) == want
            used += 1
            if used == 4:
                break
        e1.mark("points", ok and used > 0, used)
        c = self.N.derivative() * self.D - self.N * self.D.derivative()
        e2 = Equation(sympy.Symbol("N_dT"), sympy.expand(_poly_expr(c, tt)),
                      check=sympy.cancel(sympy.diff(qt, T) * _poly_expr(self.D, tt) ** 2))
        s2 = Step(f"With the parts' values at T, {name} is a rational function of T alone "
                  "(built exactly from the derived closed form and checked against it at "
                  "random temperatures); its extremes over the range are at the ends or where "
                  f"the numerator N_dT of d{name}/dT vanishes.", [e1, e2], [], kind="drift")
        cands = [["where", "T", f"{name}"]]
        eqs = []
        for label, tt_ in (("low end", self.a), ("high end", self.b)):
            v = self.q_at(tt_)
            cands.append([label, _deg(t0 + tt_), v_(v)])
        for cT in self.critical:
            v = fraction_of(self.N(fmpq_of(cT - t0)) / self.D(fmpq_of(cT - t0)))
            cands.append(["critical point", _deg(cT, digits), v_(v)])
        for label, ext, at in (("min", self.low, self.at_low), ("max", self.high, self.at_high)):
            if ext.value is not None:
                e = Equation(sympy.Symbol(f"{name}_{label}"), sympy.Rational(ext.value),
                             check=sympy.Rational(self.q_at(at - t0)))
                eqs.append(e)
        crit = (f"{len(self.critical)} critical point(s) inside the range, at "
                + ", ".join(_deg(cT, digits) for cT in self.critical)) if self.critical else \
            "no critical point inside the range (monotone in T)"
        s3 = Step(f"Candidates: the ends and {crit}. Extremes: {v_(_value(self.low))} "
                  f"at {_deg(self.at_low, digits)} and {v_(_value(self.high))} at "
                  f"{_deg(self.at_high, digits)} (each checked by an exact evaluation of the original "
                  "form at that temperature).", eqs, [], kind="drift", table=cands)
        steps = [s1, s2, s3]
        if self.coefficient is not None:
            e = Equation(sympy.Symbol(f"TC_{name}"), sympy.Rational(self.coefficient * PPM),
                         check=(sympy.Rational(self.coefficient_check * PPM)
                                if self.coefficient_check is not None else None))
            steps.append(Step(f"Drift coefficient at T0: (1/{name})·d{name}/dT = "
                              f"{format_value(float(self.coefficient * PPM), None, digits)} "
                              f"ppm/K (TC_{name} below, in ppm/K, exact: "
                              f"N'(0)/N(0) − D'(0)/D(0)), checked against Σ S_x·tc_x from the "
                              "normalized sensitivities at nominal values.", [e], [],
                              kind="drift"))
        for s in steps:
            s.verify()
        return steps


def _check(req):
    if not quantities.accepts(req.analysis, req.quantity):
        raise SheetError(f"the {req.analysis} of '{req.quantity}' is not offered: ask for one "
                         "scalar quantity", *_loc(req))


def analysed(ctx, req) -> list:
    """The request's quantities as :class:`~derive.analyses.sensitivity.Analysed`-like
    objects with forms (no sensitivities are needed for the drift)."""
    _check(req)
    out = []
    for q in forms.port_quantities(_sens.full_context(ctx), req):
        form = _sens.form_of(q)
        if LAPLACE_S in form.base_symbols():
            raise SheetError(f"{q.name} depends on the Laplace variable s: the drift of a "
                             "frequency-dependent result is not available", *_loc(req))
        out.append(_sens.Analysed(q, form, form.value(ctx.nominal)))
    return out


def answer(ctx: Context, req) -> RequestResult:
    res = RequestResult(req)
    tcs = tc_of_symbols(ctx, req)
    by = {}
    for a in analysed(ctx, req):
        d = Drift(ctx, a, tcs, req)
        by[a.q.name] = d.json()
        res.steps.extend(d.steps(ctx.options.digits))
        if not d.tcs:
            res.notes.append(f"No part of {a.q.name} has a temperature coefficient (tc): "
                             "it does not drift.")
    first = next(iter(by))
    res.extra["drift"] = by[first]
    res.extra["drift_of"] = first
    res.extra["drift_by_quantity"] = by
    return res
