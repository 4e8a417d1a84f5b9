"""Exact univariate rational functions over the rationals (python-flint ``fmpq_poly``).

Three tools for r(t) = N(t)/D(t) with rational coefficients:

* :func:`real_roots` -- the real roots of a polynomial in a closed interval [a, b], isolated
  exactly and refined to a requested width. Rational roots come exactly from flint's
  factorisation over Q; the roots of each irreducible factor of degree >= 2 are irrational,
  so they never fall on a rational point, and are isolated by a Sturm sequence in exact
  rational arithmetic and refined by bisection. Every root is a :class:`RealRoot`: an
  enclosure [lo, hi] with rational ends and the irreducible factor it is a root of.
* :func:`extremes` -- the minimum and maximum of r on [a, b], at the ends or at the real roots
  of N'D - ND'. A value is exact at a rational point, and also at an irrational critical point
  t* when N/D reduces modulo t*'s minimal polynomial to a constant; otherwise it is enclosed
  by exact interval evaluation to the requested width. A root of D in [a, b] is an error.
* :func:`integrate` -- the definite integral of r over [a, b] (ends may be infinite) when D
  has no root there: a rigorous enclosure from flint's ``acb.integral`` (ball arithmetic, so
  the stated error bound is proved, not estimated) and, when sympy finds one, an exact closed
  form, which is kept only if its own ball value meets the enclosure.

Polynomials are given as ``fmpq_poly`` or as a sequence of exact coefficients, lowest degree
first (flint's order): ``[1, 0, 1]`` is 1 + t**2. Floats are refused.

>>> [str(r) for r in real_roots([-2, 0, 1], 0, 2, width=Fraction(1, 1000))]
['[1.4140 .. 1.4151] root of t^2 - 2']
>>> e = extremes([0, 1], [1, 0, 1], 0, 3)      # t/(1+t^2): max 1/2 at t = 1
>>> e.maximum.value, e.maximum.at
(Fraction(1, 2), (Fraction(1, 1),))
>>> i = integrate([1], [1, 0, 1], 0, 1)        # atan(1) = pi/4
>>> i.closed_form, i.status
(pi/4, 'agrees')
"""
from __future__ import annotations

from dataclasses import dataclass
from fractions import Fraction
from numbers import Rational
from typing import Sequence

import flint
from flint import acb, acb_poly, arb, fmpq, fmpq_poly, fmpz_poly

from derive.errors import DeriveError

__all__ = ["UnivariateError", "Unbounded", "RealRoot", "Extreme", "Extremes", "Integral",
           "as_poly", "real_roots", "extremes", "integrate", "interval_value"]

DEFAULT_WIDTH = Fraction(1, 2 ** 60)


class UnivariateError(DeriveError, ValueError):
    """Bad input to the univariate tools (float coefficients, zero denominator, ...)."""


class Unbounded(UnivariateError):
    """The denominator has a root in the interval: r is unbounded (or undefined) there."""


# ---------------------------------------------------------------- exact conversions

def _q(x, what: str = "value") -> fmpq:
    """An exact fmpq from an int, Fraction, fmpq, sympy Rational, ...; floats refused."""
    if isinstance(x, fmpq):
        return x
    if isinstance(x, (bool, float)):
        raise UnivariateError(f"{what} must be an exact rational, not {type(x).__name__} {x!r}")
    if isinstance(x, Rational):
        return fmpq(int(x.numerator), int(x.denominator))
    if isinstance(x, flint.fmpz):
        return fmpq(x)
    p, q = getattr(x, "p", None), getattr(x, "q", None)
    if isinstance(p, int) and isinstance(q, int):     # sympy.Rational
        return fmpq(p, q)
    raise UnivariateError(f"{what} must be an exact rational, not {type(x).__name__} {x!r}")


def _fr(x: fmpq) -> Fraction:
    return Fraction(int(x.p), int(x.q))


def as_poly(p) -> fmpq_poly:
    """An ``fmpq_poly`` from an fmpq_poly, fmpz_poly or exact coefficients (lowest first).

    >>> as_poly([1, Fraction(1, 2), 3])
    3*x^2 + 1/2*x + 1
    >>> as_poly([1, 0.5])
    Traceback (most recent call last):
    ...
    derive.solver.univariate.UnivariateError: coefficient 1 must be an exact rational, not float 0.5
    """
    if isinstance(p, fmpq_poly):
        return p
    if isinstance(p, fmpz_poly):
        return fmpq_poly(p)
    if isinstance(p, (str, bytes)) or not isinstance(p, Sequence):
        raise UnivariateError(f"a polynomial is an fmpq_poly or a list of coefficients, "
                              f"not {type(p).__name__}")
    return fmpq_poly([_q(c, f"coefficient {k}") for k, c in enumerate(p)])


def _poly_str(p: fmpq_poly, var: str = "t") -> str:
    terms = []
    for k in range(p.degree(), -1, -1):
        c = p[k]
        if c == 0:
            continue
        sign = "-" if c < 0 else "+"
        mag = abs(c)
        mono = "" if k == 0 else (var if k == 1 else f"{var}^{k}")
        body = str(mag) if not mono else (mono if mag == 1 else f"{mag}*{mono}")
        terms.append((sign, body))
    if not terms:
        return "0"
    first = ("-" if terms[0][0] == "-" else "") + terms[0][1]
    return " ".join([first] + [f"{s} {b}" for s, b in terms[1:]])


def _sign(x: fmpq) -> int:
    return (x > 0) - (x < 0)


# ---------------------------------------------------------------- roots

@dataclass(frozen=True)
class RealRoot:
    """A real root in the closed enclosure [lo, hi] (lo == hi exactly when it is rational).

    ``factor`` is the irreducible factor over Q it is a root of (its minimal polynomial, up to
    a constant) and ``multiplicity`` the factor's power in the polynomial searched.
    """
    lo: Fraction
    hi: Fraction
    factor: fmpq_poly
    multiplicity: int = 1

    @property
    def exact(self) -> Fraction | None:
        """The root itself when it is rational, else None."""
        return self.lo if self.lo == self.hi else None

    @property
    def width(self) -> Fraction:
        return self.hi - self.lo

    def refine(self, width) -> "RealRoot":
        """The same root with an enclosure no wider than ``width`` (> 0), by exact bisection."""
        w = _q(width, "width")
        if w <= 0:
            raise UnivariateError("width must be positive")
        if self.exact is not None or self.hi - self.lo <= _fr(w):
            return self
        f = self.factor
        lo, hi = _q(self.lo), _q(self.hi)
        s_lo = _sign(f(lo))
        while hi - lo > w:
            m = (lo + hi) / 2
            s = _sign(f(m))          # never 0: the root is irrational, m rational
            if s == s_lo:
                lo = m
            else:
                hi = m
        return RealRoot(_fr(lo), _fr(hi), f, self.multiplicity)

    def __str__(self) -> str:
        if self.exact is not None:
            return f"{self.exact} (exact)"
        w = self.width
        digits = max(3, len(str(w.denominator // w.numerator)))
        return (f"[{_decimal(self.lo, digits, up=False)} .. {_decimal(self.hi, digits, up=True)}]"
                f" root of {_poly_str(self.factor)}")


def _decimal(x: Fraction, digits: int, up: bool) -> str:
    """x rounded outward (down or up) to ``digits`` decimals, for display."""
    scaled = x * 10 ** digits
    k = -((-scaled.numerator) // scaled.denominator) if up else scaled.numerator // scaled.denominator
    sign = "-" if k < 0 else ""
    whole, frac = divmod(abs(k), 10 ** digits)
    return f"{sign}{whole}.{frac:0{digits}d}"


def _sturm(f: fmpq_poly) -> list[fmpq_poly]:
    seq = [f, f.derivative()]
    while seq[-1].degree() > 0:
        r = seq[-2] % seq[-1]
        if r.is_zero():
            break
        seq.append(-r)
    return seq


def _variations(seq: list[fmpq_poly], x: fmpq) -> int:
    signs = [s for s in (_sign(p(x)) for p in seq) if s != 0]
    return sum(1 for u, v in zip(signs, signs[1:]) if u != v)


def _isolate_irreducible(f: fmpq_poly, a: fmpq, b: fmpq) -> list[tuple[fmpq, fmpq]]:
    """Disjoint rational intervals, one per root of f (irreducible, degree >= 2) in [a, b].

    f has no rational root, so f(a), f(b) and f at every midpoint are non-zero and the Sturm
    count V(lo) - V(hi) is the number of roots in the open interval (lo, hi).
    """
    seq = _sturm(f)
    out = []
    stack = [(a, b, _variations(seq, a), _variations(seq, b))]
    while stack:
        lo, hi, vlo, vhi = stack.pop()
        n = vlo - vhi
        if n == 0:
            continue
        if n == 1:
            out.append((lo, hi))
            continue
        m = (lo + hi) / 2
        vm = _variations(seq, m)
        stack.append((m, hi, vm, vhi))
        stack.append((lo, m, vlo, vm))
    return sorted(out)


def real_roots(p, a, b, width=DEFAULT_WIDTH) -> list[RealRoot]:
    """The real roots of the polynomial ``p`` in the closed interval [a, b], ascending.

    Each enclosure is at most ``width`` wide, and the enclosures of distinct roots are disjoint.
    Rational roots are exact (``lo == hi``). The zero polynomial is refused.

    >>> [r.exact for r in real_roots([6, -5, 1], 0, 10)]        # (t - 2)(t - 3)
    [Fraction(2, 1), Fraction(3, 1)]
    >>> r, = real_roots([-2, 0, 1], 0, 2, width=Fraction(1, 10**6))
    >>> r.lo <= Fraction(1414214, 10**6) and r.lo**2 < 2 < r.hi**2
    True
    >>> [r.multiplicity for r in real_roots(as_poly([-1, 1])**3 * as_poly([1, 1]), -1, 1)]
    [1, 3]
    """
    f = as_poly(p)
    lo, hi, w = _q(a, "a"), _q(b, "b"), _q(width, "width")
    if lo > hi:
        raise UnivariateError(f"empty interval: a = {lo} > b = {hi}")
    if w <= 0:
        raise UnivariateError("width must be positive")
    if f.is_zero():
        raise UnivariateError("the zero polynomial has every number as a root")
    if f.degree() == 0:
        return []
    _, factors = f.factor()
    roots: list[RealRoot] = []
    for g, e in factors:
        if g.degree() == 1:
            x = -g[0] / g[1]
            if lo <= x <= hi:
                roots.append(RealRoot(_fr(x), _fr(x), g, int(e)))
            continue
        for ilo, ihi in _isolate_irreducible(g, lo, hi):
            roots.append(RealRoot(_fr(ilo), _fr(ihi), g, int(e)).refine(w))
    return _separate(roots)


def _separate(roots: list[RealRoot]) -> list[RealRoot]:
    """Sort, refining until the enclosures of distinct roots are disjoint (they are distinct)."""
    roots = sorted(roots, key=lambda r: (r.lo, r.hi))
    while True:
        clash = next((i for i in range(len(roots) - 1) if roots[i].hi >= roots[i + 1].lo), None)
        if clash is None:
            return roots
        for i in (clash, clash + 1):
            roots[i] = roots[i].refine(roots[i].width / 2) if roots[i].exact is None else roots[i]
        roots.sort(key=lambda r: (r.lo, r.hi))


# ---------------------------------------------------------------- interval evaluation

def interval_value(p, lo, hi) -> tuple[Fraction, Fraction]:
    """An exact rational enclosure of {p(t) : lo <= t <= hi} (Taylor form about the midpoint).

    With m the midpoint, h the half width and p(m + u) = sum c_k u**k, the range lies in
    c_0 -/+ sum_{k>=1} |c_k| h**k; the enclosure shrinks linearly with the width.

    >>> interval_value([0, 0, 1], -1, 2)     # t^2 on [-1, 2]: true range [0, 4]
    (Fraction(-7, 2), Fraction(4, 1))
    """
    f = as_poly(p)
    lo_q, hi_q = _q(lo), _q(hi)
    m, h = (lo_q + hi_q) / 2, (hi_q - lo_q) / 2
    shifted = f(fmpq_poly([m, 1]))
    c0 = shifted[0]
    spread = fmpq(0)
    hk = fmpq(1)
    for k in range(1, shifted.degree() + 1):
        hk *= h
        spread += abs(shifted[k]) * hk
    return _fr(c0 - spread), _fr(c0 + spread)


# ---------------------------------------------------------------- extremes

@dataclass(frozen=True)
class Extreme:
    """An extreme value in [lo, hi] (lo == hi when exact), attained at the points ``at``.

    ``at`` holds every candidate (an end, or a critical point: a Fraction or a RealRoot) whose
    value could not be told apart from the extreme; one entry unless values tie.
    """
    lo: Fraction
    hi: Fraction
    at: tuple

    @property
    def value(self) -> Fraction | None:
        """The exact extreme value, or None when it is only enclosed."""
        return self.lo if self.lo == self.hi else None


@dataclass(frozen=True)
class Extremes:
    minimum: Extreme
    maximum: Extreme
    critical: tuple          # every real root of N'D - ND' in [a, b]


@dataclass
class _Candidate:
    where: object            # Fraction or RealRoot
    lo: Fraction
    hi: Fraction
    value_poly: fmpq_poly | None = None   # N/D reduced modulo the root's minimal polynomial

    def refine(self, width: Fraction) -> None:
        r = self.where
        assert isinstance(r, RealRoot)
        r = r.refine(r.width / 2)
        self.where = r
        self.lo, self.hi = interval_value(self.value_poly, r.lo, r.hi)


def _reduced(N, D) -> tuple[fmpq_poly, fmpq_poly]:
    n, d = as_poly(N), as_poly(D)
    if d.is_zero():
        raise UnivariateError("the denominator is the zero polynomial")
    g = n.gcd(d)
    if not g.is_zero() and g.degree() > 0:
        n, d = n // g, d // g
    return n, d


def _check_no_pole(d: fmpq_poly, lo, hi, what: str) -> None:
    poles = real_roots(d, lo, hi, width=Fraction(1, 2 ** 20))
    if poles:
        raise Unbounded(f"the denominator has a root in {what}: {poles[0]}")


def extremes(N, D, a, b, width=DEFAULT_WIDTH) -> Extremes:
    """The minimum and maximum of r = N/D on [a, b] and where they occur.

    r is taken in lowest terms (a common factor of N and D cancels). If D then has a root in
    [a, b], :class:`Unbounded` is raised. Candidates are a, b and the real roots of N'D - ND'
    in [a, b]; values at rational candidates are exact, others enclosed to ``width``.

    >>> e = extremes([0, 0, 0, 1], [1], -2, 2)         # t^3 is monotone: extremes at the ends
    >>> (e.minimum.value, e.minimum.at), (e.maximum.value, e.maximum.at)
    ((Fraction(-8, 1), (Fraction(-2, 1),)), (Fraction(8, 1), (Fraction(2, 1),)))
    >>> e = extremes([0, -3, 0, 1], [1], -3, 3)        # t^3 - 3t: local min -2 at t = 1
    >>> e.minimum.value, e.minimum.at
    (Fraction(-18, 1), (Fraction(-3, 1),))
    >>> extremes([1], [-1, 0, 1], 0, 2)
    Traceback (most recent call last):
    ...
    derive.solver.univariate.Unbounded: the denominator has a root in [0, 2]: 1 (exact)
    """
    n, d = _reduced(N, D)
    lo, hi, w = _q(a, "a"), _q(b, "b"), _q(width, "width")
    if lo > hi:
        raise UnivariateError(f"empty interval: a = {lo} > b = {hi}")
    if w <= 0:
        raise UnivariateError("width must be positive")
    _check_no_pole(d, lo, hi, f"[{lo}, {hi}]")
    c = n.derivative() * d - n * d.derivative()
    crit = tuple(real_roots(c, lo, hi, width=w)) if not c.is_zero() else ()

    def exact_at(x: fmpq) -> Fraction:
        return _fr(n(x) / d(x))

    cands: list[_Candidate] = []
    seen: set[Fraction] = set()
    for x in [lo, hi] + [_q(r.exact) for r in crit if r.exact is not None]:
        fx = _fr(x)
        if fx not in seen:
            seen.add(fx)
            v = exact_at(x)
            cands.append(_Candidate(fx, v, v))
    for r in crit:
        if r.exact is not None:
            continue
        g, s, _ = d.xgcd(r.factor)         # s*d = g (mod factor), g a non-zero constant
        vp = (n * s / g[0]) % r.factor      # r(t*) = vp(t*)
        if vp.degree() <= 0:
            v = _fr(vp[0]) if not vp.is_zero() else Fraction(0)
            cands.append(_Candidate(r, v, v, vp))
        else:
            cand = _Candidate(r, *interval_value(vp, r.lo, r.hi), vp)
            cands.append(cand)
    fw = _fr(w)
    return Extremes(_pick(cands, fw, lower=True), _pick(cands, fw, lower=False), crit)


def _pick(cands: list[_Candidate], width: Fraction, lower: bool) -> Extreme:
    """The extreme over the candidates, refining the undecided inexact ones."""
    sign = -1 if lower else 1          # work on the maximum of sign*value

    def bounds(c):
        return (sign * c.lo, sign * c.hi) if sign > 0 else (sign * c.hi, sign * c.lo)

    while True:
        best_lo = max(bounds(c)[0] for c in cands)
        possible = [c for c in cands if bounds(c)[1] >= best_lo]
        top = max(bounds(c)[1] for c in possible)
        inexact = [c for c in possible if c.lo != c.hi]
        if top - best_lo <= width or not inexact:
            break
        for c in inexact:
            c.refine(width)
    lo_v, hi_v = (best_lo, top) if sign > 0 else (-top, -best_lo)
    if all(c.lo == c.hi for c in possible):      # every possible extreme exact: they tie
        lo_v = hi_v = possible[0].lo
    return Extreme(lo_v, hi_v, tuple(c.where for c in possible))


# ---------------------------------------------------------------- integration

@dataclass(frozen=True)
class Integral:
    """A definite integral: a proved enclosure [lo, hi], and an exact closed form if found.

    ``status`` is ``"agrees"`` (the closed form's ball value meets the enclosure),
    ``"unchecked"`` (sympy gave a form the ball evaluator cannot read, e.g. a RootSum),
    ``"rejected"`` (sympy's form is provably not the integral; ``closed_form`` is then None and
    ``rejected`` holds it) or ``"none"`` (no closed form asked for or found).
    """
    lo: Fraction
    hi: Fraction
    closed_form: object = None
    antiderivative: object = None
    status: str = "none"
    rejected: object = None

    @property
    def midpoint(self) -> Fraction:
        return (self.lo + self.hi) / 2

    @property
    def error_bound(self) -> Fraction:
        """|integral - midpoint| <= error_bound, proved by ball arithmetic."""
        return (self.hi - self.lo) / 2


def _is_oo(x) -> int:
    """+1 for +infinity, -1 for -infinity, 0 otherwise (sympy's oo or float inf)."""
    import sympy
    if x is sympy.oo or (isinstance(x, float) and x == float("inf")):
        return 1
    if x is sympy.S.NegativeInfinity or (isinstance(x, float) and x == float("-inf")):
        return -1
    return 0


def _homogenised(p: fmpq_poly, num: fmpq_poly, den: fmpq_poly, deg: int) -> fmpq_poly:
    """den**deg * p(num/den), exactly (deg >= p.degree())."""
    out = fmpq_poly([0])
    for k in range(p.degree() + 1):
        if p[k] != 0:
            out += p[k] * num ** k * den ** (deg - k)
    return out


def _on_unit_interval(n: fmpq_poly, d: fmpq_poly, a, b) -> list[tuple[fmpq_poly, fmpq_poly]]:
    """Pieces (P, Q): the integral over [a, b] is the sum of the integrals of P/Q over [0, 1]."""
    ia, ib = _is_oo(a), _is_oo(b)
    if ia == -1 and ib == 1:
        return _on_unit_interval(n, d, a, 0) + _on_unit_interval(n, d, 0, b)
    one_minus = fmpq_poly([1, -1])
    if ia == 0 and ib == 0:
        lo, hi = _q(a, "a"), _q(b, "b")
        t = fmpq_poly([lo, hi - lo])         # t = a + (b - a) u, dt = (b - a) du
        return [(n(t) * (hi - lo), d(t))]
    if ia == 1 or ib == -1:
        raise UnivariateError("an infinite lower limit must be -oo and an upper one +oo")
    if d.degree() < n.degree() + 2:
        raise UnivariateError("the integral over an infinite range diverges: "
                              "deg D < deg N + 2")
    # s: a power of two near the distance of D's roots from the finite end, so that the
    # poles do not crowd the end u = 1 of the integration path
    end = _q(a, "a") if ia == 0 else _q(b, "b")
    s = _scale(d(fmpq_poly([end, 1])))
    if ia == 0:          # [a, oo): t = a + s u/(1 - u) = (a + (s - a) u) / (1 - u), dt = s du/(1 - u)^2
        num = fmpq_poly([end, s - end])
    else:                # (-oo, b]: t = b - s u/(1 - u), dt = -s du/(1 - u)^2 (limits swap)
        num = fmpq_poly([end, -(s + end)])
    m, k = d.degree(), n.degree()
    P = _homogenised(n, num, one_minus, k) * one_minus ** (m - k - 2) * s
    Q = _homogenised(d, num, one_minus, m)
    g = P.gcd(Q)
    if not P.is_zero() and g.degree() > 0:
        P, Q = P // g, Q // g
    return [(P, Q)]


def _scale(p: fmpq_poly) -> fmpq:
    """A power of two near |p_0 / p_m|**(1/m), the geometric mean of |roots of p| (p_0 != 0)."""
    m = p.degree()
    ratio = abs(p[0] / p[m])
    bits = int(ratio.p).bit_length() - int(ratio.q).bit_length()
    k = round(bits / m)
    return fmpq(2) ** k if k >= 0 else 1 / fmpq(2) ** -k


def _arb_to_fraction(x: arb) -> Fraction:
    m, e = x.man_exp()
    m, e = int(m), int(e)
    return Fraction(m * 2 ** e) if e >= 0 else Fraction(m, 2 ** -e)


def _ball_integral(pieces, width: Fraction) -> tuple[Fraction, Fraction]:
    old = flint.ctx.prec
    try:
        prec, evals = 64, 10 ** 5
        while True:
            flint.ctx.prec = prec
            total = acb(0)
            for P, Q in pieces:
                pz, qz = P.numer(), Q.numer()          # P = pz / P.denom(), Q = qz / Q.denom()
                scale = fmpq(Q.denom(), P.denom())
                pa = acb_poly([acb(c) for c in pz.coeffs()])
                qa = acb_poly([acb(c) for c in qz.coeffs()])
                val = acb.integral(lambda x, _analytic: pa(x) / qa(x), 0, 1, eval_limit=evals)
                total += val * acb(arb(scale))
            re = total.real
            if re.is_finite() and total.imag.contains(0):
                lo, hi = _arb_to_fraction(re.lower()), _arb_to_fraction(re.upper())
                if hi - lo <= width:
                    return lo, hi
            if prec >= 8192:
                raise UnivariateError("the ball quadrature did not reach the requested width")
            prec, evals = prec * 2, evals * 8
    finally:
        flint.ctx.prec = old


class _Unsupported(Exception):
    pass


def _acb_of(expr) -> acb:
    """A ball enclosing a sympy expression built from rationals, pi, I, +, *, **, log, atan."""
    import sympy
    if expr.is_Rational:
        return acb(arb(fmpq(int(expr.p), int(expr.q))))
    if expr is sympy.pi:
        return acb(arb.pi())
    if expr is sympy.I:
        return acb(0, 1)
    if expr is sympy.E:
        return acb(arb(1).exp())
    if isinstance(expr, sympy.Add):
        out = acb(0)
        for t in expr.args:
            out += _acb_of(t)
        return out
    if isinstance(expr, sympy.Mul):
        out = acb(1)
        for t in expr.args:
            out *= _acb_of(t)
        return out
    if isinstance(expr, sympy.Pow):
        base, ex = expr.args
        if ex.is_Integer:
            return _acb_of(base) ** int(ex)
        if ex.is_Rational:
            return (_acb_of(base).log() * _acb_of(ex)).exp()
        raise _Unsupported(expr)
    if isinstance(expr, sympy.log) and len(expr.args) == 1:
        return _acb_of(expr.args[0]).log()
    if isinstance(expr, sympy.atan):
        return _acb_of(expr.args[0]).atan()
    if isinstance(expr, sympy.acot):
        return (1 / _acb_of(expr.args[0])).atan()
    if isinstance(expr, sympy.exp):
        return _acb_of(expr.args[0]).exp()
    raise _Unsupported(expr)


def _sympy_poly(p: fmpq_poly, t):
    import sympy
    return sympy.Add(*[sympy.Rational(int(p[k].p), int(p[k].q)) * t ** k
                       for k in range(p.degree() + 1) if p[k] != 0])


def _closed_form(n: fmpq_poly, d: fmpq_poly, a, b, var: str):
    """sympy's antiderivative and definite value, or (None, None) when it finds none."""
    import sympy
    t = sympy.Symbol(var, real=True)
    f = _sympy_poly(n, t) / _sympy_poly(d, t)
    F = sympy.integrate(f, t)
    if F.has(sympy.Integral):
        return None, None

    def at(x):
        s = _is_oo(x)
        if s:
            return sympy.limit(F, t, sympy.oo if s > 0 else -sympy.oo)
        q = _q(x)
        return F.subs(t, sympy.Rational(int(q.p), int(q.q)))
    value = at(b) - at(a)
    if value.has(sympy.Limit) or value.has(sympy.nan) or value.has(sympy.zoo) \
            or value.is_infinite:
        return F, None
    return F, value


def integrate(N, D, a, b, width=Fraction(1, 10 ** 20), closed_form: bool = True,
              var: str = "t") -> Integral:
    """The definite integral of N/D over [a, b]; D may have no root there.

    ``a``/``b`` are exact rationals, or ``sympy.oo``/``-sympy.oo`` (then deg D >= deg N + 2).
    The enclosure [lo, hi] is proved (flint ball quadrature, at most ``width`` wide). With
    ``closed_form``, sympy's exact value of the integral is returned as well, after its own
    ball value has been checked to meet the enclosure.

    >>> i = integrate([1], [1, 0, Fraction(1, 10**6)], 0, 10**4)   # fc = 1000 Hz, F = 10 kHz
    >>> i.closed_form, i.status
    (1000*atan(10), 'agrees')
    >>> import sympy
    >>> integrate([1], [1, 0, Fraction(1, 10**6)], 0, sympy.oo).closed_form  # NEB = pi/2 fc
    500*pi
    """
    n, d = _reduced(N, D)
    w = _q(width, "width")
    if w <= 0:
        raise UnivariateError("width must be positive")
    ia, ib = _is_oo(a), _is_oo(b)
    lo_s = None if ia else _q(a, "a")
    hi_s = None if ib else _q(b, "b")
    if lo_s is not None and hi_s is not None and lo_s > hi_s:
        # integral from a to b with a > b is minus the one from b to a
        flipped = integrate(n, d, b, a, width, closed_form, var)
        return Integral(-flipped.hi, -flipped.lo,
                        None if flipped.closed_form is None else -flipped.closed_form,
                        flipped.antiderivative, flipped.status,
                        None if flipped.rejected is None else -flipped.rejected)
    # no pole on the closed range: check over the finite part, and at infinity by degree
    if lo_s is None and hi_s is None:
        poles = real_roots(d, *_root_bound(d), width=Fraction(1, 2 ** 20))
        if poles:
            raise Unbounded(f"the denominator has a real root: {poles[0]}")
    else:
        span_lo = lo_s if lo_s is not None else -_root_bound(d)[1]
        span_hi = hi_s if hi_s is not None else _root_bound(d)[1]
        if span_lo <= span_hi:
            _check_no_pole(d, span_lo, span_hi, f"[{a}, {b}]")
    if n.is_zero():
        import sympy
        return Integral(Fraction(0), Fraction(0), sympy.S.Zero, sympy.S.Zero, "agrees")
    pieces = _on_unit_interval(n, d, a, b)
    lo, hi = _ball_integral(pieces, _fr(w))
    if not closed_form:
        return Integral(lo, hi)
    F, value = _closed_form(n, d, a, b, var)
    if value is None:
        return Integral(lo, hi, None, F, "none")
    try:
        old = flint.ctx.prec
        flint.ctx.prec = 256
        try:
            ball = _acb_of(value)
        finally:
            flint.ctx.prec = old
    except (_Unsupported, ZeroDivisionError, ValueError):
        return Integral(lo, hi, value, F, "unchecked")
    re = ball.real
    meets = (re.is_finite() and ball.imag.contains(0)
             and _arb_to_fraction(re.lower()) <= hi and lo <= _arb_to_fraction(re.upper()))
    if meets:
        return Integral(lo, hi, value, F, "agrees")
    return Integral(lo, hi, None, F, "rejected", value)


def _root_bound(d: fmpq_poly) -> tuple[fmpq, fmpq]:
    """[-B, B] holding every real root of d (Cauchy's bound 1 + max |d_k / d_lead|)."""
    lead = d[d.degree()]
    bound = 1 + max([abs(d[k] / lead) for k in range(d.degree())] or [fmpq(0)])
    return -bound, bound
