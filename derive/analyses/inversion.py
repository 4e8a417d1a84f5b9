"""``solve Q at P for X``: a derived quantity inverted for one symbol (calibration formulas).

The quantity becomes a symbol of its own name (``vth``). Its closed form is a rational
function ``num/den`` in X, so ``num - vth*den = 0`` is a polynomial in X: degree 1 is
solved directly, degree 2 by the quadratic formula, higher degrees by sympy's polynomial
root finder (``sympy.roots``; it may not find every root in radicals, and says so). Every
root is substituted back and must give the quantity identically. The root that is real and
positive at nominal values is marked; the conditions (denominators not zero) and the range
of the measured quantity over which the marked root stays real and positive are stated.

The polynomial, its coefficients in X, the linear root, the factors of the conditions and
the critical points of the valid range are computed in python-flint from the closed form's
expression tree (:class:`ExactPoly`), and values at nominal exactly there; sympy only builds
the expressions shown (and takes over for closed forms with roots or irrational constants).
A substituted-back form that would print over ``SUBSTITUTED_CHARS`` is shown with X standing
for the root (it is checked the same way).
"""
from __future__ import annotations

from fractions import Fraction

import flint
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


class ExactPoly:
    """``num - q·den`` as an exact polynomial in ``x`` (python-flint), for a closed form
    ``num/den`` that is a rational function of its symbols: the cancelled numerator and
    denominator, and the coefficient of every power of ``x`` (polynomials in the other
    symbols and ``q``), read off without expanding anything in sympy. ``names``: the ring's
    symbols, sorted by name (the order ``convert.factor`` uses, so factors come out in the
    same sympy forms)."""

    def __init__(self, expr, x, q):
        from derive.analyses.sensitivity import rational
        r = rational(expr)
        if r is None:
            raise ValueError("not a rational function of its symbols")
        n, d, syms = r
        if x not in syms or q in syms:
            raise ValueError("no polynomial in x")
        self.names = sorted(list(syms) + [q], key=str)
        self.ctx = flint.fmpq_mpoly_ctx.get(tuple(f"w{i}" for i in range(len(self.names))),
                                            "lex")
        gens = self.ctx.gens()
        image = [gens[self.names.index(v)] for v in syms]
        self.num = n.compose(*image, ctx=self.ctx)
        self.den = d.compose(*image, ctx=self.ctx)
        self.x, self.q = x, q
        self.ix, self.iq = self.names.index(x), self.names.index(q)
        self.poly = self.num - gens[self.iq] * self.den
        self.coeffs = _coefficients(self.poly, self.ix)     # [c0, c1, ...]

    def degree(self) -> int:
        return len(self.coeffs) - 1

    def expr(self, p) -> sympy.Expr:
        return edge.poly_expr(p, self.names)

    def grouped(self) -> sympy.Expr:
        """The polynomial as ``sympy.Poly(..., x).as_expr()`` shows it: powers of ``x`` with
        their coefficients."""
        return sympy.Add(*[self.expr(c) * self.x ** k for k, c in enumerate(self.coeffs)])

    def as_sympy(self) -> sympy.Poly:
        return sympy.Poly.from_list([self.expr(c) for c in reversed(self.coeffs)], self.x)

    def ratio_expr(self, n, d) -> sympy.Expr:
        """``n/d`` cancelled and factored (what ``convert.factor`` gives for it)."""
        n, d = self.cancel(n, d)
        return edge.factored_expr(n, self.names) / edge.factored_expr(d, self.names)

    @staticmethod
    def cancel(n, d):
        """``n/d`` cancelled, the sign on the numerator (as sympy's ``together`` leaves it)."""
        g = n.gcd(d)
        if not g.is_one() and not g.is_zero():
            n, d = n / g, d / g
        if not d.is_zero() and d.leading_coefficient() < 0:
            n, d = -n, -d
        return n, d

    def factors(self, p) -> list:
        """The non-constant irreducible factors of ``p`` (flint polynomials)."""
        if p.is_zero():
            return []
        return [f for f, _m in p.factor()[1] if not f.is_constant()]

    def factor_exprs(self, p) -> list:
        """The factors of ``p`` as sympy expressions, in ``convert.factor_list``'s order."""
        out = [self.expr(f) for f in self.factors(p)]
        out.sort(key=sympy.default_sort_key)
        return out


def _coefficients(p, i) -> list:
    """Coefficients of the powers of generator ``i`` in ``p``: [c0, c1, ...]."""
    out = []
    k, fact = 0, 1
    while True:
        out.append(p.subs({i: flint.fmpq(0)}) / fact)
        if p.degrees()[i] == 0:
            return out
        p = p.derivative(i)
        k += 1
        fact *= k


def _exact_point(names, point: dict):
    """The values of ``names`` at ``point`` as ``fmpq`` (None where one is missing or not a
    rational number)."""
    vals = []
    for v in names:
        x = point.get(v)
        if x is None or not getattr(x, "is_Rational", False):
            return None
        vals.append(flint.fmpq(int(x.p), int(x.q)))
    return vals


class RootValues:
    """A root's exact value at a point (its python-flint rational function evaluated at
    rational values), with ``_num``'s sympy evaluation where that does not apply."""

    def __init__(self, root):
        from derive.analyses.sensitivity import rational
        self.root = root
        self.r = rational(root) if root.free_symbols else None

    def at(self, point: dict):
        """``_num(root.xreplace(point))``: a complex number or None."""
        if self.r is not None:
            n, d, syms = self.r
            vals = _exact_point(syms, point)
            if vals is not None:
                dv = d(*vals)
                if dv == 0:
                    return None             # the root's form is undefined there
                v = n(*vals) / dv
                return complex(float(Fraction(int(v.p), int(v.q))))
        return _num(self.root.xreplace(point))

    def den_factors(self) -> list:
        """The factors of the root's denominator (``convert.factor_list`` of the denominator
        of ``together(root)``), as sympy expressions in that function's order."""
        if self.r is None:
            _rnum, rden = sympy.fraction(sympy.together(self.root))
            return [f for f, _m in edge.factor_list(rden)[1]]
        _n, d, syms = self.r
        out = [edge.poly_expr(f, syms) for f, _m in d.factor()[1] if not f.is_constant()]
        out.sort(key=sympy.default_sort_key)
        return out


def _sympy_poly(expr, x, q):
    """(num, den, Poly in x of num - q·den or None) by sympy, for closed forms that are not
    rational functions of their symbols (roots, irrational constants)."""
    try:                                    # cancelled in python-flint
        num, den = edge.cancelled(expr)
    except (sympy.PolynomialError, TypeError, ValueError):     # roots, irrational constants
        num, den = sympy.fraction(sympy.cancel(sympy.together(expr)))
    try:
        poly = sympy.Poly(sympy.expand(num - q * den), x)
    except sympy.PolynomialError:
        poly = None
    return num, den, poly


def _value_at(poly, expr, nominal):
    """``expr.xreplace(nominal)``: exactly from the cancelled polynomials where every symbol
    has a rational nominal value and the denominator does not vanish there."""
    if isinstance(poly, ExactPoly):
        used = [v for v in poly.names if v != poly.q]
        vals = _exact_point(used, nominal)
        if vals is not None:
            point = list(vals)
            point.insert(poly.iq, flint.fmpq(0))
            d = poly.den(*point)
            if d != 0:
                v = poly.num(*point) / d
                return sympy.Rational(int(v.p), int(v.q))
    return expr.xreplace(nominal)


def polynomial_roots(poly: sympy.Poly):
    """(roots, method) of a univariate polynomial with symbolic coefficients.

    >>> x, a, b = sympy.symbols('x a b')
    >>> polynomial_roots(sympy.Poly(a*x - b, x))
    ([b/a], 'linear')
    """
    if isinstance(poly, ExactPoly):
        if poly.degree() == 1:
            c0, c1 = poly.coeffs[0], poly.coeffs[1]
            return [poly.ratio_expr(-c0, c1)], "linear"
        poly = poly.as_sympy()
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
    if isinstance(poly, ExactPoly):
        return _critical_exact(poly, nominal)
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


def _critical_exact(poly: "ExactPoly", nominal):
    """:func:`_critical` on the exact polynomial: the coefficients and the discriminant
    factored by python-flint, each factor linear in q solved exactly, and the values at
    nominal computed exactly where every other symbol has a rational nominal value."""
    iq, q = poly.iq, poly.q
    exprs = [poly.coeffs[-1], poly.coeffs[0]]
    if poly.degree() >= 2:
        exprs.append(poly.poly.discriminant(f"w{poly.ix}"))
    pts = {}
    for e in exprs:
        for fac in poly.factors(e):
            dq = fac.degrees()[iq]
            if dq == 0:
                continue
            if dq == 1:
                a1, a0 = fac.derivative(iq), fac.subs({iq: flint.fmpq(0)})
                n, d = poly.cancel(-a0, a1)
                sym = poly.ratio_expr(n, d)
                used = [v for v, k in zip(poly.names, n.degrees()) if k] + \
                    [v for v, k in zip(poly.names, d.degrees()) if k]
                vals = _exact_point(used, nominal)
                if vals is None:
                    v = sym.xreplace(nominal)           # a symbol without a rational nominal
                    if v.is_number and v.is_real:
                        pts[sympy.nsimplify(v)] = sym
                    continue
                at = dict(zip(used, vals))
                point = [at.get(v, flint.fmpq(0)) for v in poly.names]
                dv = d(*point)
                if dv != 0:
                    v = n(*point) / dv
                    pts[sympy.Rational(int(v.p), int(v.q))] = sym
                continue
            free = [v for v, k in zip(poly.names, fac.degrees()) if k and v != poly.q]
            vals = _exact_point(free, nominal)
            if vals is None:                # as the sympy route does it
                num_fac = sympy.Poly(poly.expr(fac).xreplace(nominal), q)
                if not num_fac.free_symbols - {q}:
                    for r in num_fac.real_roots():
                        pts.setdefault(r, None)
                continue
            uni = fac.subs({poly.names.index(v): c for v, c in zip(free, vals)})
            if any(k for j, k in enumerate(uni.degrees()) if j != iq):
                continue
            coeffs = [c for c in _coefficients(uni, iq)]
            num_fac = sympy.Poly.from_list(
                [sympy.Rational(int(c.leading_coefficient().p), int(c.leading_coefficient().q))
                 if not c.is_zero() else 0 for c in reversed(coeffs)], q)
            for r in num_fac.real_roots():
                pts.setdefault(r, None)
    return sorted(pts.items(), key=lambda kv: float(kv[0]))


def valid_range(root, poly, x, q, nominal):
    """Intervals of q, others at nominal, where ``root`` is real and positive, as
    [(low, high)] with each end (exact value, symbolic end or None); None ends unbounded."""
    nominal = {k: v for k, v in nominal.items() if k != q}
    crit = _critical(poly, x, q, nominal)
    values = root if isinstance(root, RootValues) else RootValues(root)
    root = values.root
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
        v = values.at({**nominal, q: probe})
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


SUBSTITUTED_CHARS = 20000   # the JSON contract's "unreasonably large" (SHEET.md §4)


def _substituted_size(expr, x, root) -> int:
    """About how many characters ``expr`` with ``x`` replaced by ``root`` prints to."""
    return len(str(expr)) + expr.count(x) * (len(str(root)) + 2 - len(str(x)))


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
    try:                # num - q·den exactly in python-flint, from the closed form's tree
        poly = ExactPoly(expr, x, q)
    except ValueError:  # roots, irrational constants: the sympy route
        poly = None
    if poly is not None:
        num, den = poly.expr(poly.num), poly.expr(poly.den)
        expanded = poly.grouped()
    else:
        num, den, poly = _sympy_poly(expr, x, q)
        expanded = poly.as_expr() if poly is not None else None
    if poly is None or (not isinstance(poly, ExactPoly) and
                        any(not c.is_polynomial(x) or c.has(x) for c in poly.coeffs())):
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
    q_nom = _value_at(poly, expr, nominal)
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
                  [Equation(sympy.expand(num - q * den) if not isinstance(poly, ExactPoly)
                            else poly.expr(poly.poly), expanded,
                            check=(expr - q) * den)], kind="inversion")]
    listed, chosen = [], None
    values = [RootValues(r) for r in roots]
    for i, r in enumerate(roots):
        how, ok, used = _sub_back(expr, x, r, q)
        v = values[i].at(nominal) if have_nominal else None
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
        size = _substituted_size(expr, x, r)
        if size <= SUBSTITUTED_CHARS:
            back = Equation(q, expr.xreplace({x: r}))
            named = ""
        else:               # shown with x standing for the root of the equation before it
            back = Equation(q, expr)
            named = (f" ({x} stands for the root in the closed form: written out, the "
                     f"substituted form has about {size} characters)")
        back.mark(how or "points", ok, used)
        eq.mark(how or "points", ok, used)    # the root is checked by substituting it back
        steps.append(Step(f"Root {i + 1} ({method}); substituting it back into the closed form "
                          f"gives {q} identically{named}.", [eq, back], [req.solve_for],
                          kind="inversion"))
    pick = chosen if chosen is not None else 0
    root = roots[pick]
    for i, d in enumerate(listed):
        d["chosen"] = i == pick
    conditions = []
    for fac in values[pick].den_factors():
        if fac.free_symbols:
            conditions.append(f"{to_text(fac)} != 0")
    den_factors = poly.factor_exprs(poly.den) if isinstance(poly, ExactPoly) else \
        [f for f, _m in edge.factor_list(den)[1]]
    for fac in den_factors:
        if fac.free_symbols:
            conditions.append(f"{to_text(fac)} != 0 (the closed form of {name} is defined)")
    rng = valid_range(values[pick], poly, x, q, nominal) if have_nominal else []
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
