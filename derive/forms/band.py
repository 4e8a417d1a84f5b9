"""The mean square of a noise density over a band: ``int_{F1}^{F2} S0 P(w)/Q(w) df`` with
``w = 2 pi f`` and ``P``, ``Q`` exact polynomials in ``w`` (``|H(jw)|^2`` at nominal values).

* White (``P``, ``Q`` constants): ``S0 P/Q (F2 - F1)``, exact.
* Otherwise an exact closed form where sympy finds one for ``int P/Q dw`` (partial fractions:
  ``atan`` and ``log`` terms), for ``deg Q <= MAX_CLOSED``: the antiderivative is checked
  exactly (its derivative minus ``P/Q`` cancels), and its value over the band must meet
  the enclosure below; the mean square is ``(G(2 pi F2) - G(2 pi F1)) / (2 pi)``.
* Always a proved enclosure: python-flint's ``acb.integral`` (ball arithmetic) of the
  integrand over the band; where there is no closed form its midpoint is the value and half
  its width the stated error bound.

``F2`` may be ``sympy.oo`` (noise-equivalent bandwidth): then the enclosure and closed form
come from :func:`derive.solver.univariate.integrate` over ``w`` in ``[2 pi F1, oo)`` with
``F1 = 0``.
"""
from __future__ import annotations

from dataclasses import dataclass
from fractions import Fraction
from typing import Optional

import flint
import sympy
from flint import acb, acb_poly, arb, fmpq, fmpq_poly

from derive.solver import univariate

MAX_CLOSED = 6          # degree of Q in w up to which sympy is asked for a closed form
W = sympy.Symbol("omega", positive=True)


@dataclass
class BandIntegral:
    """``lo <= value <= hi`` (proved); ``closed_form`` exact (sympy) or None; ``method``:
    'exact (white)', 'closed form', 'ball quadrature'."""
    lo: Fraction
    hi: Fraction
    closed_form: Optional[sympy.Expr]
    method: str
    antiderivative: Optional[sympy.Expr] = None
    antiderivative_checked: bool = False

    @property
    def value(self) -> float:
        if self.closed_form is not None:
            return float(sympy.N(self.closed_form, 30))
        return float((self.lo + self.hi) / 2)

    @property
    def error_bound(self) -> Fraction:
        return (self.hi - self.lo) / 2


def _arb_frac(x: arb) -> Fraction:
    m, e = x.man_exp()
    m, e = int(m), int(e)
    return Fraction(m * 2 ** e) if e >= 0 else Fraction(m, 2 ** -e)


def _arb(c: fmpq) -> arb:
    return arb(c)


def poly_sympy(p: fmpq_poly, x) -> sympy.Expr:
    return sympy.Add(*[sympy.Rational(int(p[k].p), int(p[k].q)) * x ** k
                       for k in range(p.degree() + 1) if p[k] != 0])


def _ball(P: fmpq_poly, Q: fmpq_poly, F1: Fraction, F2: Fraction, rel=Fraction(1, 10 ** 12)):
    """A proved enclosure of ``int_{F1}^{F2} P(2 pi f)/Q(2 pi f) df``."""
    old = flint.ctx.prec
    try:
        prec = 96
        while True:
            flint.ctx.prec = prec
            two_pi = 2 * arb.pi()
            pa = acb_poly([acb(_arb(c)) for c in P.coeffs()]) if not P.is_zero() else None
            qa = acb_poly([acb(_arb(c)) for c in Q.coeffs()])
            a, span = arb(fmpq(F1.numerator, F1.denominator)), \
                arb(fmpq((F2 - F1).numerator, (F2 - F1).denominator))
            if pa is None:
                return Fraction(0), Fraction(0)

            def g(u, _analytic):
                w = (acb(a) + acb(span) * u) * acb(two_pi)
                return pa(w) / qa(w) * acb(span)
            total = acb.integral(g, 0, 1, eval_limit=10 ** 6)
            re = total.real
            if re.is_finite():
                lo, hi = _arb_frac(re.lower()), _arb_frac(re.upper())
                mid = abs(lo + hi) / 2
                if hi - lo <= rel * mid or prec >= 1024:
                    return lo, hi
            if prec >= 1024:
                raise ValueError("the ball quadrature did not converge")
            prec *= 2
    finally:
        flint.ctx.prec = old


def has_pole_in_band(Q: fmpq_poly, F1, F2) -> Optional[float]:
    """A frequency (Hz) in [F1, F2] where Q(2 pi f) = 0, or None."""
    if Q.degree() <= 0:
        return None
    import math
    bound = 1 + max(abs(Q[k] / Q[Q.degree()]) for k in range(Q.degree()))
    for r in univariate.real_roots(Q, 0, bound, width=Fraction(1, 10 ** 9)):
        f_lo, f_hi = float(r.lo) / (2 * math.pi), float(r.hi) / (2 * math.pi)
        top = float("inf") if F2 is sympy.oo else float(F2)
        if f_hi >= float(F1) and f_lo <= top:
            return (f_lo + f_hi) / 2
    return None


def _key(p: fmpq_poly) -> tuple:
    return tuple((int(c.p), int(c.q)) for c in p.coeffs())


_BASIS: dict = {}          # (Q coefficients, k) -> (antiderivative of w^k/Q, checked)


def _basis(Q: fmpq_poly, k: int):
    """(G, checked): an antiderivative of w^k/Q in ``omega`` and whether d/dw G - w^k/Q
    cancels exactly; (None, False) where there is none without RootSum. One pole pair
    (deg Q = 2, Q = q0 + q2 w^2, q0 q2 > 0) is written directly: 1/Q integrates to
    atan(w sqrt(q2/q0))/sqrt(q0 q2), w^2/Q to w/q2 - q0/q2 times that (partial fractions);
    higher degrees go to sympy's ``integrate``. Cached per (Q, k): every contribution of a
    circuit shares its denominator."""
    key = (_key(Q), k)
    if key in _BASIS:
        return _BASIS[key]
    f = W ** k / poly_sympy(Q, W)
    G = None
    q = [sympy.Rational(int(c.p), int(c.q)) for c in Q.coeffs()] + [0, 0, 0]
    if Q.degree() == 2 and q[1] == 0 and q[0] * q[2] > 0 and k in (0, 2):
        q0, q2 = q[0], q[2]
        at = sympy.atan(W * sympy.sqrt(q2 / q0)) / sympy.sqrt(q0 * q2)
        G = at if k == 0 else W / q2 - q0 / q2 * at
    else:
        try:
            G = sympy.integrate(f, W)
        except Exception:
            G = None
        if G is not None and (G.has(sympy.Integral) or G.has(sympy.RootSum)):
            G = None
    ok = False
    if G is not None:
        try:
            d = sympy.diff(G, W) - f
            ok = sympy.cancel(sympy.together(d)) == 0 or sympy.simplify(d) == 0
        except Exception:
            ok = False
    if len(_BASIS) > 256:
        _BASIS.clear()
    _BASIS[key] = (G, bool(ok))
    return _BASIS[key]


def closed_antiderivative(P: fmpq_poly, Q: fmpq_poly):
    """(G, checked): an antiderivative of P/Q in ``omega``, the sum of p_k times the basis
    antiderivatives of w^k/Q (each checked exactly by differentiation, so the sum is); (None,
    False) where none is offered (degree, RootSum)."""
    if Q.degree() > MAX_CLOSED:
        return None, False
    terms, checked = [], True
    for k in range(P.degree() + 1):
        if P[k] == 0:
            continue
        G, ok = _basis(Q, k)
        if G is None:
            return None, False
        terms.append(sympy.Rational(int(P[k].p), int(P[k].q)) * G)
        checked = checked and ok
    return sympy.Add(*terms), checked


def band_integral(P: fmpq_poly, Q: fmpq_poly, F1: Fraction, F2) -> BandIntegral:
    """``int_{F1}^{F2} P(2 pi f)/Q(2 pi f) df`` (see the module doc)."""
    if P.is_zero():
        return BandIntegral(Fraction(0), Fraction(0), sympy.Integer(0), "exact (white)")
    if P.degree() <= 0 and Q.degree() <= 0 and F2 is not sympy.oo:
        v = Fraction(int(P[0].p), int(P[0].q)) / Fraction(int(Q[0].p), int(Q[0].q)) * (F2 - F1)
        return BandIntegral(v, v, sympy.Rational(v.numerator, v.denominator), "exact (white)")
    if F2 is sympy.oo:
        if F1 != 0:
            raise ValueError("an infinite band starts at 0 Hz here")
        two_pi = 2 * sympy.pi
        q = [sympy.Rational(int(c.p), int(c.q)) for c in Q.coeffs()]
        if Q.degree() == 2 and q[1] == 0 and q[0] * q[2] > 0 and P.degree() == 0:
            # int_0^oo p0/(q0 + q2 w^2) dw = p0 pi / (2 sqrt(q0 q2)) (tables, from memory),
            # kept only inside the proved enclosure below
            res = univariate.integrate(P, Q, 0, sympy.oo, width=Fraction(1, 10 ** 30),
                                       closed_form=False)
            p0 = sympy.Rational(int(P[0].p), int(P[0].q))
            exact = p0 * sympy.pi / (2 * sympy.sqrt(q[0] * q[2]))
            v = sympy.N(exact, 50)
            meets = float(res.lo) * (1 - 1e-15) <= float(v) <= float(res.hi) * (1 + 1e-15)
            lo, hi = _div_2pi(res.lo, res.hi)
            cf = exact / two_pi if meets else None
            return BandIntegral(lo, hi, cf, "closed form" if meets else "ball quadrature",
                                None, meets)
        res = univariate.integrate(P, Q, 0, sympy.oo, width=Fraction(1, 10 ** 30),
                                   closed_form=Q.degree() <= MAX_CLOSED)
        lo, hi = _div_2pi(res.lo, res.hi)
        cf = res.closed_form / two_pi if res.closed_form is not None and \
            res.status == "agrees" else None
        return BandIntegral(lo, hi, cf, "closed form" if cf is not None else "ball quadrature",
                            res.antiderivative, cf is not None)
    lo, hi = _ball(P, Q, F1, F2)
    G, checked = closed_antiderivative(P, Q)
    if G is not None and checked:
        two_pi = 2 * sympy.pi
        a = two_pi * sympy.Rational(F1.numerator, F1.denominator)
        b = two_pi * sympy.Rational(F2.numerator, F2.denominator)
        value = (G.subs(W, b) - G.subs(W, a)) / two_pi
        try:
            v = sympy.N(value, 40)
            tol = max(abs(hi - lo), abs(hi) * Fraction(1, 10 ** 25))
            meets = v.is_real and float(lo - tol) <= float(v) <= float(hi + tol)
        except Exception:
            meets = False
        if meets:
            return BandIntegral(lo, hi, value, "closed form", G, True)
    return BandIntegral(lo, hi, None, "ball quadrature", G, False)


def _div_2pi(lo: Fraction, hi: Fraction):
    """An enclosure of [lo, hi] / (2 pi) with rational ends."""
    old = flint.ctx.prec
    try:
        flint.ctx.prec = 256
        two_pi = 2 * arb.pi()
        l = arb(fmpq(lo.numerator, lo.denominator)) / two_pi
        h = arb(fmpq(hi.numerator, hi.denominator)) / two_pi
        return _arb_frac(l.lower()), _arb_frac(h.upper())
    finally:
        flint.ctx.prec = old
