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

    def _lift(self, other) -> "Rational":
        if isinstance(other, Rational):
            return other
        if isinstance(other, sympy.Basic):
            other = flint.fmpq(int(other.p), int(other.q))
        return Rational(self.ctx.constant(other), self.ctx.constant(1), self.symbols, self.ctx,
                        cancel=False)

    def __mul__(self, other) -> "Rational":
        other = self._lift(other)
        return Rational(self.num * other.num, self.den * other.den, self.symbols, self.ctx)

    __rmul__ = __mul__

    def __add__(self, other) -> "Rational":
        other = self._lift(other)
        return Rational(self.num * other.den + other.num * self.den, self.den * other.den,
                        self.symbols, self.ctx)

    __radd__ = __add__

    def __neg__(self) -> "Rational":
        return Rational(-self.num, self.den, self.symbols, self.ctx, cancel=False)

    def inverse(self) -> "Rational":
        return Rational(self.den, self.num, self.symbols, self.ctx)

    def derivative(self, x) -> "Rational":
        """d/dx, by the quotient rule on the polynomials."""
        i = self.symbols.index(x)
        return Rational(self.num.derivative(i) * self.den - self.num * self.den.derivative(i),
                        self.den * self.den, self.symbols, self.ctx)

    def sensitivity(self, x) -> "Rational":
        """The normalised sensitivity (x/f)·df/dx."""
        i = self.symbols.index(x)
        xg = self.ctx.gens()[i]
        return Rational(xg * (self.num.derivative(i) * self.den -
                              self.num * self.den.derivative(i)),
                        self.num * self.den, self.symbols, self.ctx)

    def coefficients(self, x) -> tuple:
        """(numerator, denominator) as ascending lists of their coefficients in the powers of
        the symbol ``x`` (flint polynomials in the other symbols)."""
        i = self.symbols.index(x)
        return _split(self.num, i, self.ctx), _split(self.den, i, self.ctx)

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


def _split(p, i, ctx) -> list:
    terms = p.to_dict()
    if not terms:
        return [ctx.constant(0)]
    top = max(m[i] for m in terms)
    parts = [dict() for _ in range(top + 1)]
    for m, c in terms.items():
        parts[m[i]][m[:i] + (0,) + m[i + 1:]] = c
    return [ctx.from_dict(d) if d else ctx.constant(0) for d in parts]


def ratio(num, den, like: Rational) -> Rational:
    """``num/den`` (flint polynomials of ``like``'s ring) as a cancelled :class:`Rational`."""
    return Rational(num, den, like.symbols, like.ctx)


def common(exprs, extra=()) -> list:
    """Sympy rational functions as :class:`Rational` on one shared set of symbols (sorted by
    name, ``extra`` symbols included); :class:`NotPolynomial` where one is not a rational
    function of its symbols."""
    symbols = sorted(set().union(*(e.free_symbols for e in exprs), extra), key=str) or \
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
