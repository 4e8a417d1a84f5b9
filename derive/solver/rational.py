"""Exact multivariate rational functions over the rationals (python-flint ``fmpq_mpoly``).

Sympy's ``cancel``, ``factor`` and ``Poly`` are slow on the polynomials a circuit of a dozen
parts gives; here a rational function is a pair of flint polynomials on one shared set of
symbols, cancelled once, and limits in one symbol, ratios and comparisons stay in flint.
Sympy appears only at the edges (:func:`common`, :meth:`Rational.to_sympy`).

>>> a, b, x = sympy.symbols('a b x')
>>> f, g = common([a*x/(a + x), a])
>>> f.limit(x, at_infinity=True) == g
True
>>> f.limit(x, at_infinity=False).is_zero()
True
"""
from __future__ import annotations

import flint
import sympy

INFINITE = "infinite"


class NotPolynomial(ValueError):
    """The expression is not a rational function of its symbols (a root, a float...)."""


class Rational:
    """``num/den`` on ``symbols`` (``den`` monic in the lexicographic order, no common
    factor)."""

    def __init__(self, num, den, symbols, ctx, cancel: bool = True):
        if den.is_zero():
            raise ZeroDivisionError("zero denominator")
        if cancel:
            g = num.gcd(den)
            if not g.is_zero() and not g.is_one():
                num, den = num / g, den / g
        lc = den.leading_coefficient()
        self.num, self.den = num / lc, den / lc
        self.symbols, self.ctx = symbols, ctx

    def is_zero(self) -> bool:
        return self.num.is_zero()

    def is_constant(self) -> bool:
        return self.num.total_degree() <= 0 and self.den.total_degree() <= 0

    def __eq__(self, other) -> bool:
        if isinstance(other, int):
            return self.num == self.ctx.constant(other) * self.den
        return self.num * other.den == other.num * self.den

    __hash__ = None

    def __truediv__(self, other) -> "Rational":
        return Rational(self.num * other.den, self.den * other.num, self.symbols, self.ctx)

    def __sub__(self, other) -> "Rational":
        return Rational(self.num * other.den - other.num * self.den, self.den * other.den,
                        self.symbols, self.ctx)

    def limit(self, x, at_infinity: bool):
        """The limit as the symbol ``x`` goes to 0 or to +infinity: a :class:`Rational` in
        the other symbols, or :data:`INFINITE` where it diverges."""
        i = self.symbols.index(x)
        if self.num.is_zero():
            return self
        kn, cn = _extreme_part(self.num, i, at_infinity, self.ctx)
        kd, cd = _extreme_part(self.den, i, at_infinity, self.ctx)
        if kn == kd:
            return Rational(cn, cd, self.symbols, self.ctx)
        if (kn > kd) == at_infinity:
            return INFINITE
        return Rational(self.ctx.constant(0), self.ctx.constant(1), self.symbols, self.ctx)

    def to_sympy(self, factored: bool = True) -> sympy.Expr:
        from derive.solver.convert import factored_expr, poly_expr
        build = factored_expr if factored else poly_expr
        return build(self.num, self.symbols) / build(self.den, self.symbols)


def _extreme_part(p, i, highest: bool, ctx):
    """(k, coefficient of x_i^k) with k the highest or lowest power of x_i in ``p``."""
    terms = p.to_dict()
    k = (max if highest else min)(m[i] for m in terms)
    part = {m[:i] + (0,) + m[i + 1:]: c for m, c in terms.items() if m[i] == k}
    return k, ctx.from_dict(part)


def common(exprs) -> list:
    """Sympy rational functions as :class:`Rational` on one shared set of symbols (sorted by
    name); :class:`NotPolynomial` where one is not a rational function of its symbols."""
    symbols = sorted(set().union(*(e.free_symbols for e in exprs)), key=str) or \
        [sympy.Symbol("_none")]
    ctx = flint.fmpq_mpoly_ctx.get(tuple(f"x{i}" for i in range(len(symbols))), "lex")
    out = []
    for e in exprs:
        num, den = sympy.fraction(sympy.together(e))
        out.append(Rational(_poly(num, symbols, ctx), _poly(den, symbols, ctx), symbols, ctx))
    return out


def _poly(e, symbols, ctx):
    try:
        d = sympy.Poly(sympy.expand(e), *symbols).as_dict()
    except sympy.PolynomialError as err:
        raise NotPolynomial(str(err)) from None
    out = {}
    for k, c in d.items():
        if not c.is_Rational:
            raise NotPolynomial(f"coefficient {c} is not rational")
        out[k] = flint.fmpq(int(c.p), int(c.q))
    return ctx.from_dict(out) if out else ctx.constant(0)
