"""``find noise at P from F1 to F2``: the output noise density of port P's open-circuit
voltage, its rms over the band, and the ranked contributions.

The sources and transfers are :mod:`derive.forms.noise`; the band integrals
:mod:`derive.forms.band`; the steps :mod:`derive.derivation.noise_steps`. The result's
``extra["noise"]`` is the JSON of SHEET.md section 5 (``density``, ``rms``, ``band``,
``contributions`` with ``rms`` and ``share``), with added keys: ``mean_square`` (exact closed
form where found, value, error bound, method), ``temperature``, ``noise_bandwidth`` (where
meaningful: a density that is finite at DC and falls at least as 1/f^2), ``noiseless`` and,
when the sheet also asks ``find gain from S to P``, ``input_referred``.
"""
from __future__ import annotations

import math
from fractions import Fraction

import sympy
from flint import fmpq_poly

from derive.derivation.nodal_steps import random_solve_check
from derive.derivation.noise_steps import density_step, nodal_of, source_steps
from derive.derivation.port_steps import require_verified
from derive.derivation.steps import Equation, Figure, Step
from derive.errors import SheetError
from derive.forms import band as bands
from derive.forms import noise as forms
from derive.forms.results import RequestResult
from derive.sheet.units import format_exact, format_value

TOP = 4             # contributions drawn beside the total


def _f(x: Fraction) -> float:
    return float(x)


def _band_loc(req):
    loc = req.name_locs.get("band", req.loc)
    return loc.line, loc.col


def integrals(ctx, req, model) -> list:
    """Per contribution: (mean square lo, hi, closed form or None, method) at nominal
    values over the band, or None where a value is missing."""
    F1, F2 = (Fraction(x) for x in req.band)
    out = []
    for con in model.contributions:
        if con.S_value is None or con.P is None:
            out.append(None)
            continue
        pole = bands.has_pole_in_band(con.Q, F1, F2)
        if pole is not None and not con.P.is_zero():
            raise SheetError(f"find noise: the contribution of {con.source.name} is unbounded "
                             f"at {format_value(pole, 'Hz', ctx.options.digits)}, inside the band (a pole "
                             "on the frequency axis: an undamped resonance, or an integrator "
                             "at 0 Hz)", *_band_loc(req),
                             hint="start the band above the pole, or add the loss that "
                                  "damps it")
        bi = bands.band_integral(con.P, con.Q, F1, F2)
        s0 = con.S_value
        cf = None if bi.closed_form is None else \
            sympy.Rational(s0.numerator, s0.denominator) * bi.closed_form
        out.append({"lo": s0 * bi.lo, "hi": s0 * bi.hi, "closed_form": cf,
                    "method": bi.method, "checked": bi.antiderivative_checked or
                    bi.method.startswith("exact"),
                    "value": float(s0) * bi.value})
    return out


def _nominal_total(model):
    """(P, Q) of the whole density at nominal values (sum of S_k P_k/Q_k), or None."""
    P, Q = fmpq_poly([0]), fmpq_poly([1])
    for con in model.contributions:
        if con.S_value is None or con.P is None:
            return None
        s0 = con.S_value
        p = con.P * fmpq_poly([forms.fmpq(s0.numerator, s0.denominator)])
        P, Q = P * con.Q + p * Q, Q * con.Q
        g = P.gcd(Q)
        if not P.is_zero() and g.degree() > 0:
            P, Q = P // g, Q // g
    return P, Q


def noise_bandwidth(model):
    """(NEB in Hz, integral 0..oo, density at DC, closed form of the integral) where
    meaningful, else (None, reason)."""
    pq = _nominal_total(model)
    if pq is None:
        return None, "some symbol has no nominal value"
    P, Q = pq
    if P.is_zero():
        return None, "the density is zero"
    if Q.degree() < P.degree() + 2:
        return None, ("the density does not fall off at high frequency (white or rising), so "
                      "its integral to infinity diverges")
    if Q[0] == 0 or P[0] == 0:
        return None, "the density is zero or unbounded at 0 Hz"
    if bands.has_pole_in_band(Q, Fraction(0), sympy.oo) is not None:
        return None, "the density has a pole on the frequency axis"
    bi = bands.band_integral(P, Q, Fraction(0), sympy.oo)
    s_dc = Fraction(int(P[0].p), int(P[0].q)) / Fraction(int(Q[0].p), int(Q[0].q))
    return (bi.value / float(s_dc), bi, s_dc), None


def _figure(req, model, per, total_pq):
    import numpy as np
    F1, F2 = (float(x) for x in req.band)
    lo = F1 if F1 > 0 else F2 * 1e-4
    f = np.logspace(math.log10(lo) - 1, math.log10(F2) + 1, 300)
    w = 2 * np.pi * f

    def ev(P, Q, s0):
        p = [float(c) for c in reversed(P.coeffs())] if not P.is_zero() else [0.0]
        q = [float(c) for c in reversed(Q.coeffs())]
        return float(s0) * np.polyval(p, w) / np.polyval(q, w)
    parts = {}
    for con in model.contributions:
        if con.S_value is not None and con.P is not None and not con.P.is_zero():
            parts[con.source.name] = ev(con.P, con.Q, con.S_value)
    if not parts:
        return None
    total = sum(parts.values())
    weight = {c.source.name: (p["value"] if p else 0.0) for c, p in zip(model.contributions, per)}
    ranked = sorted(parts, key=lambda n: -weight.get(n, 0.0))[:TOP]
    data = {"f": [float(x) for x in f], "total": [float(math.sqrt(max(x, 0))) for x in total],
            "parts": {n: [float(math.sqrt(max(x, 0))) for x in parts[n]] for n in ranked},
            "band": [F1, F2]}
    return Figure(f"noise_{req.port}", f"Output noise density at {req.port} ({req.text}), "
                  "at nominal values: the total and the largest contributions", "noise", data)


def input_referred(ctx, req, model, total, noise, steps):
    """The noise referred to the input of each ``find gain from S to P`` on the same port:
    S_in(f) = S_out(f)/|G(j 2 pi f)|^2 and its rms over the band (at nominal values)."""
    from derive.sheet import kinds
    gains = [r for r in ctx.circuit.requests if r.statement == "find" and
             r.quantity == "gain" and r.analysis is None and r.port == req.port]
    out = {}
    F1, F2 = (Fraction(x) for x in req.band)
    pq = _nominal_total(model)
    for g in gains:
        if g.source in out:
            continue
        ratio = ctx.solver(req.loc).vth(ctx.port(req.port), only=g.source)
        if ratio.is_zero:
            continue
        unit = "V^2/Hz" if kinds.kind(ctx.circuit.element(g.source).kind).source == \
            "voltage" else "A^2/Hz"
        G = forms.edge.to_sympy(ratio)
        m2 = forms.mag2(G)
        entry = {"density": {"expr": total / m2, "unit": unit}, "rms": None,
                 "unit": unit.split("^")[0]}
        gm = forms.nominal_mag2(ratio, ctx.nominal)
        note = None
        if pq is not None and gm is not None and not gm[0].is_zero():
            P, Q = pq[0] * gm[1], pq[1] * gm[0]
            if bands.has_pole_in_band(Q, F1, F2) is not None:
                note = "the gain is zero inside the band: no finite input-referred rms"
            else:
                bi = bands.band_integral(P, Q, F1, F2)
                entry["rms"] = math.sqrt(max(bi.value, 0.0))
                entry["method"] = bi.method
        if note:
            entry["note"] = note
        out[g.source] = entry
        sym_in, sym_out = sympy.Symbol(f"S_in_{g.source}"), sympy.Symbol("S_out")
        gain = sympy.Symbol(f"G_{g.source}")
        nodal = nodal_of(ctx)
        plus, minus = ctx.port(req.port)
        geq = Equation(gain, G)
        geq.mark("system", *random_solve_check(nodal, nodal.v(plus) - nodal.v(minus),
                                               nodal.rhs_for(only=g.source), G))
        eqs = [geq, Equation(sym_in, sym_out / sympy.Abs(gain) ** 2, definition=True)]
        shown = "" if entry["rms"] is None else \
            f"; over the band its rms is {format_value(entry['rms'], entry['unit'], ctx.options.digits)}"
        steps.append(Step(f"Referred to the input {g.source} (the sheet also asks for the gain "
                          f"from {g.source} to {req.port}): the output density divided by "
                          f"|G(j2πf)|², in {unit.replace('^2', '²')}" + shown +
                          (f" ({note})" if note else "") + ".", eqs, [g.source], kind="noise"))
    if out:
        noise["input_referred"] = out


def answer(ctx, req) -> RequestResult:
    model = forms.contributions(ctx, req)
    out = RequestResult(req)
    total = sympy.Add(*[c.density for c in model.contributions])
    steps, nodal, form, vectors = source_steps(ctx, req, model)
    shown = sympy.Add(*[(c.source.shown if c.source.shown is not None else c.source.density)
                        * c.mag2 for c in model.contributions])
    steps.append(density_step(ctx, req, model, shown, nodal, form, vectors))
    per = integrals(ctx, req, model)
    F1, F2 = req.band
    band = [float(F1), float(F2)]
    noise = {"density": {"expr": total, "latex": total, "unit": "V^2/Hz"}, "rms": None,
             "band": band, "contributions": {},
             "temperature": {"celsius": float(model.temperature_c),
                             "kelvin": float(model.temperature_c + forms.KELVIN_OFFSET)},
             "noiseless": [{"part": n, "why": why} for n, why in model.noiseless]}
    valued = all(p is not None for p in per)
    D = ctx.options.digits
    if valued and per:
        ms_lo = sum(p["lo"] for p in per)
        ms_hi = sum(p["hi"] for p in per)
        ms = sum(p["value"] for p in per)
        closed = all(p["closed_form"] is not None for p in per)
        cf = sympy.factor_terms(sympy.Add(*[p["closed_form"] for p in per])) if closed else None
        rms = math.sqrt(ms) if ms > 0 else 0.0
        noise["rms"] = rms
        method = "exact closed form (antiderivative checked exactly, value inside a proved " \
                 "ball-arithmetic enclosure)" if closed else \
            "ball-arithmetic quadrature (python-flint acb.integral): proved enclosure"
        noise["mean_square"] = {"value": ms, "unit": "V^2", "low": _f(ms_lo), "high": _f(ms_hi),
                                "error_bound": _f((ms_hi - ms_lo) / 2),
                                "closed_form": cf, "method": method}
        rows = [["source", "rms over the band", "share of the mean square", "integral"]]
        ranked = sorted(zip(model.contributions, per), key=lambda cp: -cp[1]["value"])
        for con, p in ranked:
            share = p["value"] / ms if ms > 0 else 0.0
            noise["contributions"][con.source.name] = {
                "rms": math.sqrt(max(p["value"], 0.0)), "share": share,
                "density": {"expr": con.density, "unit": "V^2/Hz"}, "method": p["method"]}
            rows.append([con.source.name, format_value(math.sqrt(max(p["value"], 0.0)), "V", D),
                         f"{format_value(100 * share, None, D)} %", p["method"]])
        eqs = []
        if closed:
            v2 = sympy.Symbol("v_n") ** 2
            eq = Equation(v2, cf)
            # exact: each antiderivative's derivative cancels against its integrand, and
            # the value lies inside the proved enclosure of the integral
            eq.mark("exact", all(p["checked"] for p in per))
            eqs.append(eq)
        bound = format_value(_f((ms_hi - ms_lo) / 2), "V²", D) if ms_hi > ms_lo else "0"
        steps.append(Step(
            f"Mean square over the band {format_exact(Fraction(F1), 'Hz')} to "
            f"{format_exact(Fraction(F2), 'Hz')} at nominal values, the integral of the "
            "density over f: " + ("an exact closed form (partial fractions, arctan and log "
                                  "terms; each antiderivative checked exactly by "
                                  "differentiation, its value inside a proved enclosure)"
                                  if closed else "by ball-arithmetic quadrature with a proved "
                                  f"error bound of {bound}") +
            f"; mean square {format_value(ms, 'V²', D)}, so the rms noise is "
            f"{format_value(rms, 'V', D)}. Ranked contributions (shares of the mean "
            "square add to 100 %):", eqs, kind="noise", table=rows))
        neb, why = noise_bandwidth(model)
        if neb is not None:
            b_hz, bi, s_dc = neb
            noise["noise_bandwidth"] = {"value": b_hz, "unit": "Hz",
                                        "density_at_dc": float(s_dc),
                                        "mean_square_0_to_inf": bi.value,
                                        "method": bi.method}
            steps.append(Step(
                f"Noise-equivalent bandwidth (the width of an ideal brick-wall band at the "
                f"DC density {format_value(math.sqrt(float(s_dc)), 'V/√Hz', D)} with "
                f"the same mean square as the whole density from 0 Hz to infinity): "
                f"{format_value(b_hz, 'Hz', D)} ({bi.method}; mean square 0 to ∞ "
                f"{format_value(bi.value, 'V²', D)}, rms "
                f"{format_value(math.sqrt(bi.value), 'V', D)}).", [], kind="noise"))
        else:
            noise["noise_bandwidth"] = None
            noise["noise_bandwidth_note"] = why
            steps.append(Step(f"No noise-equivalent bandwidth is given: {why}.", [],
                              kind="noise"))
        input_referred(ctx, req, model, total, noise, steps)
        fig = _figure(req, model, per, None)
        if fig is not None:
            out.extra["figures"] = [fig]
    else:
        out.notes.append("find noise: some symbols have no nominal value, so the density is "
                         "given in closed form only (no rms, no shares)")
        for con in model.contributions:
            noise["contributions"][con.source.name] = {
                "rms": None, "share": None,
                "density": {"expr": con.density, "unit": "V^2/Hz"}, "method": None}
    if model.noiseless:
        out.notes.append("taken as noiseless: " + ", ".join(n for n, _ in model.noiseless))
    out.extra["noise"] = noise
    require_verified(steps, req)
    out.steps = steps
    return out
