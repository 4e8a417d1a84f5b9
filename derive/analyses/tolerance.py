"""Spread of a result over its parts' tolerances: ``find tolerance of Q ...``.

Each part x with a nominal value x0 and a relative tolerance t varies over
``[x0 - |x0| t, x0 + |x0| t]`` (the *box*); parts without a tolerance stay at nominal.
Four methods, each stated in the record:

- linear worst case: ``Q0 ± Σ |dQ/dx| |x0| t`` (first order, from the sensitivities);
- root-sum-square: ``Q0 ± sqrt(Σ (dQ/dx |x0| t)²)``;
- extreme values: the true minimum and maximum over the box. Monotonicity in each part is
  proven where possible: the sign of dQ/dx is bounded over the whole box by interval
  arithmetic (outward-rounded floats) with bisection of the box; a part proven monotone is
  set to the endpoint that favours the max (or the min). If every part is proven, the
  extremes are the two corners so found, evaluated exactly. Otherwise the unproven parts
  are searched: all (or many) of their corners and bounded local optimisation
  (scipy L-BFGS-B) from several seeded starts; the method string says which was done.
- Monte Carlo: numpy on a lambdified form of the derived Q (or of its sequence), seeded,
  uniform within tolerance or normal with tolerance = 3σ (not truncated), reporting mean,
  standard deviation and the 0.135 %/99.865 % quantiles.

Options are read from ``ctx.options`` when present: ``mc_samples`` (100 000), ``mc_seed``
(1), ``mc_distribution`` ('uniform' or 'normal'). For ``thevenin``/``norton`` the top-level
keys describe the first member and ``"tolerance_by_quantity"`` holds every member.
"""
from __future__ import annotations

import itertools
import math
from fractions import Fraction

import numpy as np
import sympy

from derive.forms.results import Context, RequestResult
from derive.errors import SheetError
from derive.analyses import sensitivity as _sens     # module object: the two modules import each other
from derive.derivation.steps import Figure, Step
from derive.sheet.units import format_value

QUANTILES = (0.00135, 0.99865)
MAX_BOXES = 256


# -- interval arithmetic with outward rounding -----------------------------------------------
def _widen(lo, hi, ulps=2):
    for _ in range(ulps):
        lo, hi = math.nextafter(lo, -math.inf), math.nextafter(hi, math.inf)
    return lo, hi


def _mul(a, b):
    ps = [a[0] * b[0], a[0] * b[1], a[1] * b[0], a[1] * b[1]]
    return _widen(min(ps), max(ps))


def _pow(b, n):
    lo, hi = b
    if isinstance(n, int):
        if n == 0:
            return (1.0, 1.0)
        if n < 0:
            if lo <= 0 <= hi:
                return None
            r = _pow(b, -n)
            return _widen(1 / r[1], 1 / r[0])
        cands = [lo ** n, hi ** n]
        if n % 2 == 0 and lo < 0 < hi:
            return _widen(0.0, max(cands))
        return _widen(min(cands), max(cands))
    if lo < 0:
        return None
    cands = [lo ** n, hi ** n]
    return _widen(min(cands), max(cands))


def interval(expr, env: dict, memo: dict | None = None):
    """An enclosure (lo, hi) of ``expr`` over ``env`` (Symbol -> (lo, hi)); None when it
    cannot be bounded (division by an interval containing 0, unsupported function).

    >>> x = sympy.Symbol('x')
    >>> lo, hi = interval(x**2 - 2*x, {x: (0.0, 1.0)})
    >>> lo <= -1.0 and hi >= 0.0
    True
    """
    memo = {} if memo is None else memo
    if expr in memo:
        return memo[expr]
    if expr.is_Symbol:
        r = env[expr]
    elif expr.is_Number:
        v = float(expr)
        r = (v, v) if expr.is_Integer and abs(v) < 2 ** 52 else _widen(v, v)
    elif expr.is_NumberSymbol:          # pi (f0 = ω0/2π), E: a float widened by two ulps
        v = float(expr)
        r = _widen(v, v)
    elif expr.is_Add or expr.is_Mul:
        parts = [interval(a, env, memo) for a in expr.args]
        if any(p is None for p in parts):
            r = None
        elif expr.is_Add:
            r = _widen(sum(p[0] for p in parts), sum(p[1] for p in parts), len(parts))
        else:
            r = parts[0]
            for p in parts[1:]:
                r = _mul(r, p)
    elif expr.is_Pow:
        b = interval(expr.base, env, memo)
        e = expr.exp
        n = int(e) if e.is_Integer else (float(e) if e.is_Rational else None)
        r = None if b is None or n is None else _pow(b, n)
    else:
        r = None
    if r is not None and not (math.isfinite(r[0]) and math.isfinite(r[1])):
        r = None
    memo[expr] = r
    return r


def form_interval(form: Form, env: dict):
    env = dict(env)
    memo: dict = {}
    for q, e in form.defs:
        env[q] = interval(e, env, memo)
        if env[q] is None:
            return None
    return interval(form.final, env, memo)


def derivative_sign(dform: Form, box: dict, split: list) -> int | None:
    """+1 or -1 when dQ/dx keeps that strict sign on the whole box (proven), else None.
    ``box``: Symbol -> (lo, hi) floats; ``split``: the symbols the box may be bisected in."""
    todo = [dict(box)]
    seen, sign = 0, 0
    while todo:
        b = todo.pop()
        seen += 1
        r = form_interval(dform, b)
        if r is not None and (r[0] > 0 or r[1] < 0):
            s = 1 if r[0] > 0 else -1
            if sign and s != sign:
                return None
            sign = s
            continue
        if seen + len(todo) >= MAX_BOXES or not split:
            return None
        y = max(split, key=lambda v: (b[v][1] - b[v][0]) / (box[v][1] - box[v][0]))
        lo, hi = b[y]
        mid = 0.5 * (lo + hi)
        todo.append({**b, y: (lo, mid)})
        todo.append({**b, y: (mid, hi)})
    return sign or None


def proven_bounded(form: Form, box: dict, split: list) -> bool:
    """Whether a finite enclosure of Q is found on every part of a bisection of the box."""
    todo, seen = [dict(box)], 0
    while todo:
        b = todo.pop()
        seen += 1
        if form_interval(form, b) is not None:
            continue
        if seen + len(todo) >= MAX_BOXES or not split:
            return False
        y = max(split, key=lambda v: (b[v][1] - b[v][0]) / (box[v][1] - box[v][0]))
        lo, hi = b[y]
        todo += [{**b, y: (lo, 0.5 * (lo + hi))}, {**b, y: (0.5 * (lo + hi), hi)}]
    return True


# -- the box and the methods ----------------------------------------------------------------
def box_of(ctx: Context, symbols) -> dict:
    """Symbol -> (nominal, half-width) exact, for parts with a nonzero tolerance."""
    out = {}
    for x in symbols:
        info = ctx.circuit.symbols.get(str(x))
        if info is None or info.nominal is None or not info.tolerance:
            continue
        x0 = sympy.Rational(info.nominal.numerator, info.nominal.denominator)
        t = sympy.Rational(info.tolerance.numerator, info.tolerance.denominator)
        out[x] = (x0, abs(x0) * t)
    return out


def linear(a, box: dict):
    """(worst-case half-width, RSS half-width, rows of contributions)."""
    wc, ss, rows = 0.0, 0.0, []
    for s in a.sens:
        if s.symbol not in box or s.d_value is None:
            continue
        c = abs(float(s.d_value)) * float(box[s.symbol][1])
        wc += c
        ss += c * c
        rows.append((s.symbol, c))
    return wc, math.sqrt(ss), rows


def _vec(form: Form):
    """A numpy evaluator of ``form``: f(env of arrays or floats) -> array."""
    steps = []
    for q, e in list(form.defs) + [(None, form.final)]:
        args = sorted(e.free_symbols, key=str)
        steps.append((q, args, sympy.lambdify(args, e, "numpy")))

    def f(env):
        env = dict(env)
        for q, args, fn in steps:
            v = fn(*[env[a] for a in args])
            if q is None:
                return v
            env[q] = v
    return f


EXACT_PRODUCT_TERMS = 5e7     # largest len(n)*len(d) of a derivative numerator formed
EXACT_TERMS = 200_000         # largest expansion of a sequence rebuilt for the sign proofs


def exact_signs(form: Form, nominal: dict, box: dict) -> dict:
    """{x: +1 or -1} for parts in which Q is proven strictly monotone on the box, exactly.

    Q is rebuilt as a cancelled ratio ``n/d`` of flint polynomials (through its sequence, if
    any). When every symbol is positive on the whole box (checked exactly) and the
    coefficients of ``d`` share one sign, ``d`` has no zero on the box, and
    ``dQ/dx = (n'd - nd')/d^2`` has the strict sign of the numerator wherever its
    coefficients share one sign (a nonzero polynomial with positive coefficients is positive
    at positive arguments). Parts not settled this way are left out (interval arithmetic
    may still prove them)."""
    r = _sens.rational(form.final, list(form.defs), max_terms=EXACT_TERMS)
    if r is None:
        return {}
    n, d, syms = r
    for x in syms:
        if x in box:
            c, h = box[x]
            if not c - h > 0:
                return {}
        elif x not in nominal or not nominal[x] > 0:
            return {}
    if _coefficient_sign(d) is None or len(n) * len(d) > EXACT_PRODUCT_TERMS:
        return {}
    out = {}
    for x in box:
        if x not in syms:
            continue
        i = syms.index(x)
        sgn = _coefficient_sign(_derivative_numerator(n, d, i))
        if sgn is not None:
            out[x] = sgn
    return out


def _derivative_numerator(n, d, i):
    """``n'd - nd'`` in generator ``i``. Where both are affine in it (a resistive network's
    functions are multilinear), ``n = n0 + n1 x`` and ``d = d0 + d1 x`` give the shorter
    products ``n1 d0 - n0 d1`` (the x terms cancel exactly)."""
    dn, dd = n.derivative(i), d.derivative(i)
    if n.degrees()[i] <= 1 and d.degrees()[i] <= 1:
        x = n.context().gens()[i]
        return dn * (d - dd * x) - (n - dn * x) * dd
    return dn * d - n * dd


def _coefficient_sign(p):
    """+1 / -1 when every coefficient of the nonzero polynomial ``p`` is positive / negative."""
    if p.is_zero():
        return None
    cs = p.coeffs()
    if all(c > 0 for c in cs):
        return 1
    if all(c < 0 for c in cs):
        return -1
    return None


def extremes(form: Form, dforms: dict, nominal: dict, box: dict, seed: int = 1,
             at: dict | None = None, signs: dict | None = None):
    """(low, high, method, monotone) of ``form`` over ``box`` (see module doc).
    ``dforms``: Symbol -> derivative Form; ``nominal``: Symbol -> Rational for all parts.
    ``at``: a dict that, when given, receives where the extremes were found: ``"low"`` and
    ``"high"`` map each part of the box to its value there (exact Rationals, floats where an
    interior search found it). ``signs``: {part: +1 or -1} for parts in which the caller has
    proven Q strictly monotone over the whole box (counted with the exact proofs)."""
    where = at if at is not None else {}
    fbox = {x: _widen(float(c - h), float(c + h)) for x, (c, h) in box.items()}
    env = {x: _widen(float(v), float(v)) for x, v in nominal.items()}
    env.update(fbox)
    mono, hi_pt, lo_pt, free = {}, {}, {}, []
    exact = exact_signs(form, nominal, box) if box and not signs else {}
    exact.update(signs or {})
    for x, (c, h) in box.items():
        d = dforms.get(x)
        if d is None or (not d.defs and d.final == 0):
            mono[x] = "constant"
            hi_pt[x] = lo_pt[x] = c
            continue
        sgn = exact.get(x) or derivative_sign(d, env, list(box))
        if sgn is None:
            mono[x] = "not proven"
            free.append(x)
            continue
        mono[x] = "increasing" if sgn > 0 else "decreasing"
        hi_pt[x], lo_pt[x] = (c + h, c - h) if sgn > 0 else (c - h, c + h)
    base = dict(nominal)
    if not free:
        lo = _real(form.value({**base, **lo_pt}))
        hi = _real(form.value({**base, **hi_pt}))
        where["low"], where["high"] = dict(lo_pt), dict(hi_pt)
        how = ("by the signs of the coefficients of its exact numerator and denominator"
               if exact and all(x in exact for x in box if mono[x] != "constant") else
               "by interval arithmetic" if not exact else
               "by the signs of the coefficients of its exact numerator and denominator, or "
               "by interval arithmetic")
        method = ("corners: monotone in every toleranced part (sign of dQ/dx proven constant "
                  f"over the box {how})" if box else "no toleranced parts")
        return float(lo), float(hi), method, mono
    affine = [x for x in free if _affine(dforms[x], x)]
    if len(affine) == len(free) and len(free) <= 12:
        vals, pts = [], []
        for signs in itertools.product((-1, 1), repeat=len(free)):
            pt = {x: box[x][0] + sg * box[x][1] for x, sg in zip(free, signs)}
            vals.append((_real(form.value({**base, **lo_pt, **pt})),
                         _real(form.value({**base, **hi_pt, **pt}))))
            pts.append(pt)
        k_lo = min(range(len(vals)), key=lambda k: vals[k][0])
        k_hi = max(range(len(vals)), key=lambda k: vals[k][1])
        where["low"], where["high"] = {**lo_pt, **pts[k_lo]}, {**hi_pt, **pts[k_hi]}
        for x in free:
            mono[x] = "affine"
        method = ("corners: monotone (proven by interval arithmetic on dQ/dx) or affine "
                  f"(dQ/dx does not depend on the part itself: {', '.join(map(str, free))}) in "
                  f"every toleranced part, so the extremes are corners; {len(vals)} corners "
                  "evaluated exactly")
        return (float(min(v[0] for v in vals)), float(max(v[1] for v in vals)), method, mono)
    if len(free) == 1:
        exact = _one_part_extremes(form, free[0], box, base, lo_pt, hi_pt)
        if exact is not None:
            x = free[0]
            mono[x] = "not monotone" if exact[2] else mono[x]
            where["low"], where["high"] = {**lo_pt, x: exact[3][0]}, {**hi_pt, x: exact[3][1]}
            method = (f"exact in {x}: monotonicity not proven for {x} alone, so Q (the other "
                      "parts at the corners proven above) is a rational function of "
                      f"{x}, whose extremes over its tolerance are taken exactly at the ends "
                      f"or at the real roots of the derivative's numerator "
                      f"({exact[2]} critical point(s) inside)")
            return exact[0], exact[1], method, mono
    pole = pole_inside(form, base, box)
    if pole:
        raise Unbounded(pole)
    f = _vec(form)
    fl = {x: float(v) for x, v in base.items()}
    best = {}
    for sense, fixed in ((1, lo_pt), (-1, hi_pt)):
        env0 = {x: np.float64(v) for x, v in {**fl, **fixed}.items()}

        def obj(u, env0=env0, sense=sense):
            e = dict(env0)
            for x, ui in zip(free, u):
                e[x] = np.float64(float(box[x][0]) + ui * float(box[x][1]))
            with np.errstate(all="ignore"):
                v = float(f(e))
            return sense * v if math.isfinite(v) else 1e300
        rng = np.random.default_rng(seed)
        k = len(free)
        corners = list(itertools.product((-1.0, 1.0), repeat=k)) if k <= 10 else \
            [tuple(rng.choice((-1.0, 1.0), k)) for _ in range(1024)]
        vals = [obj(np.array(cn)) for cn in corners]
        found = [np.array(cn) for cn in corners]
        starts = [np.zeros(k)] + [rng.uniform(-1, 1, k) for _ in range(8)]
        starts.append(np.array(corners[int(np.argmin(vals))]))
        from scipy.optimize import minimize
        for st in starts:
            r = minimize(obj, st, method="L-BFGS-B", bounds=[(-1.0, 1.0)] * k)
            vals.append(float(r.fun))
            found.append(np.asarray(r.x, dtype=float))
        best[sense] = sense * min(vals)
        u = found[int(np.argmin(vals))]
        where["low" if sense == 1 else "high"] = {     # sense 1 minimises: the low
            **fixed, **{x: float(box[x][0]) + float(ui) * float(box[x][1])
                        for x, ui in zip(free, u)}}
    bounded = proven_bounded(form, env, list(box))
    method = (f"corners and interior search: monotonicity not proven for "
              f"{', '.join(map(str, free))} ({len(corners)} corners and {len(starts)} bounded "
              "local searches, scipy L-BFGS-B, per limit)"
              + (f"; the other parts proven monotone and set at their corners"
                 if len(free) < len(box) else "")
              + ("" if bounded else "; WARNING: boundedness of the quantity on the box is not proven (a "
                 "denominator may vanish inside it), so Q may be unbounded there and these "
                 "limits are only the extremes found"))
    return best[1], best[-1], method, mono


def _fraction(v):
    v = sympy.Rational(v)
    return Fraction(int(v.p), int(v.q))


def _one_part_extremes(form: Form, x, box: dict, base: dict, lo_pt: dict, hi_pt: dict):
    """(low, high, number of critical points, (where low, where high)) of a closed form that is rational in the one
    unproven part ``x``, the other parts fixed (``lo_pt`` for the low, ``hi_pt`` for the
    high); exact (:func:`derive.solver.univariate.extremes`). None where this does not apply
    (a sequence form, an irrational coefficient, a pole on the interval)."""
    from derive.solver import univariate
    if form.defs:
        return None
    c, h = box[x]
    a, b = _fraction(c - h), _fraction(c + h)
    out, crit, spots = [], 0, []
    for fixed, lower in ((lo_pt, True), (hi_pt, False)):
        point = {k: v for k, v in {**base, **fixed}.items() if k != x}
        e = sympy.cancel(sympy.together(form.final.xreplace(point)))
        if e.free_symbols - {x}:
            return None
        num, den = sympy.fraction(e)
        try:
            N, D = ([_fraction(k) for k in reversed(sympy.Poly(p, x).all_coeffs())]
                    for p in (num, den))
            ext = univariate.extremes(N, D, a, b)
        except (TypeError, ValueError, sympy.PolynomialError, ArithmeticError):
            return None
        pick = ext.minimum if lower else ext.maximum
        v = pick.value if pick.value is not None else (pick.lo + pick.hi) / 2
        crit = max(crit, sum(1 for r in ext.critical
                             if not (isinstance(r, Fraction) and r in (a, b))))
        out.append(float(v))
        spot = pick.at[0]
        spots.append(sympy.Rational(spot.numerator, spot.denominator)
                     if isinstance(spot, Fraction) else float((spot.lo + spot.hi) / 2))
    return out[0], out[1], crit, tuple(spots)


class Unbounded(ArithmeticError):
    """Q is not a finite real number somewhere on the box."""


MAX_POLE_CORNERS = 4096


def pole_inside(form: Form, nominal: dict, box: dict) -> str | None:
    """Why Q is unbounded on the box, or None where that is not proven.

    Q is rebuilt as a cancelled ratio ``n/d`` of flint polynomials; ``d`` is evaluated
    exactly at the nominal point and at corners of the box (all of them up to
    MAX_POLE_CORNERS). If it is zero at one of them, or takes both signs, it vanishes on
    the box (a polynomial is continuous and the box connected), and since ``n`` and ``d``
    have no common factor their common zeros are too few to fill the zero set of ``d``
    there: Q has a pole on the box."""
    r = _sens.rational(form.final, list(form.defs))
    if r is None:
        return None
    n, d, syms = r
    parts = [x for x in syms if x in box]
    if not parts or any(x not in box and x not in nominal for x in syms):
        return None
    if 2 ** len(parts) > MAX_POLE_CORNERS:
        return None
    import flint

    def at(pt):
        vals = []
        for x in syms:
            v = sympy.Rational(pt[x] if x in pt else nominal[x])
            vals.append(flint.fmpq(int(v.p), int(v.q)))
        return d(*vals)
    seen = {}
    points = [({}, "nominal")] + [
        ({x: box[x][0] + sg * box[x][1] for x, sg in zip(parts, signs)},
         "the corner " + ", ".join(f"{x} {'+' if sg > 0 else '-'}tol"
                                    for x, sg in zip(parts, signs)))
        for signs in itertools.product((-1, 1), repeat=len(parts))]
    for pt, where in points:
        v = at(pt)
        if v == 0:
            return (f"its denominator is zero at {where} of the box of tolerances: the "
                    "quantity has a pole there and is unbounded on the box")
        seen.setdefault(1 if v > 0 else -1, where)
        if len(seen) == 2:
            return (f"its denominator changes sign on the box of tolerances (positive at "
                    f"{seen[1]}, negative at {seen[-1]}), so it vanishes inside the box: the "
                    "quantity has a pole there and is unbounded on the box")
    return None


def _real(v) -> float:
    try:
        f = complex(v)
    except (TypeError, ValueError):
        raise Unbounded from None
    if f.imag != 0 or not math.isfinite(f.real):
        raise Unbounded
    return f.real


def _clean(obj):
    """JSON-safe: non-finite floats become None."""
    if isinstance(obj, dict):
        return {k: _clean(v) for k, v in obj.items()}
    if isinstance(obj, float) and not math.isfinite(obj):
        return None
    return obj


def _affine(dform: Form, x) -> bool:
    """Whether Q is affine in x (dQ/dx free of x), for single expressions."""
    if dform.defs:
        return False
    if x not in dform.final.free_symbols:
        return True
    r = _sens.rational(dform.final)
    if r is not None:        # a cancelled ratio n/d is free of x iff n and d both are
        n, d, syms = r
        i = syms.index(x)
        return n.degrees()[i] == 0 and d.degrees()[i] == 0
    return sympy.cancel(sympy.diff(dform.final, x)) == 0


CHUNK = 1_000_000       # Monte Carlo samples drawn and evaluated at a time


def _draw(form: Form, nominal: dict, box: dict, rng, samples: int, distribution: str):
    """Values of Q at ``samples`` seeded draws of the box (non-finite ones included)."""
    env = {x: float(v) for x, v in nominal.items()}
    order = sorted(box, key=str)
    # one draw for all parts (row k belongs to order[k]), scaled in place
    if distribution == "normal":
        u = rng.standard_normal((len(order), samples))
    else:
        u = rng.random((len(order), samples))
    for k, x in enumerate(order):
        c, h = float(box[x][0]), float(box[x][1])
        row = u[k]
        if distribution == "normal":
            row *= h / 3.0
            row += c
        else:
            row *= 2.0 * h
            row += c - h
        env[x] = row
    with np.errstate(all="ignore"):
        return np.broadcast_to(np.asarray(_vec(form)(env), dtype=float), (samples,))


def _order_stat_quantiles(low_tail, high_tail, n: int) -> tuple:
    """``np.quantile`` (linear interpolation) of QUANTILES from the smallest values
    (``low_tail``, sorted) and the largest (``high_tail``, sorted) of ``n`` values."""
    out = []
    for q in QUANTILES:
        pos = (n - 1) * q
        i = int(math.floor(pos))
        frac = pos - i
        j = min(i + 1, n - 1)

        def at(k):
            if k < len(low_tail):
                return low_tail[k]
            return high_tail[k - (n - len(high_tail))]
        out.append(at(i) + (at(j) - at(i)) * frac if frac else at(i))
    return tuple(out)


def monte_carlo(form: Form, nominal: dict, box: dict, samples=100_000, seed=1,
                distribution="uniform"):
    """(values array, dict for JSON) by seeded sampling of the box. Up to :data:`CHUNK`
    samples are drawn at once; more are drawn chunk by chunk, so memory stays bounded: the
    mean and standard deviation are combined chunk by chunk, the quantiles come from the
    extreme order statistics kept across chunks (the same values ``np.quantile`` gives on the
    whole sample), and the returned values are the first chunk's (for the histogram)."""
    samples = int(samples)
    if samples < 2:
        raise ValueError(f"Monte Carlo needs at least 2 samples, not {samples}")
    rng = np.random.default_rng(seed)
    if samples <= CHUNK:
        v = _draw(form, nominal, box, rng, samples, distribution)
        finite = np.isfinite(v)
        bad = int(samples - finite.sum())
        if bad:
            v = v[finite]
        if v.size < 2:
            raise ZeroDivisionError("no finite Monte Carlo sample")
        lo, hi = np.quantile(v, QUANTILES)
        mean, std, first = float(v.mean()), float(v.std(ddof=1)), v
    else:
        # tails long enough for every quantile position of the finite sample
        keep = int(math.ceil(samples * max(QUANTILES[0], 1 - QUANTILES[-1]))) + 2
        low_tail = high_tail = np.empty(0)
        count, mean, m2, bad, first, left = 0, 0.0, 0.0, 0, None, samples
        while left:
            m = min(CHUNK, left)
            left -= m
            v = _draw(form, nominal, box, rng, m, distribution)
            finite = np.isfinite(v)
            bad += int(m - finite.sum())
            v = np.array(v[finite], dtype=float)
            if first is None:
                first = v
            if v.size == 0:
                continue
            cm, cn = float(v.mean()), v.size       # Chan et al.'s pairwise combination
            c2 = float(((v - cm) ** 2).sum())
            delta, tot = cm - mean, count + cn
            mean += delta * cn / tot
            m2 += c2 + delta * delta * count * cn / tot
            count = tot
            low_tail = np.sort(np.concatenate([low_tail, np.partition(v, min(keep, v.size) - 1)
                                               [:keep]]))[:keep]
            high_tail = np.sort(np.concatenate([high_tail,
                                                -np.partition(-v, min(keep, v.size) - 1)
                                                [:keep]]))[-keep:]
        if count < 2:
            raise ZeroDivisionError("no finite Monte Carlo sample")
        lo, hi = _order_stat_quantiles(low_tail, high_tail, count)
        std = math.sqrt(m2 / (count - 1))
    out = {"samples": int(samples), "seed": int(seed), "distribution": distribution,
           "mean": float(mean), "std": float(std),
           "low": float(lo), "high": float(hi)}
    if bad:
        out["non_finite_samples"] = bad
    return first, out


def spread_of(ctx: Context, a, req) -> tuple:
    """(JSON dict, steps, Monte Carlo values) of one analysed quantity."""
    name, unit = a.q.name, a.q.unit
    if a.nominal_value is None:
        missing = sorted(str(x) for x in a.form.base_symbols() if x not in ctx.nominal)
        if not missing:
            why = getattr(a.q, "undefined", None) or (f"{name} has no finite value at "
                                                      "nominal values")
            raise SheetError(f"the tolerance of {name} cannot be given: {why}",
                             req.loc.line, req.loc.col)
        raise SheetError(f"the tolerance of {name} needs nominal values of: {', '.join(missing)}",
                         req.loc.line, req.loc.col)
    q0 = _real(a.nominal_value)
    box = box_of(ctx, a.form.base_symbols())
    opts = ctx.options
    n = getattr(opts, "mc_samples", 100_000)
    seed = getattr(opts, "mc_seed", 1)
    if not isinstance(n, int) or n < 2:
        raise SheetError(f"a Monte Carlo spread needs at least 2 samples (mc_samples={n!r})",
                         req.loc.line, req.loc.col)
    if not isinstance(seed, int) or seed < 0:
        raise SheetError(f"the Monte Carlo seed must be a non-negative integer, not {seed!r}",
                         req.loc.line, req.loc.col)
    dist = getattr(opts, "mc_distribution", "uniform")
    wc, rss, rows = linear(a, box)
    lo, hi, method, mono = extremes(a.form, {s.symbol: s.deriv for s in a.sens}, ctx.nominal, box,
                                    seed)
    values, mc = monte_carlo(a.form, ctx.nominal, box, n, seed, dist)
    out = {"spread": {"nominal": q0, "low": lo, "high": hi, "method": method},
           "worst_case_linear": {"low": q0 - wc, "high": q0 + wc},
           "rss": {"low": q0 - rss, "high": q0 + rss, "sigma_equivalent": rss / 3.0},
           "monte_carlo": mc,
           "monotone": {str(x): m for x, m in mono.items()},
           "contributions": {str(x): c for x, c in rows}}
    d = opts.digits

    def v(x):
        return format_value(x, unit, d)
    table = [["symbol", "tolerance", "S at nominal", f"|d{name}/dx|·|x0|·t ({unit or '-'})",
              "share of worst case", "on the box"]]
    sval = {s.symbol: s.s_value for s in a.sens}
    for x, c in sorted(rows, key=lambda r: -r[1]):
        t = ctx.circuit.symbols[str(x)].tolerance
        table.append([str(x), f"±{float(t) * 100:g} %", _sens.g(sval.get(x), d),
                      format_value(c, None, d),
                      f"{format_value(c / wc * 100 if wc else 0, None, d)} %", mono.get(x, "")])
    steps = [
        Step(f"Linear worst case: {name} = {v(q0)} ± Σ|d{name}/dx|·|x0|·t = ± {v(wc)}, "
             f"so {v(q0 - wc)} to {v(q0 + wc)} (first order in the tolerances).",
             kind="tolerance", table=table),
        Step(f"Root-sum-square: ± sqrt(Σ(d{name}/dx·x0·t)²) = ± {v(rss)}, so "
             f"{v(q0 - rss)} to {v(q0 + rss)}.", kind="tolerance"),
        Step(f"Extreme values over the box of tolerances: {v(lo)} to {v(hi)}. "
             f"Method: {method}.", kind="tolerance"),
        Step(f"Monte Carlo: {mc['samples']} samples, seed {mc['seed']}, {dist} within "
             f"tolerance{' (tolerance = 3σ)' if dist == 'normal' else ''}: mean "
             f"{v(mc['mean'])}, standard deviation {v(mc['std'])}, 0.135 %/99.865 % "
             f"quantiles {v(mc['low'])} and {v(mc['high'])}.", kind="tolerance"),
    ]
    for st in steps:
        st.verify()
    return out, steps, values


def tolerance(ctx: Context, req) -> RequestResult:
    res = RequestResult(req)
    by, figs, units = {}, [], {}
    for a in _sens.analysed(ctx, req):
        units[a.q.name] = a.q.unit
        try:
            out, steps, values = spread_of(ctx, a, req)
        except (Unbounded, ZeroDivisionError) as e:
            why = str(e) if isinstance(e, Unbounded) and str(e) else (
                "it is not finite everywhere on the box of tolerances (a denominator vanishes "
                "there)")
            raise SheetError(f"the tolerance of {a.q.name} cannot be given: {why}; no "
                             "extremes, worst case or spread exist; narrow the tolerances",
                             req.loc.line, req.loc.col) from None
        out = _clean(out)
        by[a.q.name] = out
        res.steps.extend(steps)
        counts, edges = np.histogram(values, bins=60)
        marks = {"linear worst case": (out["worst_case_linear"]["low"],
                                       out["worst_case_linear"]["high"]),
                 "extreme values": (out["spread"]["low"], out["spread"]["high"])}
        figs.append(Figure(
            f"{_sens._slug(req.text)}-{a.q.name}",
            f"Monte Carlo spread of {a.q.name} ({out['monte_carlo']['samples']} samples) with "
            "the linear worst-case and extreme-value limits.", "histogram",
            {"counts": [float(c) for c in counts], "edges": [float(e) for e in edges],
             "quantity": a.q.name, "unit": a.q.unit, "marks": marks}))
    first = next(iter(by))
    res.extra.update(by[first])
    res.extra["tolerance_of"] = first
    res.extra["tolerance_unit"] = units[first]      # of spread, rss, ... (None: a number)
    res.extra["tolerance_by_quantity"] = by
    res.extra["figures"] = figs
    return res
