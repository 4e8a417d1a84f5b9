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
    function of its symbols. Built node by node in flint (:class:`Builder`: sums, products
    and integer powers of polynomials, never ``sympy.expand``), cancelled once."""
    symbols, ctx = _ring(exprs, extra)
    b = Builder(symbols, ctx)
    out = []
    for e in exprs:
        num, den = b.ratio(e)
        out.append(Rational(num, den, symbols, ctx))
    return out


def _ring(exprs, extra=()):
    symbols = sorted(set().union(*(e.free_symbols for e in exprs), extra), key=str) or \
        [sympy.Symbol("_none")]
    ctx = flint.fmpq_mpoly_ctx.get(tuple(f"x{i}" for i in range(len(symbols))), "lex")
    return symbols, ctx


class Builder:
    """Sympy expressions to flint, node by node (memoised on sub-expressions): ``ratio``
    gives ``(num, den)`` polynomials (not cancelled), ``factors`` the factorisation into
    monic irreducible polynomials with integer exponents (negative in the denominator),
    factoring each sum on its own (a product of small factors is never expanded)."""

    def __init__(self, symbols, ctx):
        self.symbols, self.ctx = list(symbols), ctx
        self.gen = dict(zip(self.symbols, ctx.gens()))
        self._ratios: dict = {}
        self._factors: dict = {}

    def _number(self, e):
        if e.is_Rational:
            return flint.fmpq(int(e.p), int(e.q))
        raise NotPolynomial(f"{e} is not a rational number")

    def ratio(self, e) -> tuple:
        got = self._ratios.get(e)
        if got is not None:
            return got
        ctx = self.ctx
        if e.is_Symbol:
            if e not in self.gen:
                raise NotPolynomial(f"unknown symbol {e}")
            out = (self.gen[e], ctx.constant(1))
        elif e.is_Number:
            out = (ctx.constant(self._number(e)), ctx.constant(1))
        elif e.is_Add:
            n, d = ctx.constant(0), ctx.constant(1)
            for a in e.args:
                an, ad = self.ratio(a)
                if ad == d:
                    n = n + an
                else:
                    g = d.gcd(ad)
                    dq, aq = (d / g, ad / g) if not g.is_one() else (d, ad)
                    n, d = n * aq + an * dq, d * aq
            out = (n, d)
        elif e.is_Mul:
            n, d = ctx.constant(1), ctx.constant(1)
            for a in e.args:
                an, ad = self.ratio(a)
                n, d = n * an, d * ad
            out = (n, d)
        elif e.is_Pow and e.exp.is_Integer:
            bn, bd = self.ratio(e.base)
            k = int(e.exp)
            if k < 0:
                bn, bd, k = bd, bn, -k
                if bd.is_zero():
                    raise ZeroDivisionError("zero denominator")
            out = (bn ** k, bd ** k)
        else:
            raise NotPolynomial(f"not a rational function: {type(e).__name__}")
        self._ratios[e] = out
        return out

    def factors(self, e) -> tuple:
        """``(c, {key: [p, k]})``: ``e = c · prod p^k``, ``c`` an ``fmpq``, each ``p`` monic
        and irreducible over the rationals, ``k`` a nonzero integer; ``key`` is ``str(p)``."""
        got = self._factors.get(e)
        if got is not None:
            return got
        if e.is_Number:
            out = (self._number(e), {})
        elif e.is_Symbol:
            n, _d = self.ratio(e)
            out = (flint.fmpq(1), {str(n): [n, 1]})
        elif e.is_Mul:
            c, fs = flint.fmpq(1), {}
            for a in e.args:
                ac, afs = self.factors(a)
                c = c * ac
                _merge(fs, afs, 1)
            out = (c, fs)
        elif e.is_Pow and e.exp.is_Integer:
            bc, bfs = self.factors(e.base)
            k = int(e.exp)
            if bc == 0 and k < 0:
                raise ZeroDivisionError("zero denominator")
            fs = {}
            _merge(fs, bfs, k)
            out = (bc ** k if k >= 0 else 1 / bc ** (-k), fs)
        else:                                       # a sum: one ratio, factored in flint
            n, d = self.ratio(e)
            if d.is_zero():
                raise ZeroDivisionError("zero denominator")
            if n.is_zero():
                out = (flint.fmpq(0), {})
            else:
                cn, fn = _factor(n)
                cd, fd = _factor(d)
                fs = {}
                _merge(fs, fn, 1)
                _merge(fs, fd, -1)
                out = (cn / cd, fs)
        self._factors[e] = out
        return out


def _factor(p) -> tuple:
    """(c, {key: [monic irreducible, k]}) of a nonzero polynomial ``p``."""
    c, fs = p.factor()
    c = flint.fmpq(c)
    out = {}
    for f, k in fs:
        lc = f.leading_coefficient()
        if lc != 1:
            f = f / lc
            c = c * lc ** k
        _merge(out, {str(f): [f, k]}, 1)
    return c, out


def _merge(into: dict, more: dict, times: int) -> None:
    for key, (p, k) in more.items():
        if key in into:
            into[key][1] += k * times
            if into[key][1] == 0:
                del into[key]
        else:
            into[key] = [p, k * times]


class Factored:
    """An exact rational function as ``c · prod p_i^k_i`` on ``symbols``: ``c`` an ``fmpq``,
    ``factors`` a list of ``(p, k)`` with ``p`` monic irreducible polynomials (python-flint)
    and ``k`` nonzero integers (negative: in the denominator). No two factors are equal, so
    the function is cancelled."""

    def __init__(self, c, factors, symbols, ctx):
        self.c, self.factors, self.symbols, self.ctx = c, factors, symbols, ctx

    def expanded(self) -> Rational:
        """The same function as one :class:`Rational` (numerator and denominator
        multiplied out)."""
        n, d = self.ctx.constant(self.c), self.ctx.constant(1)
        for p, k in self.factors:
            if k > 0:
                n = n * p ** k
            else:
                d = d * p ** (-k)
        return Rational(n, d, self.symbols, self.ctx, cancel=False)


def factored(expr, extra=()) -> Factored:
    """``expr`` (a sympy rational function) as a :class:`Factored` function: each sum in it
    factored on its own in flint (``fmpq_mpoly.factor``), the factors of the whole product
    merged and cancelled; :class:`NotPolynomial` where ``expr`` is not a rational function.

    >>> a, x = sympy.symbols('a x')
    >>> f = factored((x**2 - a**2)/(x + a)**2 * 3)     # = -3 (a - x)/(a + x), a = x0
    >>> f.c, sorted((str(p), k) for p, k in f.factors)
    (-3, [('x0 + x1', -1), ('x0 - x1', 1)])
    """
    symbols, ctx = _ring([expr], extra)
    b = Builder(symbols, ctx)
    c, fs = b.factors(expr)
    if c == 0:
        return Factored(flint.fmpq(0), [], symbols, ctx)
    return Factored(c, [(p, k) for p, k in fs.values()], symbols, ctx)


def split(p, x, like) -> list:
    """Ascending coefficients of the polynomial ``p`` in the symbol ``x`` of ``like`` (a
    :class:`Rational` or :class:`Factored`): flint polynomials in the other symbols."""
    return _split(p, like.symbols.index(x), like.ctx)
