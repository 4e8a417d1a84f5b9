"""Frequency-domain reading of ``s``-dependent results: normalised rational form, poles and
zeros, corner frequency or ω0 and Q, their sensitivities, and a Bode plot at nominal values.

A result ``H(s) = N(s)/D(s)`` is written ``H = K · s^k · (1 + b1 s + ...)/(1 + a1 s + ...)``:
``K`` is the DC gain when ``k = 0`` (with ``k > 0`` the DC gain is 0, with ``k < 0`` the
result has a pole at the origin). For a reduced denominator of degree 1 the corner is
``ωc = 1/a1``; for degree 2, ``1 + a1 s + a2 s^2`` gives ``ω0 = 1/sqrt(a2)`` and
``Q = sqrt(a2)/a1`` (common practice, no source).

>>> R, C = sympy.symbols('R C')
>>> f = rational_form(1/(1 + S*R*C))
>>> f["dc_gain"], f["denominator"], f["w_corner"]
(1, [1, C*R], 1/(C*R))
"""
from __future__ import annotations

import math

import sympy

from derive.circuit.build import S
from derive.derivation.steps import Equation, Figure, Step
from derive.sheet.quantities import QUANTITIES

# request words whose results get the frequency annotation (derive.sheet.quantities): with
# Bode figures, and all of them
BODE_KINDS = tuple(n for n, q in QUANTITIES.items() if q.frequency == "bode")
WRAPPED = tuple(n for n, q in QUANTITIES.items() if q.frequency is not None)
ANNOTATED = WRAPPED


def _coeffs(p):
    """Ascending coefficients of a polynomial in ``s``."""
    return list(reversed(sympy.Poly(p, S).all_coeffs()))


def _low(cs):
    return next(i for i, c in enumerate(cs) if c != 0)


def rational_form(expr) -> dict:
    """The normalised rational function of ``expr`` in ``s`` (sympy values; see module doc)."""
    num, den = sympy.fraction(sympy.cancel(sympy.together(expr)))
    nc, dc = _coeffs(num), _coeffs(den)
    m, p = _low(nc), _low(dc)
    lead = dc[p]
    ncn = [sympy.factor(c / lead) for c in nc]
    dcn = [sympy.factor(c / lead) for c in dc]
    k = m - p
    out = {"numerator": ncn, "denominator": dcn, "s_power": k,
           "k": sympy.factor(nc[m] / lead),
           "dc_gain": (sympy.factor(nc[m] / lead) if k == 0 else (sympy.Integer(0) if k > 0
                                                                   else None)),
           "poles": None, "zeros": None, "w0": None, "Q": None, "w_corner": None}
    red = dcn[p:]                  # reduced denominator 1 + a1 s + ...
    if len(red) == 2:
        out["w_corner"] = sympy.factor(1 / red[1])
    elif len(red) == 3 and red[2] != 0:
        out["w0"] = 1 / sympy.sqrt(sympy.factor(red[2]))
        out["Q"] = sympy.sqrt(sympy.factor(red[2])) / red[1] if red[1] != 0 else None
    if len(dc) - 1 <= 2:
        out["poles"] = _roots(dc)
    if len(nc) - 1 <= 2:
        out["zeros"] = _roots(nc)
    return out


def _roots(cs):
    """Closed-form roots of the ascending coefficients ``cs`` (degree <= 2), with
    multiplicity; roots at the origin first."""
    cs = list(cs)
    while cs and cs[-1] == 0:
        cs.pop()
    out = []
    while cs and cs[0] == 0:
        out.append(sympy.Integer(0))
        cs.pop(0)
    if len(cs) == 2:
        out.append(sympy.factor(-cs[0] / cs[1]))
    elif len(cs) == 3:
        c0, c1, c2 = cs
        disc = sympy.factor(c1**2 - 4 * c0 * c2)
        for sg in (-1, 1):
            out.append((-c1 + sg * sympy.sqrt(disc)) / (2 * c2))
    elif len(cs) > 3:
        return None
    return out


def numeric_roots(cs, nominal):
    """Roots at nominal values (complex numbers), or None where a symbol has no value."""
    import numpy as np
    vals = [c.xreplace(nominal) for c in cs]
    if not all(v.is_number for v in vals):
        return None
    desc = [complex(v) for v in reversed(vals)]
    if not all(math.isfinite(z.real) and math.isfinite(z.imag) for z in desc):
        return None          # a coefficient undefined at nominal values (a pole there)
    while desc and desc[0] == 0:
        desc.pop(0)
    return list(np.roots(desc)) if len(desc) > 1 else []


def sensitivities(expr, nominal) -> dict:
    """Normalised sensitivities ``(x/F) dF/dx`` of ``expr`` to each of its symbols."""
    out = {}
    for x in sorted(expr.free_symbols - {S}, key=str):
        e = sympy.simplify(x / expr * sympy.diff(expr, x))
        v = e.xreplace(nominal)
        out[str(x)] = {"expr": e, "value": float(v) if v.is_number and v.is_real else None}
    return out


def _fnum(e, nominal):
    if e is None:
        return None
    v = e.xreplace(nominal)
    if not v.is_number:
        return None
    v = complex(v)
    return v.real if abs(v.imag) <= 1e-12 * max(1.0, abs(v.real)) else None


def _cplx(z):
    return [float(z.real), float(z.imag)]


def analyse_quantity(q, nominal) -> tuple:
    """(dict for ``extra["frequency"]``, holding sympy expressions that the JSON exporter
    prints; step; numeric (num, den) coefficient lists or None) for one quantity."""
    f = rational_form(q.expr)
    d = {"s_power": f["s_power"], "k": f["k"], "dc_gain": f["dc_gain"],
         "numerator": list(f["numerator"]), "denominator": list(f["denominator"])}
    for key in ("w0", "Q", "w_corner"):
        d[key] = f[key]
        d[key + "_value"] = _fnum(f[key], nominal)
    d["f_corner"] = f["w_corner"] / (2 * sympy.pi) if f["w_corner"] is not None else None
    d["f_corner_value"] = (d["w_corner_value"] / (2 * math.pi)
                           if d["w_corner_value"] is not None else None)
    d["f0_value"] = d["w0_value"] / (2 * math.pi) if d["w0_value"] is not None else None
    for key, cs in (("poles", f["denominator"]), ("zeros", f["numerator"])):
        d[key] = list(f[key]) if f[key] is not None else None
        nr = numeric_roots(cs, nominal)
        d[key + "_value"] = [_cplx(z) for z in nr] if nr is not None else None
    sens = {}
    for key in ("w0", "Q", "w_corner"):
        if f[key] is not None:
            sens[key] = {x: {"normalized": v["expr"], "value": v["value"]}
                         for x, v in sensitivities(f[key], nominal).items()}
    if sens:
        d["sensitivity"] = sens
    eqs = [Equation(sympy.Symbol(q.name), _normal_expr(f), q.expr)]
    ind = _independent(q.expr)
    if f["w0"] is not None:
        eqs += [Equation(sympy.Symbol("omega0"), f["w0"], ind.get("w0")),
                Equation(sympy.Symbol("Q"), f["Q"], ind.get("Q"))
                if f["Q"] is not None else Equation(sympy.Symbol("Q"), sympy.oo)]
    if f["w_corner"] is not None:
        eqs.append(Equation(sympy.Symbol("omega_c"), f["w_corner"], ind.get("w_corner")))
    step = Step(f"{q.name} as a rational function of s, normalised so that the lowest-order "
                "term of the denominator is 1" + (": second order, ω0 and Q read from the denominator"
                                 if f["w0"] is not None else
                                 ": first order, corner frequency ωc" if f["w_corner"] is not None
                                 else ""), [e for e in eqs if e.rhs is not sympy.oo],
                kind="frequency")
    num = [c.xreplace(nominal) for c in f["numerator"]]
    den = [c.xreplace(nominal) for c in f["denominator"]]
    coeffs = None
    if all(c.is_number and c.is_finite and c.is_extended_real for c in num + den) \
            and any(c != 0 for c in den):
        coeffs = ([float(c) for c in num], [float(c) for c in den])
    return d, step, coeffs


def _independent(expr) -> dict:
    """ω0, Q and ωc again, from Taylor coefficients of the denominator at s = 0 taken by
    differentiation (not from the polynomial coefficients that :func:`rational_form`
    reads): the independent values the displayed ones are checked against."""
    try:
        num, den = sympy.fraction(sympy.cancel(sympy.together(expr)))
        deg = sympy.degree(den, S)
        c = [sympy.diff(den, S, k).subs(S, 0) / sympy.factorial(k) for k in range(deg + 1)]
        p = next(i for i, x in enumerate(c) if x != 0)
        red = [x / c[p] for x in c[p:]]
    except Exception:
        return {}
    out = {}
    if len(red) == 2 and red[1] != 0:
        out["w_corner"] = 1 / red[1]
    elif len(red) == 3 and red[2] != 0:
        out["w0"] = 1 / sympy.sqrt(red[2])
        if red[1] != 0:
            out["Q"] = sympy.sqrt(red[2]) / red[1]
    return out


def _normal_expr(f):
    n = sum(c * S**i for i, c in enumerate(f["numerator"]))
    dd = sum(c * S**i for i, c in enumerate(f["denominator"]))
    return sympy.Mul(n, sympy.Pow(dd, -1), evaluate=False)


def bode_data(num, den, points=400, f_range=None):
    """Frequencies (Hz), magnitude (dB) and unwrapped phase (degrees) of num/den (ascending
    coefficients) on the imaginary axis."""
    import numpy as np
    if f_range is None:
        f_range = _range(num, den)
    f = np.logspace(math.log10(f_range[0]), math.log10(f_range[1]), points)
    jw = 2j * np.pi * f
    h = np.polyval(list(reversed(num)), jw) / np.polyval(list(reversed(den)), jw)
    mag = 20 * np.log10(np.maximum(np.abs(h), 1e-300))
    phase = np.degrees(np.unwrap(np.angle(h)))
    return f, mag, phase


def _range(num, den):
    import numpy as np
    ws = []
    for cs in (num, den):
        desc = list(reversed(cs))
        while desc and desc[0] == 0:
            desc.pop(0)
        if len(desc) > 1:
            ws += [abs(r) for r in np.roots(desc) if abs(r) > 0]
    if not ws:
        return (1.0, 1e6)
    lo, hi = min(ws) / (2 * math.pi), max(ws) / (2 * math.pi)
    return (lo / 100, hi * 100)


def bode_figure(name, caption, num, den, unit=None) -> Figure:
    """A Bode plot at nominal values of ``num(s)/den(s)`` (ascending numeric coefficients);
    drawn by :func:`derive.export.plots.draw` over the range of :func:`bode_data`."""
    return Figure(name, caption, "bode", {"num": list(num), "den": list(den), "unit": unit})


def annotate(ctx, req, result):
    """Add ``extra["frequency"]`` (and Bode figures) for every ``s``-dependent quantity of a
    ``find Q`` result whose Q is in :data:`ANNOTATED` (Bode figures for :data:`BODE_KINDS`);
    any other result is returned as it is. Run on every result by
    :func:`derive.analyses.run.run`."""
    if req.statement != "find" or req.analysis is not None or req.quantity not in ANNOTATED:
        return result
    figures = req.quantity in BODE_KINDS
    nominal = ctx.nominal
    freq = {}
    for name, q in result.quantities.items():
        if q.expr is None or S not in q.expr.free_symbols:
            continue
        d, step, coeffs = analyse_quantity(q, nominal)
        step.verify()
        freq[name] = d
        result.steps.append(step)
        if figures and coeffs is not None:
            result.extra.setdefault("figures", []).append(bode_figure(
                f"bode_{_slug(req.text)}_{name}", f"Bode plot of {name} ({req.text}) at "
                "nominal values", *coeffs, unit=q.unit))
    if freq:
        result.extra["frequency"] = freq
    return result


def _slug(text):
    return "".join(ch if ch.isalnum() else "_" for ch in text).strip("_")

