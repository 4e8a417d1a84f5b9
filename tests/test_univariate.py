"""Exact univariate tools (derive.solver.univariate): roots, extremes, integrals."""
from __future__ import annotations

import random
from fractions import Fraction

import mpmath
import numpy as np
import pytest
import scipy.integrate
import sympy
from flint import fmpq, fmpq_poly, fmpz_poly

from derive.solver import univariate as uv
from derive.solver.univariate import Unbounded, UnivariateError, as_poly, extremes, integrate, interval_value, real_roots

W = Fraction(1, 2 ** 60)


@pytest.fixture(autouse=True)
def _mpmath_precision():
    # the tests raise mpmath's working precision for their references; restore it after
    saved = mpmath.mp.dps
    yield
    mpmath.mp.dps = saved


def _contains(lo, hi, x, slack):
    return Fraction(lo) - slack <= Fraction(x) <= Fraction(hi) + slack


def _poly_from_roots(roots):
    p = fmpq_poly([1])
    for r in roots:
        p *= fmpq_poly([-fmpq(r.numerator, r.denominator), 1])
    return p


# ---------------------------------------------------------------- roots

def _random_polys(count, seed):
    rng = random.Random(seed)
    for _ in range(count):
        deg = rng.randint(2, 9)
        yield [rng.randint(-20, 20) for _ in range(deg)] + [rng.choice([-3, -2, -1, 1, 2, 3])]


@pytest.mark.parametrize("coeffs", list(_random_polys(25, seed=60063)))
def test_roots_match_numpy(coeffs):
    # reference: numpy.roots (companion-matrix eigenvalues, float), on [-5, 5]
    a, b = -5, 5
    got = real_roots(coeffs, a, b, width=W)
    ref = [z.real for z in np.roots(coeffs[::-1]) if abs(z.imag) < 1e-7 and a <= z.real <= b]
    # numpy cannot tell a double root from a complex pair near the axis; the integer test
    # polynomials here are square-free unless factor() says otherwise
    ref_distinct = sorted(set(round(x, 6) for x in ref))
    assert len(got) == len(ref_distinct)
    for r, x in zip(got, ref_distinct):
        assert _contains(r.lo, r.hi, x, Fraction(1, 10 ** 5))


@pytest.mark.parametrize("coeffs", list(_random_polys(25, seed=192)))
def test_enclosures_are_certified_exactly(coeffs):
    p = as_poly(coeffs)
    roots = real_roots(p, -10, 10, width=Fraction(1, 10 ** 12))
    for r in roots:
        assert r.hi - r.lo <= Fraction(1, 10 ** 12)
        assert p % r.factor == 0
        if r.exact is None:
            # a sign change of the (square-free, irreducible) factor across the enclosure
            f = r.factor
            assert f(fmpq(r.lo.numerator, r.lo.denominator)) * f(fmpq(r.hi.numerator, r.hi.denominator)) < 0
        else:
            assert p(fmpq(r.exact.numerator, r.exact.denominator)) == 0
    for u, v in zip(roots, roots[1:]):
        assert u.hi < v.lo                  # disjoint and ascending


@pytest.mark.parametrize("coeffs", list(_random_polys(15, seed=24)))
def test_roots_match_flint_complex_roots(coeffs):
    # reference: flint's own ball root finder (arb_fmpz_poly_complex_roots, real roots with
    # exactly zero imaginary part), a different algorithm from the Sturm isolation used here
    p = as_poly(coeffs)
    balls = [z.real for z, _m in p.complex_roots() if z.imag == 0]
    bound = 10 ** 3
    got = real_roots(p, -bound, bound, width=Fraction(1, 2 ** 80))
    assert len(got) == len(balls)
    for r, ball in zip(got, sorted(balls, key=lambda z: z.mid())):
        lo = uv._arb_to_fraction(ball.lower())
        hi = uv._arb_to_fraction(ball.upper())
        assert lo <= r.hi and r.lo <= hi      # the two enclosures meet


@pytest.mark.parametrize("n", [2, 3, 5, 8, 12])
def test_chebyshev_roots_closed_form(n):
    # T_n(cos θ) = cos(nθ): roots cos((2k-1)π/(2n)), k = 1..n (textbook, from memory)
    p = fmpq_poly(fmpz_poly.chebyshev_t(n))
    got = real_roots(p, -1, 1, width=Fraction(1, 10 ** 30))
    assert len(got) == n
    mpmath.mp.dps = 40
    ref = sorted(mpmath.cos((2 * k - 1) * mpmath.pi / (2 * n)) for k in range(1, n + 1))
    slack = Fraction(1, 10 ** 35)          # mpmath's own rounding at 40 digits (cos(pi/2) != 0)
    for r, x in zip(got, ref):
        assert _contains(r.lo, r.hi, sympy.Rational(mpmath.nstr(x, 40)), slack)


def test_rational_roots_exact_with_multiplicity_and_closed_ends():
    p = as_poly([-1, 1]) ** 3 * as_poly([2, 1]) * as_poly([-1, 2])   # (t-1)^3 (t+2)(2t-1)
    got = real_roots(p, -2, 1)
    assert [(r.exact, r.multiplicity) for r in got] == [(-2, 1), (Fraction(1, 2), 1), (1, 3)]
    assert [r.exact for r in real_roots(p, 1, 1)] == [1]
    assert real_roots(p, Fraction(11, 10), 5) == []


def test_close_irrational_roots_separated():
    # sqrt(2) and sqrt(2 + 10^-12) differ by about 3.5e-13; enclosures must be disjoint
    eps = fmpq(1, 10 ** 12)
    p = fmpq_poly([-2, 0, 1]) * fmpq_poly([-(2 + eps), 0, 1])
    got = real_roots(p, 0, 2, width=Fraction(1, 10))
    assert len(got) == 2
    assert got[0].hi < got[1].lo
    assert got[0].lo ** 2 < 2 < got[0].hi ** 2
    assert got[1].lo ** 2 < 2 + Fraction(1, 10 ** 12) < got[1].hi ** 2


def test_refine_and_display():
    r, = real_roots([-2, 0, 1], 1, 2, width=Fraction(1, 4))
    finer = r.refine(Fraction(1, 10 ** 40))
    assert finer.width <= Fraction(1, 10 ** 40) and r.lo <= finer.lo and finer.hi <= r.hi
    assert finer.lo ** 2 < 2 < finer.hi ** 2
    text = str(real_roots([-2, 0, 1], 0, 2, width=Fraction(1, 10 ** 6))[0])
    assert text.startswith("[1.414213") and text.endswith("root of t^2 - 2")


def test_root_input_errors():
    with pytest.raises(UnivariateError, match="zero polynomial"):
        real_roots([0, 0], 0, 1)
    with pytest.raises(UnivariateError, match="exact rational"):
        real_roots([1, 0.5], 0, 1)
    with pytest.raises(UnivariateError, match="exact rational"):
        real_roots([1, 1], 0.0, 1)
    with pytest.raises(UnivariateError, match="empty interval"):
        real_roots([1, 1], 1, 0)
    with pytest.raises(UnivariateError):
        real_roots("1 + t", 0, 1)
    assert real_roots([5], 0, 1) == []


def test_interval_value_encloses_samples():
    p = as_poly([3, -7, 0, 2, -1])
    lo, hi = interval_value(p, Fraction(-1, 3), Fraction(5, 4))
    for k in range(101):                     # exact samples on a grid
        t = Fraction(-1, 3) + (Fraction(5, 4) + Fraction(1, 3)) * k / 100
        v = p(fmpq(t.numerator, t.denominator))
        assert lo <= Fraction(int(v.p), int(v.q)) <= hi


# ---------------------------------------------------------------- extremes

def test_extremes_textbook_t_over_one_plus_t_squared():
    # t/(1+t^2): max 1/2 at t = 1, min -1/2 at t = -1 (calculus, from memory)
    e = extremes([0, 1], [1, 0, 1], -3, 3)
    assert (e.maximum.value, e.maximum.at) == (Fraction(1, 2), (1,))
    assert (e.minimum.value, e.minimum.at) == (Fraction(-1, 2), (-1,))
    # on [2, 3] r is decreasing: the extremes are at the ends
    e = extremes([0, 1], [1, 0, 1], 2, 3)
    assert (e.maximum.value, e.maximum.at) == (Fraction(2, 5), (2,))
    assert (e.minimum.value, e.minimum.at) == (Fraction(3, 10), (3,))


def _sympy_extremes(n, d, a, b):
    """Reference: sympy's exact real roots of N'D - ND' and evalf at 50 digits."""
    t = sympy.Symbol("t")
    N = sum(sympy.Rational(c) * t ** k for k, c in enumerate(n))
    D = sum(sympy.Rational(c) * t ** k for k, c in enumerate(d))
    r = N / D
    crit = [x for x in sympy.Poly(sympy.numer(sympy.together(sympy.diff(r, t))), t).real_roots()
            if a <= x <= b]
    pts = [sympy.Rational(a), sympy.Rational(b)] + crit
    vals = [(r.subs(t, x).evalf(50), x.evalf(50)) for x in pts]
    return min(vals), max(vals)


CASES = [
    ([1, 0, 1], [5, -3, 1], -4, 6),          # (t^2+1)/(t^2-3t+5): irrational critical points
    ([0, 2, -1, 1], [3, 0, 1], -2, 2),       # (t^3-t^2+2t)/(t^2+3)
    ([1, -1, 0, 0, 1], [1, 1, 1], -3, 3),    # (t^4-t+1)/(t^2+t+1)
    ([7], [2, -1, 0, 1], 0, 4),              # 7/(t^3-t+2), D > 0 on [0, 4]
]


@pytest.mark.parametrize("n,d,a,b", CASES)
def test_extremes_against_sympy_reference(n, d, a, b):
    width = Fraction(1, 10 ** 20)
    e = extremes(n, d, a, b, width=width)
    (vmin, xmin), (vmax, xmax) = _sympy_extremes(n, d, a, b)
    slack = Fraction(1, 10 ** 40)
    for ext, v, x in ((e.minimum, vmin, xmin), (e.maximum, vmax, xmax)):
        assert ext.hi - ext.lo <= width
        assert _contains(ext.lo, ext.hi, sympy.Rational(str(v)), slack)
        (where,) = ext.at
        xs = sympy.Rational(str(x))
        if isinstance(where, Fraction):
            assert abs(where - xs) <= slack
        else:
            assert _contains(where.lo, where.hi, xs, slack)


def test_extremes_against_dense_sampling():
    # reference: numpy float sampling on a fine grid (cannot beat the true extremes)
    n, d, a, b = [1, 0, 1], [5, -3, 1], -4, 6
    e = extremes(n, d, a, b)
    t = np.linspace(a, b, 200001)
    r = np.polyval(n[::-1], t) / np.polyval(d[::-1], t)
    assert r.max() <= float(e.maximum.hi) + 1e-12 and r.min() >= float(e.minimum.lo) - 1e-12
    assert abs(r.max() - float(e.maximum.hi)) < 1e-8 and abs(r.min() - float(e.minimum.lo)) < 1e-8


def test_exact_value_at_irrational_critical_point_and_ties():
    # (t^2 - 2)^2 on [0, 2]: min 0 at sqrt(2) (exact, though sqrt(2) is irrational),
    # max 4 at both ends (a tie)
    p = [4, 0, -4, 0, 1]
    e = extremes(p, [1], 0, 2)
    assert e.minimum.value == 0
    (r,) = e.minimum.at
    assert r.exact is None and r.lo ** 2 < 2 < r.hi ** 2
    assert e.maximum.value == 4 and e.maximum.at == (0, 2)


def test_irrational_value_ties_between_two_critical_points():
    # r = -(t^4 - 4t^2 + 1)/(t^2 + 1) is even: on [-3/2, 3/2] its maximum is attained at two
    # irrational points +-x*, and the two values cannot be told apart (they are equal)
    n, d, a, b = [-1, 0, 4, 0, -1], [1, 0, 1], Fraction(-3, 2), Fraction(3, 2)
    width = Fraction(1, 10 ** 15)
    e = extremes(n, d, a, b, width=width)
    _, (vmax, xmax) = _sympy_extremes(n, d, a, b)
    assert len(e.maximum.at) == 2
    left, right = e.maximum.at
    assert left.exact is None and right.exact is None
    assert _contains(right.lo, right.hi, sympy.Rational(str(abs(xmax))), Fraction(1, 10 ** 30))
    assert _contains(-left.hi, -left.lo, sympy.Rational(str(abs(xmax))), Fraction(1, 10 ** 30))
    assert e.maximum.hi - e.maximum.lo <= width
    assert _contains(e.maximum.lo, e.maximum.hi, sympy.Rational(str(vmax)), Fraction(1, 10 ** 30))


def test_constant_function_and_removable_singularity():
    e = extremes([2, 2], [1, 1], -5, 5)           # 2(t+1)/(t+1) = 2: the root -1 cancels
    assert e.minimum.value == e.maximum.value == 2
    assert e.minimum.at == (-5, 5)
    e = extremes([-1, 1], [-1, 0, 1], 0, 2)       # (t-1)/(t^2-1) = 1/(t+1)
    assert (e.maximum.value, e.maximum.at) == (1, (0,))
    assert (e.minimum.value, e.minimum.at) == (Fraction(1, 3), (2,))


def test_unbounded_when_denominator_vanishes():
    with pytest.raises(Unbounded, match="root"):
        extremes([1], [-2, 0, 1], 1, 2)           # pole at sqrt(2)
    with pytest.raises(Unbounded):
        extremes([1], [-1, 1], 1, 3)              # pole at the end t = 1
    with pytest.raises(UnivariateError, match="zero polynomial"):
        extremes([1], [0], 0, 1)
    e = extremes([1], [-2, 0, 1], Fraction(3, 2), 2)   # just right of sqrt(2): fine
    assert e.maximum.at == (Fraction(3, 2),)


# ---------------------------------------------------------------- integrals

def _mp(x):
    return mpmath.mpf(x.numerator) / x.denominator


@pytest.mark.parametrize("fc,F", [(1, 1), (1000, 10 ** 4), (Fraction(159, 10), 20000),
                                  (Fraction(1, 3), Fraction(7, 2))])
def test_one_pole_low_pass_closed_form(fc, F):
    # ∫_0^F df / (1 + (f/fc)^2) = fc·atan(F/fc) (textbook)
    fc, F = Fraction(fc), Fraction(F)
    res = integrate([1], [1, 0, 1 / fc ** 2], 0, F, width=Fraction(1, 10 ** 25))
    mpmath.mp.dps = 120
    ref = _mp(fc) * mpmath.atan(_mp(F) / _mp(fc))
    assert _mp(res.lo) <= ref <= _mp(res.hi)
    assert res.error_bound <= Fraction(1, 2 * 10 ** 25)
    assert res.status == "agrees"
    exact = sympy.Rational(fc.numerator, fc.denominator) * sympy.atan(
        sympy.Rational(F.numerator, F.denominator) / sympy.Rational(fc.numerator, fc.denominator))
    assert sympy.simplify(res.closed_form - exact) == 0


@pytest.mark.parametrize("fc", [1, 1000, Fraction(159, 10)])
def test_noise_equivalent_bandwidth_of_one_pole(fc):
    # NEB of a one-pole low-pass: ∫_0^∞ df/(1+(f/fc)^2) = π/2·fc (textbook)
    fc = Fraction(fc)
    res = integrate([1], [1, 0, 1 / fc ** 2], 0, sympy.oo)
    exact = sympy.pi / 2 * sympy.Rational(fc.numerator, fc.denominator)
    assert sympy.simplify(res.closed_form - exact) == 0
    mpmath.mp.dps = 120
    assert _mp(res.lo) <= mpmath.pi / 2 * _mp(fc) <= _mp(res.hi)


def test_infinite_ranges_textbook():
    mpmath.mp.dps = 120
    # ∫_0^∞ dx/(1+x^2)^2 = π/4 ; ∫_0^∞ dx/(1+x^4) = π/(2√2) ; ∫_-∞^∞ dx/(1+x^2) = π
    # (tables of integrals, from memory)
    cases = [([1], [1, 0, 2, 0, 1], 0, sympy.oo, mpmath.pi / 4, sympy.pi / 4),
             ([1], [1, 0, 0, 0, 1], 0, sympy.oo, mpmath.pi / (2 * mpmath.sqrt(2)),
              sympy.pi / (2 * sympy.sqrt(2))),
             ([1], [1, 0, 1], -sympy.oo, sympy.oo, mpmath.pi, sympy.pi),
             ([1], [1, 0, 1], -sympy.oo, 0, mpmath.pi / 2, sympy.pi / 2)]
    for n, d, a, b, ref, exact in cases:
        res = integrate(n, d, a, b)
        assert _mp(res.lo) <= ref <= _mp(res.hi), (n, d, a, b)
        assert res.status == "agrees"
        assert sympy.simplify(res.closed_form - exact) == 0


def _scipy_cases(seed, count):
    rng = random.Random(seed)
    for _ in range(count):
        n = [rng.randint(-9, 9) for _ in range(rng.randint(1, 4))]
        # D = 1 + sum of squares-ish: (t - p)^2 + q with q > 0, times another such factor
        p1, q1 = Fraction(rng.randint(-6, 6), 2), Fraction(rng.randint(1, 8), 4)
        p2, q2 = Fraction(rng.randint(-6, 6), 3), Fraction(rng.randint(1, 8), 2)
        d = as_poly([p1 * p1 + q1, -2 * p1, 1]) * as_poly([p2 * p2 + q2, -2 * p2, 1])
        a = Fraction(rng.randint(-8, 0), 2)
        b = a + Fraction(rng.randint(1, 12), 2)
        yield n, d, a, b


@pytest.mark.parametrize("n,d,a,b", list(_scipy_cases(7, 12)))
def test_integral_against_scipy_quad(n, d, a, b):
    # reference: scipy.integrate.quad (QUADPACK qags), with its own error estimate
    res = integrate(n, d, a, b, width=Fraction(1, 10 ** 18))
    nf = [float(c) for c in n][::-1]
    df = [float(d[k]) for k in range(d.degree() + 1)][::-1]
    val, err = scipy.integrate.quad(lambda t: np.polyval(nf, t) / np.polyval(df, t),
                                    float(a), float(b), epsabs=1e-13, epsrel=1e-13)
    assert abs(val - float(res.midpoint)) <= err + 1e-11 * max(1.0, abs(val))
    # closed form and quadrature checked against each other (ball arithmetic)
    assert res.status == "agrees", res.status
    mpmath.mp.dps = 40
    cf = mpmath.mpf(sympy.N(res.closed_form, 40))
    assert _mp(res.lo) - mpmath.mpf(10) ** -30 <= cf <= _mp(res.hi) + mpmath.mpf(10) ** -30


def test_polynomial_integrand_exact():
    res = integrate([0, 0, 1], [1], 0, 1)                   # ∫_0^1 t^2 = 1/3
    assert res.closed_form == sympy.Rational(1, 3)
    assert res.lo <= Fraction(1, 3) <= res.hi


def test_reversed_limits_and_zero_integrand():
    fwd = integrate([1], [1, 0, 1], 0, 2)
    rev = integrate([1], [1, 0, 1], 2, 0)
    assert (rev.lo, rev.hi) == (-fwd.hi, -fwd.lo)
    assert sympy.simplify(rev.closed_form + fwd.closed_form) == 0
    zero = integrate([0], [1, 0, 1], 0, 2)
    assert zero.lo == zero.hi == 0


def test_no_closed_form_requested_still_proves_enclosure():
    res = integrate([1], [1, 1, 0, 1], 0, 1, closed_form=False)   # 1/(t^3+t+1), D > 0 on [0, 1]
    mpmath.mp.dps = 40
    ref = mpmath.quad(lambda t: 1 / (t ** 3 + t + 1), [0, 1])      # reference: mpmath.quad
    assert _mp(res.lo) - mpmath.mpf(10) ** -30 <= ref <= _mp(res.hi) + mpmath.mpf(10) ** -30
    assert res.closed_form is None and res.status == "none"


def test_wrong_closed_form_is_rejected(monkeypatch):
    # a closed form that disagrees with the proved enclosure is not returned
    monkeypatch.setattr(uv, "_closed_form", lambda n, d, a, b, var: (None, sympy.pi / 3))
    res = integrate([1], [1, 0, 1], 0, 1)                    # true value π/4
    assert res.status == "rejected" and res.closed_form is None and res.rejected == sympy.pi / 3


def test_unreadable_closed_form_is_marked_unchecked(monkeypatch):
    t = sympy.Symbol("t")
    odd = sympy.besselj(0, sympy.Rational(1, 2))
    monkeypatch.setattr(uv, "_closed_form", lambda n, d, a, b, var: (t, odd))
    res = integrate([1], [1, 0, 1], 0, 1)
    assert res.status == "unchecked" and res.closed_form == odd


def test_integral_errors():
    with pytest.raises(Unbounded):
        integrate([1], [-1, 0, 1], 0, 2)                        # pole at t = 1
    with pytest.raises(Unbounded):
        integrate([1], [-3, 0, 1], 0, sympy.oo)                 # pole at sqrt(3)
    with pytest.raises(Unbounded):
        integrate([1], [1, 1], -sympy.oo, sympy.oo)             # pole at -1 (and divergent)
    with pytest.raises(UnivariateError, match="diverges"):
        integrate([0, 1], [1, 0, 1], 0, sympy.oo)               # t/(1+t^2) ~ 1/t
    with pytest.raises(UnivariateError, match="exact rational"):
        integrate([1], [1, 0, 1], 0, 1.5)
    # a removable singularity inside the range is fine: (t-1)/(t^2-1) = 1/(t+1)
    res = integrate([-1, 1], [-1, 0, 1], 0, 2)
    mpmath.mp.dps = 40
    assert _mp(res.lo) <= mpmath.log(3) <= _mp(res.hi)
