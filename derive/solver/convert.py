"""The edge between exact ring polynomials and sympy: results in the circuit's own symbols.

A :class:`~derive.solver.cramer.Ratio` is over ring variables (``1/R`` for resistances, see
:mod:`derive.solver.stamping`). :func:`to_symbols` turns it into a cancelled ratio of polynomials in the
circuit's symbols -- multiplying through by the right power of every resistance, in the exact
polynomial domain -- and :func:`to_sympy` factors it (python-flint's multivariate factoring)
and builds the sympy expression. :func:`value_at` evaluates exactly at nominal values.
"""
from __future__ import annotations

import math
from fractions import Fraction

import flint
import sympy

from derive.circuit.build import S


def _atoms(system):
    """Target symbols: one per plain symbol behind a ring variable, plus placeholders."""
    targets, where, subs = [], [], {}
    for v in system.vars:
        e = v.expr
        if v.kind == "src":
            e = v.expr if (v.expr.is_Symbol) else sympy.Symbol(f"_src_{v.source}")
            if not v.expr.is_Symbol:
                subs[e] = v.expr
        elif not e.is_Symbol:
            ph = sympy.Symbol(f"_{v.name}")
            subs[ph] = (1 / e) if v.kind == "recip" else e
            e = ph
            where.append((v, e, False))
            if e not in targets:
                targets.append(e)
            continue
        if e not in targets:
            targets.append(e)
        where.append((v, e, v.kind == "recip"))
    return targets, where, subs


def to_symbols(ratio):
    """(num, den, ctx, symbols, subs): polynomials in the circuit symbols, cancelled.

    ``subs`` maps placeholder symbols to the compound expressions they stand for.
    """
    system = ratio.system
    targets, where, subs = _atoms(system)
    if not targets:
        targets = [sympy.Symbol("_none")]
    ctx = flint.fmpq_mpoly_ctx.get(tuple(str(t) for t in targets) if len(set(map(str, targets))) == len(targets)
                                   else tuple(f"t{i}" for i in range(len(targets))), "lex")
    tindex = {t: i for i, t in enumerate(targets)}
    num_d, den_d = ratio.num.to_dict(), ratio.den.to_dict()
    nv = len(system.vars)
    shift = [0] * nv
    for k, (v, t, recip) in enumerate(where):
        if recip:
            dn = max((e[k] for e in num_d), default=0)
            dd = max((e[k] for e in den_d), default=0)
            shift[k] = max(dn, dd)

    def convert(d):
        out = {}
        for exps, c in d.items():
            ne = [0] * len(targets)
            for k, (v, t, recip) in enumerate(where):
                x = exps[k] if nv else 0
                ne[tindex[t]] += (shift[k] - x) if recip else x
            if not nv:
                pass
            key = tuple(ne)
            out[key] = out.get(key, 0) + c
        return ctx.from_dict({k: v for k, v in out.items() if v != 0}) if out else ctx.constant(0)

    if nv:
        num, den = convert(num_d), convert(den_d)
    else:
        num = ctx.constant(ratio.num.to_dict().get((0,), 0) if ratio.num.to_dict() else 0)
        den = ctx.constant(ratio.den.to_dict().get((0,), 1))
    g = num.gcd(den)
    if not g.is_one() and not g.is_zero():
        num, den = num / g, den / g
    lc = den.leading_coefficient()
    num, den = num / lc, den / lc
    return num, den, ctx, targets, subs


def poly_expr(p, symbols) -> sympy.Expr:
    """A polynomial as a sympy sum (rational coefficients kept exact)."""
    terms = []
    one = flint.fmpq(1)
    for exps, c in p.to_dict().items():
        # a symbol to the first power as itself and a unit coefficient left out: the same
        # expression with a third of the sympy calls (most terms of a circuit polynomial
        # are products of distinct symbols with coefficient 1)
        f = [s if e == 1 else sympy.Pow(s, e) for s, e in zip(symbols, exps) if e]
        if c != one or not f:
            f.insert(0, sympy.Rational(int(c.p), int(c.q)))
        terms.append(f[0] if len(f) == 1 else sympy.Mul(*f))
    return sympy.Add(*terms)


def factored_expr(p, symbols) -> sympy.Expr:
    if p.is_zero():
        return sympy.Integer(0)
    if len(p) > 3000:
        return poly_expr(p, symbols)
    content, factors = p.factor()
    out = [sympy.Rational(int(content.p), int(content.q))]
    for f, e in factors:
        out.append(poly_expr(f, symbols) ** e)
    return sympy.Mul(*out)


def to_sympy(ratio) -> sympy.Expr:
    """The ratio as a factored sympy expression in the circuit's symbols."""
    num, den, ctx, symbols, subs = to_symbols(ratio)
    e = factored_expr(num, symbols) / factored_expr(den, symbols)
    if subs:
        e = sympy.factor(sympy.cancel(e.xreplace(subs)))
    return e


def printed_length_at_least(ratio) -> int:
    """A lower bound of ``len(str(to_sympy(ratio)))`` without building the sympy form:
    every term of every factor of the numerator and denominator prints the names of its
    symbols, and the terms of a sum are separated by " + " or " - " (3 characters). 0 where
    placeholders stand for compound values (their substitution may change the form)."""
    num, den, _ctx, symbols, subs = to_symbols(ratio)
    if subs:
        return 0
    names = [len(str(x)) for x in symbols]
    total = 0
    for p in (num, den):
        if p.is_zero():
            continue
        factors = [p] if len(p) > 3000 else [f for f, _e in p.factor()[1]]
        for f in factors:
            total += 3 * (len(f) - 1)
            for exps in f.monoms():
                total += sum(n for n, e in zip(names, exps) if e)
    return total


NOT_EXACT = object()    # var_value/var_values: some value is not a finite rational


def var_value(v, nominal: dict):
    """Exact value (flint fmpq) of one ring variable at nominal values; None where a symbol
    behind it has no nominal value (or it is ``s``); NOT_EXACT where the value is not a
    finite rational (a resistance of nominal 0, a root)."""
    x = v.expr.xreplace(nominal)
    if not x.is_number:
        return None
    if v.kind == "recip":
        if x == 0:
            return NOT_EXACT
        x = 1 / x
    if not x.is_Rational:
        return NOT_EXACT
    return flint.fmpq(int(x.p), int(x.q))


def var_values(system, nominal: dict):
    """Exact values (flint fmpq) of every ring variable at nominal values, or None if some
    variable has no value (a symbol without nominal, or ``s``)."""
    vals = []
    for v in system.vars:
        x = var_value(v, nominal)
        if x is None or x is NOT_EXACT:
            return x
        vals.append(x)
    return vals


def used_vars(ratio) -> list:
    """Indices of the ring variables that occur in the (cancelled) ratio."""
    nv = len(ratio.system.vars)
    if not nv:
        return []
    used = [False] * nv
    for p in (ratio.num, ratio.den):
        if p.is_zero():
            continue
        for k, d in enumerate(p.degrees()):     # flint: the degree in each variable
            if d > 0:
                used[k] = True
    return [k for k in range(nv) if used[k]]


def _aliased(system, k) -> bool:
    """Whether ring variable ``k`` shares a symbol with another one, or stands for a compound
    expression (then its occurrence in a cancelled ring ratio does not prove that the
    result depends on its symbols: ``1/R`` and ``R`` may cancel)."""
    v = system.vars[k]
    if not v.expr.is_Symbol:
        return True
    return any(j != k and v.expr in w.expr.free_symbols for j, w in enumerate(system.vars))


def exact_number(v):
    """An exact sympy number as a float (or complex) at the edge; None if not finite."""
    if v.is_Rational:
        return float(Fraction(int(v.p), int(v.q)))
    if v.has(sympy.zoo, sympy.nan, sympy.oo, -sympy.oo):
        return None
    c = complex(sympy.N(v, 30))
    return c.real if c.imag == 0 else c


def finite_float(v):
    """A value at the edge as a finite real float, or None: None stays None, a complex
    number with a nonzero imaginary part and an infinite or NaN value become None (the
    record's numbers are finite reals or null)."""
    if v is None:
        return None
    if isinstance(v, complex):
        if v.imag != 0:
            return None
        v = v.real
    v = float(v)
    return v if math.isfinite(v) else None


def value_at(ratio, nominal: dict):
    """The ratio's exact value at nominal values, as a float at the edge; None where a symbol
    *of this result* has no nominal value (symbols elsewhere in the circuit do not matter).

    Only the ring variables that occur in the cancelled ratio are evaluated; where one of
    them has no value but may cancel against another (a shared or compound symbol), the
    closed form in the circuit's symbols decides.
    """
    system = ratio.system
    used = used_vars(ratio)
    vals = [flint.fmpq(0)] * len(system.vars)
    closed_form = False
    for k in used:
        x = var_value(system.vars[k], nominal)
        if x is None:
            if not _aliased(system, k):
                return None        # a symbol of this result without nominal value
            closed_form = True
        elif x is NOT_EXACT:
            closed_form = True
        else:
            vals[k] = x
    if closed_form:
        v = to_sympy(ratio).xreplace(nominal)
        if v.free_symbols:
            v = sympy.cancel(v)
        if not v.is_number:
            return None
        return exact_number(v)
    if not system.vars:
        n, d = ratio.num.to_dict(), ratio.den.to_dict()
        num = n.get((0,), 0) if n else 0
        den = d.get((0,), 1) if d else 1
        num, den = flint.fmpq(num), flint.fmpq(den)
    else:
        num, den = ratio.num(*vals), ratio.den(*vals)
    if den == 0:
        return float("inf")
    return float(Fraction(int(num.p), int(num.q)) / Fraction(int(den.p), int(den.q)))


def _flint_of(expr, symbols):
    """A polynomial sympy expression as an ``fmpq_mpoly`` in ``symbols`` (exact)."""
    ctx = flint.fmpq_mpoly_ctx.get(tuple(f"x{i}" for i in range(len(symbols))) or ("x0",),
                                   "lex")
    d = sympy.Poly(expr, *symbols).as_dict() if symbols else {(): sympy.Rational(expr)}
    out = {}
    for k, c in d.items():
        c = sympy.Rational(c)
        out[k if symbols else (0,)] = flint.fmpq(int(c.p), int(c.q))
    return ctx.from_dict(out) if out else ctx.constant(0)


def factor_list(expr) -> tuple:
    """(content, [(factor, multiplicity)]) of a polynomial sympy expression with rational
    coefficients, factored by python-flint (much faster than sympy's ``factor_list`` on the
    polynomials a circuit gives); the factors are sympy expressions.

    >>> a, b = sympy.symbols('a b')
    >>> factor_list(2*a**2 - 2*b**2)
    (2, [(a - b, 1), (a + b, 1)])
    """
    expr = sympy.expand(expr)
    symbols = sorted(expr.free_symbols, key=str)
    p = _flint_of(expr, symbols)
    if p.is_zero():
        return sympy.Integer(0), []
    content, factors = p.factor()
    out = [(poly_expr(f, symbols), e) for f, e in factors]
    out.sort(key=lambda fe: sympy.default_sort_key(fe[0]))
    return sympy.Rational(int(content.p), int(content.q)), out


def _cancelled(expr):
    num, den = sympy.fraction(sympy.together(expr))
    symbols = sorted(sympy.Add(num, den).free_symbols, key=str)
    n, d = _flint_of(sympy.expand(num), symbols), _flint_of(sympy.expand(den), symbols)
    g = n.gcd(d)
    if not g.is_one() and not g.is_zero():
        n, d = n / g, d / g
    return n, d, symbols


def cancelled(expr) -> tuple:
    """(numerator, denominator) of a rational function of symbols, expanded, with their
    greatest common divisor cancelled by python-flint (``sympy.cancel`` without its cost).

    >>> a, b = sympy.symbols('a b')
    >>> cancelled((a**2 - b**2)/(a*b + b**2))
    (a - b, b)
    """
    n, d, symbols = _cancelled(expr)
    return poly_expr(n, symbols), poly_expr(d, symbols)


def factor(expr) -> sympy.Expr:
    """A rational function of symbols, cancelled and factored by python-flint.

    >>> a, b = sympy.symbols('a b')
    >>> factor((a**2 - b**2)/(a*b + b**2))
    (a - b)/b
    """
    n, d, symbols = _cancelled(expr)
    return factored_expr(n, symbols) / factored_expr(d, symbols)
