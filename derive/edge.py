"""The edge between exact ring polynomials and sympy: results in the circuit's own symbols.

A :class:`~derive.solve.Ratio` is over ring variables (``1/R`` for resistances, see
:mod:`derive.mna`). :func:`to_symbols` turns it into a cancelled ratio of polynomials in the
circuit's symbols -- multiplying through by the right power of every resistance, in the exact
polynomial domain -- and :func:`to_sympy` factors it (python-flint's multivariate factoring)
and builds the sympy expression. :func:`value_at` evaluates exactly at nominal values.
"""
from __future__ import annotations

from fractions import Fraction

import flint
import sympy

from .circuit import S


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
    for exps, c in p.to_dict().items():
        f = [sympy.Rational(int(c.p), int(c.q))]
        f += [s ** e for s, e in zip(symbols, exps) if e]
        terms.append(sympy.Mul(*f))
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


_NOT_EXACT = object()   # var_values: some value is not a finite rational


def var_values(system, nominal: dict):
    """Exact values (flint fmpq) of every ring variable at nominal values, or None if some
    variable has no value (a symbol without nominal, or ``s``)."""
    vals = []
    for v in system.vars:
        e = v.expr
        x = e.xreplace(nominal)
        if not x.is_number:
            return None
        if v.kind == "recip":
            if x == 0:
                return _NOT_EXACT      # a resistance of nominal 0: evaluate the closed form
            x = 1 / x
        x = sympy.nsimplify(x) if not x.is_Rational else x
        if not x.is_Rational:
            return _NOT_EXACT          # an irrational value (sqrt): evaluate the closed form
        vals.append(flint.fmpq(int(x.p), int(x.q)))
    return vals


def value_at(ratio, nominal: dict):
    """The ratio's value at nominal values (a float), or None."""
    vals = var_values(ratio.system, nominal)
    if vals is None:
        return None
    if vals is _NOT_EXACT:
        v = sympy.cancel(to_sympy(ratio).xreplace(nominal))
        if not v.is_number or v.has(sympy.zoo, sympy.nan, sympy.oo):
            return None
        v = complex(sympy.N(v))
        return v.real if v.imag == 0 else v
    if not ratio.system.vars:
        n, d = ratio.num.to_dict(), ratio.den.to_dict()
        num = n.get((0,), 0) if n else 0
        den = d.get((0,), 1) if d else 1
    else:
        num, den = ratio.num(*vals), ratio.den(*vals)
    if den == 0:
        return float("inf")
    return float(Fraction(int(num.p), int(num.q)) / Fraction(int(den.p), int(den.q)))
