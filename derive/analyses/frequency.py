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
from derive.solver import rational
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


#: the normalised numerator and denominator are also multiplied out into coefficient lists
#: when the expansion has at most this many terms (or is of order 2 or less in s); a larger
#: product (a cascade of sections) is given by its factors only
EXPAND_LIMIT = 300


def rational_form(expr) -> dict:
    """The normalised rational function of ``expr`` in ``s`` (sympy values; see module doc).

    Factored in python-flint (:func:`derive.solver.rational.factored`: each sum of ``expr``
    factored on its own, a product of sections never expanded), each factor in ``s``
    normalised to 1 at s = 0; sympy only for the results. Besides the coefficient lists
    (``None`` for a product too large to multiply out, see :data:`EXPAND_LIMIT`), the
    result holds ``factors``: ``{"k", "s_power", "numerator", "denominator"}`` with one
    ``{"coefficients", "power", "order"}`` per factor in ``s``, and ``sections``: ω0 and Q
    (order 2) or ωc (order 1) of each denominator factor when there are several. Poles and
    zeros are given in closed form when every factor is of order 2 or less. Expressions
    that are not rational functions (roots) take sympy's route."""
    try:
        F = rational.factored(expr, extra=[S])
    except (rational.NotPolynomial, ZeroDivisionError):
        return _rational_form_sympy(expr)
    i = F.symbols.index(S)
    ctx = F.ctx
    one = ctx.constant(1)
    sgen = ctx.gens()[i]
    kn, kd = ctx.constant(F.c), one               # K, built up as a ratio
    s_power, num_f, den_f = 0, [], []
    for p, e in F.factors:
        deg = int(p.degrees()[i])
        if deg == 0:
            kn, kd = (kn * p ** e, kd) if e > 0 else (kn, kd * p ** (-e))
        elif p == sgen:
            s_power += e
        else:
            cs = rational.split(p, S, F)         # cs[0] != 0: p is irreducible and not s
            kn, kd = (kn * cs[0] ** e, kd) if e > 0 else (kn, kd * cs[0] ** (-e))
            red = [rational.Rational(c, cs[0], F.symbols, ctx) for c in cs]
            (num_f if e > 0 else den_f).append({"p": p, "power": abs(e), "order": deg,
                                                "red": red})
    K = rational.Rational(kn, kd, F.symbols, ctx)
    Ks = K.to_sympy()
    for fac in num_f + den_f:
        fac["coefficients"] = [r.to_sympy() for r in fac["red"]]
    out = {"s_power": s_power, "k": Ks,
           "dc_gain": Ks if s_power == 0 else (sympy.Integer(0) if s_power > 0 else None),
           "numerator": None, "denominator": None,
           "poles": None, "zeros": None, "w0": None, "Q": None, "w_corner": None,
           "_reduced": None, "_num_factors": num_f, "_den_factors": den_f,
           "factors": None, "sections": None}
    order_n = sum(f["order"] * f["power"] for f in num_f)
    order_d = sum(f["order"] * f["power"] for f in den_f)
    terms = max(_terms(num_f), _terms(den_f))
    if terms <= EXPAND_LIMIT or (order_n <= 2 and order_d <= 2):
        nr = [K * r for r in _product(num_f, F)]
        dr = _product(den_f, F)                   # the reduced denominator 1 + a1 s + ...
        out["_reduced"] = dr
        zn, zd = max(s_power, 0), max(-s_power, 0)
        zero = sympy.Integer(0)
        out["numerator"] = [zero] * zn + [r.to_sympy() for r in nr]
        out["denominator"] = [zero] * zd + [r.to_sympy() for r in dr]
        if len(dr) == 2:
            out["w_corner"] = dr[1].inverse().to_sympy()
        elif len(dr) == 3 and not dr[2].is_zero():
            a2 = dr[2].to_sympy()
            out["w0"] = 1 / sympy.sqrt(a2)
            out["Q"] = sympy.sqrt(a2) / out["denominator"][zd + 1] if not dr[1].is_zero() \
                else None
    if len(num_f) + len(den_f) > 1 or any(f["power"] > 1 for f in num_f + den_f):
        out["factors"] = {"k": Ks, "s_power": s_power,
                          "numerator": [_shown(f) for f in num_f],
                          "denominator": [_shown(f) for f in den_f]}
    if sum(f["power"] for f in den_f) > 1:
        out["sections"] = [_section(f) for f in den_f]
    out["poles"] = _factor_roots(den_f, max(-s_power, 0))
    out["zeros"] = _factor_roots(num_f, max(s_power, 0))
    return out


def _terms(facs) -> int:
    n = 1
    for f in facs:
        n *= len(f["p"]) ** f["power"]
    return n


def _product(facs, like) -> list:
    """Ascending s-coefficients (:class:`~derive.solver.rational.Rational`) of the product
    of the normalised factors ``facs`` (1 where there is none)."""
    ctx = like.ctx
    p = ctx.constant(1)
    for f in facs:
        p = p * f["p"] ** f["power"]
    cs = rational.split(p, S, like)
    return [rational.Rational(c, cs[0], like.symbols, ctx) for c in cs]


def _shown(f) -> dict:
    return {"coefficients": list(f["coefficients"]), "power": f["power"], "order": f["order"]}


def _section(f) -> dict:
    """ω0 and Q (order 2) or ωc (order 1) of one normalised denominator factor."""
    red, cs = f["red"], f["coefficients"]
    d = {"order": f["order"], "power": f["power"], "coefficients": list(cs),
         "w0": None, "Q": None, "w_corner": None, "_red": red}
    if f["order"] == 1:
        d["w_corner"] = red[1].inverse().to_sympy()
    elif f["order"] == 2:
        d["w0"] = 1 / sympy.sqrt(cs[2])
        d["Q"] = sympy.sqrt(cs[2]) / cs[1] if not red[1].is_zero() else None
    d["poles"] = _roots_exact(red) if f["order"] <= 2 else None
    return d


def _factor_roots(facs, at_origin: int):
    """Closed-form roots of a product of normalised factors (each repeated as often as its
    power) and ``at_origin`` roots at 0; None where a factor is of order 3 or more."""
    out = [sympy.Integer(0)] * at_origin
    for f in facs:
        if f["order"] > 2:
            return None
        out += _roots_exact(f["red"]) * f["power"]
    return out


def _roots_exact(cs):
    """:func:`_roots` on flint coefficients: the root of a linear factor and the
    discriminant of a quadratic taken in flint."""
    cs = list(cs)
    while cs and cs[-1].is_zero():
        cs.pop()
    out = []
    while cs and cs[0].is_zero():
        out.append(sympy.Integer(0))
        cs.pop(0)
    if len(cs) == 2:
        out.append((-cs[0] / cs[1]).to_sympy())
    elif len(cs) == 3:
        c0, c1, c2 = cs
        disc = (c1 * c1 + -4 * c0 * c2).to_sympy()
        b, a = c1.to_sympy(), c2.to_sympy()
        for sg in (-1, 1):
            out.append((-b + sg * sympy.sqrt(disc)) / (2 * a))
    elif len(cs) > 3:
        return None
    return out


def _rational_form_sympy(expr) -> dict:
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
           "poles": None, "zeros": None, "w0": None, "Q": None, "w_corner": None,
           "_reduced": None, "factors": None, "sections": None}
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
        out[str(x)] = _sens_entry(e, nominal)
    return out


def _sens_entry(e, nominal) -> dict:
    v = e.xreplace(nominal)
    return {"expr": e, "value": float(v) if v.is_number and v.is_real else None}


def reduced_sensitivities(key: str, red, nominal) -> dict:
    """Normalised sensitivities of ω0, Q or ωc from those of the reduced denominator's
    coefficients a1, a2 (flint :class:`~derive.solver.rational.Rational`), exactly:
    S(ωc) = -S(a1), S(ω0) = -S(a2)/2, S(Q) = S(a2)/2 - S(a1) (ωc = 1/a1, ω0 = a2^(-1/2),
    Q = a2^(1/2)/a1)."""
    a1 = red[1]
    a2 = red[2] if len(red) > 2 else None
    syms = sorted({x for r in red[1:] for x in r.to_sympy().free_symbols} - {S}, key=str)
    half = sympy.Rational(1, 2)
    out = {}
    for x in syms:
        s1 = a1.sensitivity(x)
        if key == "w_corner":
            e = (-s1).to_sympy()
        elif key == "w0":
            e = (a2.sensitivity(x) * half).to_sympy() * -1
        else:
            e = (a2.sensitivity(x) * half + -s1).to_sympy()
        out[str(x)] = _sens_entry(e, nominal)
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
         "numerator": _list(f["numerator"]), "denominator": _list(f["denominator"])}
    _characteristics(d, f, nominal)
    for key, roots in (("poles", f["poles"]), ("zeros", f["zeros"])):
        d[key] = list(roots) if roots is not None else None
    coeffs = _numeric(f, nominal)
    if f["denominator"] is None:                  # a product not multiplied out
        d["poles_value"], d["zeros_value"] = _numeric_roots(f, nominal)
    else:
        for key, cs in (("poles", f["denominator"]), ("zeros", f["numerator"])):
            nr = numeric_roots(cs, nominal)
            d[key + "_value"] = [_cplx(z) for z in nr] if nr is not None else None
    sens = {}
    for key in ("w0", "Q", "w_corner"):
        if f[key] is not None:
            got = reduced_sensitivities(key, f["_reduced"], nominal) \
                if f["_reduced"] is not None else sensitivities(f[key], nominal)
            sens[key] = {x: {"normalized": v["expr"], "value": v["value"]}
                         for x, v in got.items()}
    if sens:
        d["sensitivity"] = sens
    if f["factors"] is not None:
        d["factors"] = f["factors"]
    eqs = [Equation(sympy.Symbol(q.name), _normal_expr(f), q.expr)]
    ind = _independent(q.expr) if f["w0"] is not None or f["w_corner"] is not None else {}
    if f["w0"] is not None:
        eqs += [Equation(sympy.Symbol("omega0"), f["w0"], ind.get("w0")),
                Equation(sympy.Symbol("Q"), f["Q"], ind.get("Q"))
                if f["Q"] is not None else Equation(sympy.Symbol("Q"), sympy.oo)]
    if f["w_corner"] is not None:
        eqs.append(Equation(sympy.Symbol("omega_c"), f["w_corner"], ind.get("w_corner")))
    if f["sections"] is not None:
        d["sections"] = []
        for j, sec in enumerate(f["sections"], 1):
            d["sections"].append(_section_out(sec, nominal))
            # independent: Taylor coefficients of this factor by differentiation
            ind = _independent(1 / sum(c * S**n for n, c in enumerate(sec["coefficients"])))
            if sec["w0"] is not None:
                eqs.append(Equation(sympy.Symbol(f"omega_0,{j}"), sec["w0"], ind.get("w0")))
                if sec["Q"] is not None:
                    eqs.append(Equation(sympy.Symbol(f"Q_{j}"), sec["Q"], ind.get("Q")))
            elif sec["w_corner"] is not None:
                eqs.append(Equation(sympy.Symbol(f"omega_c,{j}"), sec["w_corner"],
                                    ind.get("w_corner")))
    text = (f"{q.name} as a rational function of s, normalised so that the lowest-order "
            "term of the denominator is 1")
    if f["sections"] is not None:
        text += (f": the denominator factors into {len(f['sections'])} sections (exact "
                 "factorisation of the polynomials); ω0 and Q, or the corner ωc, of each "
                 "section read from its factor")
    elif f["numerator"] is not None and f["denominator"] is not None:
        text += ": " + _orders(f)
    step = Step(text, [e for e in eqs if e.rhs is not sympy.oo], kind="frequency")
    return d, step, coeffs


def _list(cs):
    return list(cs) if cs is not None else None


def _characteristics(d, f, nominal):
    """ω0, Q, ωc and their numbers at nominal values into ``d``."""
    for key in ("w0", "Q", "w_corner"):
        d[key] = f[key]
        d[key + "_value"] = _fnum(f[key], nominal)
    d["f_corner"] = f["w_corner"] / (2 * sympy.pi) if f["w_corner"] is not None else None
    d["f_corner_value"] = (d["w_corner_value"] / (2 * math.pi)
                           if d["w_corner_value"] is not None else None)
    d["f0_value"] = d["w0_value"] / (2 * math.pi) if d["w0_value"] is not None else None


def _section_out(sec, nominal) -> dict:
    d = {"order": sec["order"], "power": sec["power"], "denominator": list(sec["coefficients"])}
    _characteristics(d, sec, nominal)
    d["poles"] = list(sec["poles"]) if sec["poles"] is not None else None
    nr = numeric_roots(sec["coefficients"], nominal)
    d["poles_value"] = [_cplx(z) for z in nr] * sec["power"] if nr is not None else None
    sens = {}
    for key in ("w0", "Q", "w_corner"):
        if sec[key] is not None:
            sens[key] = {x: {"normalized": v["expr"], "value": v["value"]} for x, v in
                         reduced_sensitivities(key, sec["_red"], nominal).items()}
    if sens:
        d["sensitivity"] = sens
    return d


def _numeric_list(cs, nominal):
    vals = [c.xreplace(nominal) for c in cs]
    if not all(v.is_number and v.is_finite and v.is_extended_real for v in vals):
        return None
    return [float(v) for v in vals]


def _numeric(f, nominal):
    """(num, den) ascending float coefficients at nominal values (num/den = H, the lowest
    denominator term 1), multiplied out numerically from the factors; None where a symbol
    has no value."""
    import numpy as np
    if "_num_factors" not in f:                   # sympy's route: the coefficient lists
        num, den = (_numeric_list(f[x], nominal) for x in ("numerator", "denominator"))
        if num is None or den is None or not any(c != 0 for c in den):
            return None
        return num, den
    k = _numeric_list([f["k"]], nominal)
    if k is None:
        return None
    polys = {}
    for side in ("_num_factors", "_den_factors"):
        acc = np.array([1.0])
        for fac in f[side]:
            cs = _numeric_list(fac["coefficients"], nominal)
            if cs is None:
                return None
            for _ in range(fac["power"]):
                acc = np.convolve(acc, cs)
        polys[side] = acc
    sp = f["s_power"]
    num = [0.0] * max(sp, 0) + [k[0] * c for c in polys["_num_factors"]]
    den = [0.0] * max(-sp, 0) + list(polys["_den_factors"])
    if not any(c != 0 for c in den):
        return None
    return [float(c) for c in num], [float(c) for c in den]


def _numeric_roots(f, nominal):
    """(poles, zeros) at nominal values as [re, im] pairs, factor by factor (each factor's
    roots by numpy, repeated as often as its power)."""
    out = []
    for side, origin in (("_den_factors", max(-f["s_power"], 0)),
                         ("_num_factors", max(f["s_power"], 0))):
        roots = []
        for fac in f[side]:
            nr = numeric_roots(fac["coefficients"], nominal)
            if nr is None:
                roots = None
                break
            roots += list(nr) * fac["power"]
        roots = roots + [complex(0)] * origin if roots is not None else None
        out.append([_cplx(z) for z in roots] if roots is not None else None)
    return tuple(out)


RESPONSE_WORDS = {"f0": ("natural frequency", "f0"), "w0": ("natural frequency", "ω0"),
                  "Q": ("quality factor", "Q")}


def _order_words(den) -> str:
    """How a denominator polynomial in s (ascending coefficients) is built, in words: its
    order, the poles at the origin, and its factors in s where it factors over the
    symbols (each named when short)."""
    poly = sum(c * S**i for i, c in enumerate(den))
    order = len(den) - 1
    zeros_at_origin = next(i for i, c in enumerate(den) if c != 0)
    words = f"of order {order} in s"
    if zeros_at_origin:
        words += f" ({zeros_at_origin} pole{'s' if zeros_at_origin > 1 else ''} at s = 0)"
    if order <= 2 or sympy.count_ops(poly) > 400:
        return words
    try:
        _, factors = sympy.factor_list(sympy.expand(poly))
    except (sympy.PolynomialError, NotImplementedError):
        return words
    parts = []
    for f, m in factors:
        d = sympy.degree(f, S) if f.has(S) else 0
        if d == 0:
            continue
        text = str(f)
        parts += [f"order {d}" + (f" ({text})" if len(text) <= 60 else "")] * int(m)
    if len(parts) > 1:
        words += "; it factors into " + ", ".join(parts[:-1]) + " and " + parts[-1]
    return words


def _section_words(f) -> str:
    """:func:`_order_words` of a denominator kept as a product of factors in s (too large to
    multiply out): its order and its factors' orders, read off ``f["factors"]``."""
    facs = [fac for fac in f["factors"]["denominator"] for _ in range(fac["power"])]
    order = sum(fac["order"] for fac in facs) + max(-f["s_power"], 0)
    words = f"of order {order} in s"
    if len(facs) > 1:
        parts = [f"order {fac['order']}" for fac in facs]
        words += "; it factors into " + ", ".join(parts[:-1]) + " and " + parts[-1]
    return words


def response_quantity(q, word: str, loc):
    """The quantity ``f0``, ``w0`` or ``Q`` of result ``q`` (a ``QuantityResult`` in s) as a
    ``QuantityResult`` of its own, read from the second-order denominator of ``q``'s
    normalised rational form (:func:`rational_form`: 1 + a1 s + a2 s², ω0 = 1/sqrt(a2),
    Q = sqrt(a2)/a1, f0 = ω0/(2π)). A located error where ``q`` does not depend on s,
    where its denominator is of another order (said, with its factors in s), or where Q is
    infinite."""
    import dataclasses

    from derive.errors import SheetError
    from derive.sheet import quantities
    noun, sym = RESPONSE_WORDS[word]
    what = f"the {noun} {sym}"
    where = (getattr(loc, "line", 0), getattr(loc, "col", 0))
    if q.expr is None:
        raise SheetError(f"{what} of {q.name} needs its closed form, and {q.name} is given "
                         "only as a sequence of named intermediates", *where,
                         hint="keep fewer symbols symbolic (--symbolic or a 'numeric' line)")
    if S not in q.expr.free_symbols:
        raise SheetError(f"{q.name} does not depend on s (no capacitor, inductor or s in it), "
                         f"so it has no {noun} {sym}", *where)
    f = rational_form(q.expr)
    den = f["denominator"]
    if f["w0"] is None:
        words = _order_words(den) if den is not None else _section_words(f)
        hint = ("a first-order denominator has a corner frequency (a plain 'find' of the "
                "result shows it); f0, w0 and Q belong to a second-order one"
                if len(den) - 1 == 1 else
                "each second-order factor has its own f0 and Q: ask for them at a port after "
                "that section" if "factors into" in words else
                "f0, w0 and Q are those of a second-order denominator 1 + a1·s + a2·s²")
        raise SheetError(f"{what} of {q.name} needs a second-order denominator, and the "
                         f"denominator of {q.name} is {words}", *where, hint=hint)
    if word == "Q" and f["Q"] is None:
        raise SheetError(f"the quality factor of {q.name} is infinite: its denominator has no "
                         "s term (no damping)", *where)
    expr = {"w0": f["w0"], "f0": f["w0"] / (2 * sympy.pi), "Q": f["Q"]}[word]
    return dataclasses.replace(q, name=word, expr=expr, unit=quantities.unit(word),
                               value=None, ratio=None, sequence=[], in_sequence=None,
                               form="second-order denominator", notes=[], validity=[],
                               approximation=None)


def _orders(f) -> str:
    """The orders of a normalised form in words, and where ω0, Q or ωc are read from: the
    whole denominator, or its factor after the poles at s = 0 (``s·(1 + a1·s)`` is a
    second-order denominator whose factor 1 + a1·s gives the corner)."""
    num = [c for c in f["numerator"]]
    den = [c for c in f["denominator"]]
    n = max((i for i, c in enumerate(num) if c != 0), default=0)
    d = len(den) - 1
    p = next((i for i, c in enumerate(den) if c != 0), 0)
    words = f"numerator of order {n}, denominator of order {d} in s"
    sp = "s" if p == 1 else f"s^{p}"
    if f["w0"] is not None:
        words += (f"; the denominator is {sp}·(1 + a1·s + a2·s²): ω0 and Q are read from its "
                  "second-order factor" if p else
                  "; ω0 and Q are read from the second-order denominator 1 + a1·s + a2·s²")
    elif f["w_corner"] is not None:
        words += (f"; the denominator is {sp}·(1 + a1·s): the corner frequency ωc = 1/a1 is "
                  "that of its first-order factor" if p else
                  "; corner frequency ωc = 1/a1 of the first-order denominator 1 + a1·s")
    return words


def _independent(expr) -> dict:
    """ω0, Q and ωc again, from Taylor coefficients of the denominator at s = 0 taken by
    differentiation (not from the polynomial coefficients that :func:`rational_form`
    reads): the independent values the displayed ones are checked against. Only the first
    three nonzero Taylor coefficients are taken (what a first- or second-order reduced
    denominator needs), in python-flint."""
    try:
        (h,) = rational.common([expr], extra=[S])
        i = h.symbols.index(S)
        den = h.den
        deg = den.degrees()[i]
        c, d, fact = [], den, 1
        for k in range(deg + 1):
            if k:
                d = d.derivative(i)
                fact *= k
            at0 = {m: v for m, v in d.to_dict().items() if m[i] == 0}
            c.append(rational.ratio(h.ctx.from_dict(at0) if at0 else h.ctx.constant(0),
                                    h.ctx.constant(fact), h))
            nonzero = [x for x in c if not x.is_zero()]
            if len(nonzero) == 3:
                break
        p = next(j for j, x in enumerate(c) if not x.is_zero())
        red = [(x / c[p]) for x in c[p:]]
        if len(red) > 3 or (len(red) == 3 and deg - p > 2) or (len(red) == 2 and deg - p > 1):
            return {}
        red = [x.to_sympy() for x in red]
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
    """The normalised H(s) for the step: the product of its normalised factors where there
    are several (unevaluated: printed as it is), else one ratio of coefficient lists."""
    if f.get("numerator") is not None and f.get("sections") is None:
        n = sum(c * S**i for i, c in enumerate(f["numerator"]))
        dd = sum(c * S**i for i, c in enumerate(f["denominator"]))
        if n == 1:                                  # not "1·1/(...)"
            return sympy.Pow(dd, -1, evaluate=False)
        return sympy.Mul(n, sympy.Pow(dd, -1), evaluate=False)
    parts = [] if f["k"] == 1 else [f["k"]]
    if f["s_power"]:
        parts.append(sympy.Pow(S, f["s_power"], evaluate=False))
    for facs, sign in ((f["_num_factors"], 1), (f["_den_factors"], -1)):
        for fac in facs:
            poly = sympy.Add(*[c * S**i for i, c in enumerate(fac["coefficients"])],
                             evaluate=False)
            k = sign * fac["power"]
            parts.append(poly if k == 1 else sympy.Pow(poly, k, evaluate=False))
    if not parts:
        return sympy.Integer(1)
    return parts[0] if len(parts) == 1 else sympy.Mul(*parts, evaluate=False)


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


def bode_figure(name, caption, num, den, unit=None, marks=None) -> Figure:
    """A Bode plot at nominal values of ``num(s)/den(s)`` (ascending numeric coefficients);
    drawn by :func:`derive.export.plots.draw` over the range of :func:`bode_data`, with
    ``marks`` (f0, corner frequency, -3 dB points in Hz) drawn as vertical lines."""
    return Figure(name, caption, "bode", {"num": list(num), "den": list(den), "unit": unit,
                                          "marks": dict(marks or {})})


def _response(num, den, f):
    import numpy as np
    jw = 2j * np.pi * np.asarray(f, dtype=float)
    return np.polyval(list(reversed(num)), jw) / np.polyval(list(reversed(den)), jw)


def minus_3db_points(num, den) -> list:
    """Frequencies (Hz, at nominal values) where the magnitude is 3.0103 dB (a factor
    1/sqrt(2)) below the passband: the DC gain where it is finite and nonzero, else the
    high-frequency gain, else (band-pass) the peak over the plotted range; refined by
    bisection on the magnitude; displayed numbers, not exact results.

    >>> [round(f, 3) for f in minus_3db_points([1.0], [1.0, 1 / (2 * math.pi * 1000)])]
    [1000.0]
    """
    import numpy as np
    f, _mag, _ph = bode_data(num, den, points=2000)
    h = np.abs(_response(num, den, f))
    nd = max((i for i, c in enumerate(num) if c != 0), default=0)
    dd = max((i for i, c in enumerate(den) if c != 0), default=0)
    if den[0] != 0 and num[0] != 0:
        peak = abs(num[0] / den[0])                           # passband at DC (low-pass)
    elif nd == dd:
        peak = abs(num[nd] / den[dd])                         # passband at high frequency
    else:
        peak = float(h.max())                                 # band-pass: its peak
    if not peak > 0 or not np.isfinite(peak):
        return []
    level = peak / math.sqrt(2)
    above = h >= level
    out = []
    for i in range(len(f) - 1):
        if above[i] != above[i + 1]:
            lo, hi = float(f[i]), float(f[i + 1])
            for _ in range(60):
                mid = math.sqrt(lo * hi)
                if (abs(_response(num, den, [mid])[0]) >= level) == above[i]:
                    lo = mid
                else:
                    hi = mid
            out.append(math.sqrt(lo * hi))
    return out


def decade_table(name, num, den, unit=None) -> Step:
    """Magnitude and phase at nominal values at each decade of the plotted range (a table
    step for the record; displayed numbers)."""
    import numpy as np
    f, _m, _p = bode_data(num, den)
    decades = [10.0 ** k for k in range(math.ceil(math.log10(f[0])),
                                        math.floor(math.log10(f[-1])) + 1)]
    h = _response(num, den, decades)
    ref = f" re 1 {unit}" if unit and unit not in ("V/V", "A/A", "1") else ""
    rows = [["f / Hz", "|" + name + "| / dB" + ref, "phase / degrees"]]
    phase = np.degrees(np.unwrap(np.angle(h))) if len(h) else []
    for fk, hk, pk in zip(decades, h, phase):
        rows.append([f"{fk:g}", f"{20 * math.log10(max(abs(hk), 1e-300)):.2f}", f"{pk:.1f}"])
    return Step(f"Magnitude and phase of {name} at nominal values, one row per decade "
                "(evaluated numerically from the exact coefficients; display only).",
                kind="frequency", table=rows)


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
            marks = {"f0": d.get("f0_value"), "f_corner": d.get("f_corner_value"),
                     "minus_3dB": minus_3db_points(*coeffs)}
            d["minus_3dB_values"] = marks["minus_3dB"]
            result.extra.setdefault("figures", []).append(bode_figure(
                f"bode_{_slug(req.text)}_{name}", f"Bode plot of {name} ({req.text}) at "
                "nominal values", *coeffs, unit=q.unit, marks=marks))
            table = decade_table(name, *coeffs, unit=q.unit)
            table.verify()                # no equation: nothing is claimed verified
            result.steps.append(table)
    if freq:
        result.extra["frequency"] = freq
    return result


def _slug(text):
    return "".join(ch if ch.isalnum() else "_" for ch in text).strip("_")

