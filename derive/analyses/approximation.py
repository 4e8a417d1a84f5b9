"""``find Q ... approximately within E%``: a shorter form of Q with an established error bound.

The exact result stays as it is; beside it comes a form a designer would write, with the
largest relative error ``|approx - exact| / |exact|`` over the whole box of tolerances (and,
for a function of ``s``, over the band at ``s = j*2*pi*f``, default 1 Hz to 1 GHz).

How the form is found (:func:`approximate`):

1. Q is rebuilt exactly as a cancelled ratio ``N/D`` of expanded polynomials
   (:func:`derive.analyses.sensitivity.rational`). Each term of ``N`` and of ``D`` gets its
   *weight* at nominal values: ``|term| / |polynomial|`` (for ``s``: the largest over the
   band).
2. Dominant terms: start from the heaviest term of ``N`` and of ``D`` (the single ratio of
   the leading terms), then add terms back, heaviest first, numerator and denominator
   together, until the error screened in floating point over a set of points of the box
   (and band) is below the bound with a margin; then drop again every kept term that is not
   needed (lightest first). For a function of ``s`` the same is done once more within the
   structural form "gain × one-pole factor" (the lowest power of ``s`` in the numerator,
   the lowest two in the denominator). The shortest printed form whose *established* bound
   meets E is chosen; the kept polynomials are cancelled and factored exactly (so a
   denominator ``1 + s(R1 C1 + R2 C2) + s^2 R1 R2 C1 C2`` is written as the product of two
   one-pole factors).
3. The bound is established, not guessed (:func:`establish`): the relative error is
   evaluated in exact rational arithmetic (python-flint ``fmpq``; complex values at
   ``s = j*omega`` as pairs of rationals, the squared modulus compared exactly) at every
   corner of the box (or 4096 of them), on a grid of the box, at the worst points of the
   floating-point screening and at the maxima of bounded local searches (scipy L-BFGS-B)
   started from them; for ``s`` at log-spaced rational frequencies of the band. Where Q has no
   ``s`` and ``approx/exact`` is proven monotone in every toleranced part (signs of the
   coefficients of its exact derivative numerators, :func:`derive.analyses.tolerance.exact_signs`),
   the largest error is at one of two corners and the bound is *proven*; otherwise it is
   the largest value *searched*, with the number of points said beside it.
4. Assumptions are read off the dropped terms at nominal values: ``A*R1 >> R1 + R2 by a
   factor of 9 100``.

When no form shorter than the exact one meets the bound, that is the answer: the record
says so and gives the bounds of the shortest forms tried.
"""
from __future__ import annotations

import itertools
import math
import re
from fractions import Fraction

import flint
import numpy as np
import sympy

from derive.analyses import sensitivity as sens
from derive.analyses import tolerance
from derive.circuit.build import S
from derive.sheet.units import format_bound
from derive.derivation.steps import Equation, Step
from derive.errors import SheetError
from derive.forms.results import RequestResult
from derive.forms.text import to_text
from derive.sheet import quantities
from derive.sheet.model import DEFAULT_APPROXIMATION_BAND
from derive.solver.convert import factored_expr, poly_expr

MAX_CORNERS = 4096          # exact corners (all of them up to 12 toleranced parts)
SCREEN_CORNERS = 1024       # corners in the floating-point screening
SCREEN_SOBOL = 256          # interior points of the screening
SCREEN_PER_DECADE = 12      # screening frequencies per decade
EXACT_PER_DECADE = 4        # exact frequencies per decade (before the worst points)
EXACT_BUDGET = 40000        # exact evaluations (box points x frequencies) of the grid
TOP_EXACT = 64              # worst screening points re-evaluated exactly
LOCAL_STARTS = 6            # bounded local searches per form
MARGINS = (0.8, 0.5, 0.25, 0.1)   # screening bound as a share of E, tightened on a miss
WORDS_TERMS = 4             # a sum of more terms than this, and longer than WORDS_CHARS, is
WORDS_CHARS = 80            #   named by its count and largest term in the assumptions
INTERVAL_TERMS = 60         # approx/exact up to this many terms gets interval proofs too
MAX_TERMS = 400             # larger numerators or denominators are not approximated


# ---------------------------------------------------------------- the problem
class Problem:
    """Q = N/D as term lists over generators ``syms`` (``s`` at ``si`` if present), the
    nominal point, the box and the band, with float and exact evaluators."""

    def __init__(self, num, den, syms, nominal: dict, box: dict, band):
        self.syms = list(syms)
        self.si = self.syms.index(S) if S in self.syms else None
        self.xs = [j for j, x in enumerate(self.syms) if x != S]
        self.num = sorted((tuple(int(e) for e in k), c) for k, c in num.to_dict().items())
        self.den = sorted((tuple(int(e) for e in k), c) for k, c in den.to_dict().items())
        self.ring = num.context()
        self.nominal = nominal
        self.box = box                                   # Symbol -> (c, h), exact
        self.tol = [self.syms[j] for j in self.xs if self.syms[j] in box]
        self.band = band if self.si is not None else None
        names = tuple(f"x{i}" for i in range(max(1, len(self.xs))))
        self.xring = flint.fmpq_mpoly_ctx.get(names, "lex")
        self.xnom = [_q(nominal[self.syms[j]]) for j in self.xs]
        xpos = {self.syms[j]: k for k, j in enumerate(self.xs)}
        self.tpos = [(xpos[x], _q(box[x][0]), _q(box[x][1])) for x in self.tol]
        self.fnom = np.array([float(v) for v in self.xnom])
        self.fpos = np.array([k for k, _c, _h in self.tpos], dtype=int)
        self.fc = np.array([float(c) for _k, c, _h in self.tpos])
        self.fh = np.array([float(h) for _k, _c, h in self.tpos])

    # -- points: u in [-1, 1] per toleranced part -> exact or float x values
    def xpoint(self, u) -> list:
        if not self.xs:
            return [flint.fmpq(0)]          # the placeholder generator of a ring without x
        out = list(self.xnom)
        for (k, c, h), ui in zip(self.tpos, u):
            out[k] = c + _q(ui) * h
        return out

    def xfloat(self, U):
        """Float x values at the rows of ``U`` (P, m)."""
        X = np.tile(self.fnom, (U.shape[0], 1))
        if len(self.tpos):
            X[:, self.fpos] = self.fc[None, :] + U * self.fh[None, :]
        return X

    def s_power(self, exps) -> int:
        return exps[self.si] if self.si is not None else 0

    # -- floating point: term values at points x (P, nx) and angular frequencies w (F,)
    def term_values(self, terms, X, W):
        P = X.shape[0]
        out = np.empty((len(terms), P, len(W)), dtype=complex)
        for i, (exps, c) in enumerate(terms):
            v = np.full(P, float(c))
            for k, j in enumerate(self.xs):
                if exps[j]:
                    v = v * X[:, k] ** exps[j]
            p = self.s_power(exps)
            sw = (1j * W) ** p if p else np.ones(len(W))
            out[i] = v[:, None] * sw[None, :]
        return out

    # -- exact: term lists split by power of s into polynomials of the x generators
    def split(self, terms) -> dict:
        by: dict = {}
        for exps, c in terms:
            exps = tuple(int(e) for e in exps)
            key = tuple(exps[j] for j in self.xs) if self.xs else (0,)
            d = by.setdefault(self.s_power(exps), {})
            d[key] = d.get(key, 0) + c
        return {k: self.xring.from_dict(d) for k, d in by.items()}


_PRIMES = (2, 3, 5, 7, 11, 13, 17, 19, 23, 29, 31, 37, 41, 43, 47, 53, 59, 61, 67, 71, 73, 79,
           83, 89, 97, 101, 103, 107, 109, 113, 127, 131, 137, 139, 149, 151, 157, 163, 167)


def halton(m: int, n: int, skip: int = 1) -> list:
    """``n`` points of the Halton sequence in [0, 1)^m (exact ``fmpq``: the radical
    inverses in the first ``m`` primes, from index ``skip``; beyond 39 parts the primes
    repeat with a shifted index)."""
    out = []
    for i in range(skip, skip + n):
        row = []
        for d in range(m):
            b = _PRIMES[d % len(_PRIMES)]
            k, num, den = i + d // len(_PRIMES), 0, 1
            while k:
                num, den, k = num * b + k % b, den * b, k // b
            row.append(flint.fmpq(num, den))
        out.append(row)
    return out


def _q(v) -> flint.fmpq:
    if isinstance(v, flint.fmpq):
        return v
    if isinstance(v, float):
        f = Fraction(v)
        return flint.fmpq(f.numerator, f.denominator)
    if isinstance(v, (int, Fraction)):
        f = Fraction(v)
        return flint.fmpq(f.numerator, f.denominator)
    return flint.fmpq(int(v.p), int(v.q))


def _cvalues(split: dict, xv, omegas) -> list:
    """Exact complex values (re, im) of a polynomial in x and s at ``x = xv``, ``s = j w``."""
    cs = [(k, p(*xv)) for k, p in split.items()]
    out = []
    for w in omegas:
        re, im = flint.fmpq(0), flint.fmpq(0)
        for k, c in cs:
            t = c * w ** k if k else c
            r = k % 4
            if r == 0:
                re += t
            elif r == 1:
                im += t
            elif r == 2:
                re -= t
            else:
                im -= t
        out.append((re, im))
    return out


def _cmul(a, b):
    return (a[0] * b[0] - a[1] * b[1], a[0] * b[1] + a[1] * b[0])


class Candidate:
    """A kept subset of the terms: ``keep_n``, ``keep_d`` index sets."""

    def __init__(self, pb: Problem, keep_n, keep_d, label: str, polys=None, factors=None):
        self.pb, self.label = pb, label
        ring = pb.ring
        self.factors = factors          # [(words, terms, kept indices)] of a per-factor form
        if polys is not None:           # a per-factor form: the products, expanded
            self.keep_n = self.keep_d = None
            self.na, self.da = polys
        else:
            self.keep_n, self.keep_d = frozenset(keep_n), frozenset(keep_d)
            self.na = ring.from_dict(dict(pb.num[i] for i in sorted(self.keep_n)))
            self.da = ring.from_dict(dict(pb.den[i] for i in sorted(self.keep_d)))
        g = self.na.gcd(self.da)
        n, d = self.na, self.da
        if not g.is_one() and not g.is_zero():
            n, d = n / g, d / g
        if d.leading_coefficient() < 0:          # the sign in front, integers kept
            n, d = -n, -d
        self.n, self.d = n, d
        self.expr = factored_expr(self.n, pb.syms) / factored_expr(self.d, pb.syms)
        self.plain = poly_expr(self.na, pb.syms) / poly_expr(self.da, pb.syms)
        self.size = len(to_text(self.expr))
        self.terms = len(self.na) + len(self.da)

    def key(self):
        return (self.na, self.da) if self.keep_n is None else (self.keep_n, self.keep_d)

    def term_lists(self):
        """The kept numerator and denominator as term lists (int exponents)."""
        return ([(tuple(int(e) for e in k), c) for k, c in self.na.to_dict().items()],
                [(tuple(int(e) for e in k), c) for k, c in self.da.to_dict().items()])


# ---------------------------------------------------------------- screening (floats)
class Screen:
    """Term values at the screening points, and the float error of a candidate there."""

    def __init__(self, pb: Problem, seed: int = 7):
        rng = np.random.default_rng(seed)
        m = len(pb.tol)
        us = [np.zeros(m)]
        if m:
            if m <= 10:
                us += [np.array(c, float) for c in itertools.product((-1.0, 1.0), repeat=m)]
            else:
                us += [rng.choice((-1.0, 1.0), m) for _ in range(SCREEN_CORNERS)]
            us += [2 * np.array([float(int(v.p)) / float(int(v.q)) for v in r]) - 1
                   for r in halton(m, SCREEN_SOBOL if pb.band is None else 64)]
        self.U = np.array(us).reshape(len(us), m)
        self.X = pb.xfloat(self.U)
        if pb.band is not None:
            lo, hi = (math.log10(float(f)) for f in pb.band)
            n = max(2, int(math.ceil((hi - lo) * SCREEN_PER_DECADE)) + 1)
            self.logf = np.linspace(lo, hi, n)
            self.W = 2 * math.pi * 10 ** self.logf
        else:
            self.logf = np.zeros(1)
            self.W = np.ones(1)
        self.Tn = pb.term_values(pb.num, self.X, self.W)
        self.Td = pb.term_values(pb.den, self.X, self.W)
        self.N, self.D = self.Tn.sum(0), self.Td.sum(0)
        self.pb = pb

    def weights(self):
        """Weight of each term at nominal (point 0): the largest share of its polynomial."""
        def w(T, P):
            with np.errstate(all="ignore"):
                r = np.abs(T[:, 0, :]) / np.abs(P[0, :])[None, :]
            return np.nan_to_num(r, nan=0.0, posinf=1e300).max(axis=1)
        return w(self.Tn, self.N), w(self.Td, self.D)

    def error(self, cand_n, cand_d):
        na = self.Tn[sorted(cand_n)].sum(0)
        da = self.Td[sorted(cand_d)].sum(0)
        with np.errstate(all="ignore"):
            e = np.abs(na * self.D - self.N * da) / np.abs(self.N * da)
        return np.nan_to_num(e, nan=np.inf)

    def max_error(self, cand_n, cand_d) -> float:
        return float(self.error(cand_n, cand_d).max())

    def error_of(self, cand):
        """The float error of a candidate at every screening point."""
        if cand.keep_n is not None:
            return self.error(cand.keep_n, cand.keep_d)
        tn, td = cand.term_lists()
        na = self.pb.term_values(tn, self.X, self.W).sum(0)
        da = self.pb.term_values(td, self.X, self.W).sum(0)
        with np.errstate(all="ignore"):
            e = np.abs(na * self.D - self.N * da) / np.abs(self.N * da)
        return np.nan_to_num(e, nan=np.inf)


# ---------------------------------------------------------------- the search
def _greedy(pb, sc, wn, wd, uni_n, uni_d, bound, label):
    """Dominant terms within the universe ``uni_n``/``uni_d``: (keep_n, keep_d) or None."""
    order = sorted([(-wn[i], 0, i) for i in uni_n] + [(-wd[i], 1, i) for i in uni_d])
    if not uni_n or not uni_d:
        return None
    keep = [{max(uni_n, key=lambda i: (wn[i], -i))}, {max(uni_d, key=lambda i: (wd[i], -i))}]
    rest = [(p, i) for _w, p, i in order if i not in keep[p]]
    while sc.max_error(*keep) > bound:
        if not rest:
            return None
        p, i = rest.pop(0)
        keep[p].add(i)
    # drop what is not needed, lightest first
    for _w, p, i in sorted(order, reverse=True):
        if i in keep[p] and len(keep[p]) > 1:
            keep[p].discard(i)
            if sc.max_error(*keep) > bound:
                keep[p].add(i)
    return keep[0], keep[1]


def candidates(pb: Problem, sc: Screen, within: float, margin: float) -> list:
    wn, wd = sc.weights()
    all_n, all_d = range(len(pb.num)), range(len(pb.den))
    universes = [(list(all_n), list(all_d), "dominant terms")]
    if pb.si is not None:
        ln = min(pb.s_power(e) for e, _ in pb.num)
        ld = min(pb.s_power(e) for e, _ in pb.den)
        un = [i for i in all_n if pb.s_power(pb.num[i][0]) == ln]
        ud = [i for i in all_d if pb.s_power(pb.den[i][0]) in (ld, ld + 1)]
        if len(un) < len(pb.num) or len(ud) < len(pb.den):
            universes.append((un, ud, "gain × one-pole factor"))
    out, seen = [], set()
    for un, ud, label in universes:
        k = _greedy(pb, sc, wn, wd, un, ud, within * margin, label)
        if k is None:
            continue
        key = (frozenset(k[0]), frozenset(k[1]))
        if key in seen or (len(key[0]) == len(pb.num) and len(key[1]) == len(pb.den)):
            continue
        seen.add(key)
        out.append(Candidate(pb, k[0], k[1], label))
    f = per_factor(pb, sc, within * margin)
    if f is not None and all(f.key() != c.key() for c in out):
        out.append(f)
    return out


def _factors_of(pb, p) -> tuple:
    content, fs = p.factor()
    return content, [([(tuple(int(e) for e in k), c) for k, c in f.to_dict().items()], int(m))
                     for f, m in fs]


def per_factor(pb: Problem, sc: Screen, budget: float):
    """Dominant terms within each irreducible factor of the numerator and denominator
    (a multi-stage result is a product of stage factors): every factor of several terms
    starts from its heaviest term and takes terms back, heaviest first, until its own
    relative error over the screening points is below an equal share of ``budget``; then
    terms are dropped again across all factors, lightest first, while the error of the whole
    product stays below ``budget``. None where there are not two factors to work on."""
    if len(pb.num) * len(pb.den) > 200000:
        return None
    ring = pb.ring
    cn, fn = _factors_of(pb, ring.from_dict(dict(pb.num)))
    cd, fd = _factors_of(pb, ring.from_dict(dict(pb.den)))
    multi = [(f, m) for f, m in fn + fd if len(f) > 1]
    if len(fn) + len(fd) < 2 or not multi:
        return None
    share = budget / sum(m for _f, m in multi)
    items = []          # [which, content-or-None, terms, multiplicity, T, weights, keep]
    for which, content, fs in (("numerator", cn, fn), ("denominator", cd, fd)):
        for f, m in fs:
            T = pb.term_values(f, sc.X, sc.W)
            F = T.sum(0)
            with np.errstate(all="ignore"):
                w = np.nan_to_num((np.abs(T[:, 0, :]) / np.abs(F[0, :])[None, :]),
                                  nan=0.0, posinf=1e300).max(axis=1)
            keep = set(range(len(f)))
            if len(f) > 1:
                order = sorted(range(len(f)), key=lambda i: (-w[i], i))

                def err(ks, T=T, F=F):
                    with np.errstate(all="ignore"):
                        e = np.abs(T[sorted(ks)].sum(0) - F) / np.abs(F)
                    return float(np.nan_to_num(e, nan=np.inf).max())
                keep = {order[0]}
                for i in order[1:]:
                    if err(keep) <= share:
                        break
                    keep.add(i)
            items.append([which, f, m, T, w, keep])

    def total(items):
        num = np.full(sc.N.shape, complex(float(cn)))
        den = np.full(sc.D.shape, complex(float(cd)))
        for which, f, m, T, w, keep in items:
            v = T[sorted(keep)].sum(0) ** m
            if which == "numerator":
                num = num * v
            else:
                den = den * v
        with np.errstate(all="ignore"):
            e = np.abs(num * sc.D - sc.N * den) / np.abs(sc.N * den)
        return float(np.nan_to_num(e, nan=np.inf).max())
    if total(items) > budget:
        return None
    drops = sorted(((it[4][i], k, i) for k, it in enumerate(items) for i in it[5]),
                   key=lambda t: (t[0], t[1], t[2]))
    for _w, k, i in drops:
        keep = items[k][5]
        if len(keep) > 1:
            keep.discard(i)
            if total(items) > budget:
                keep.add(i)
    words, polys = [], {"numerator": ring.constant(cn), "denominator": ring.constant(cd)}
    for which, f, m, T, w, keep in items:
        polys[which] = polys[which] * ring.from_dict(dict(f[i] for i in sorted(keep))) ** m
        if len(keep) < len(f):
            fe = poly_expr(ring.from_dict(dict(f)), pb.syms)
            text = _words(fe)
            if len(f) > WORDS_TERMS and len(text) > WORDS_CHARS:
                top = max(range(len(f)), key=lambda i: w[i])
                text = (f"the factor of {len(f)} terms led by "
                        f"{_words(poly_expr(ring.from_dict(dict([f[top]])), pb.syms))}")
            else:
                text = f"the factor ({text})"
            words.append((f"{text} of the {which}", f, keep))
    if not words:
        return None
    return Candidate(pb, None, None, "dominant terms per factor",
                     polys=(polys["numerator"], polys["denominator"]), factors=words)


def shortest_tried(pb: Problem, sc: Screen) -> list:
    """The shortest forms (for a failure): the ratio of the leading terms, and the exact
    form less its lightest term."""
    wn, wd = sc.weights()
    out = [Candidate(pb, {int(np.argmax(wn))}, {int(np.argmax(wd))}, "ratio of leading terms")]
    light = sorted([(wn[i], 0, i) for i in range(len(pb.num))] +
                   [(wd[i], 1, i) for i in range(len(pb.den))])
    for _w, p, i in light:
        kn = set(range(len(pb.num))) - ({i} if p == 0 else set())
        kd = set(range(len(pb.den))) - ({i} if p == 1 else set())
        if kn and kd:
            c = Candidate(pb, kn, kd, "exact form less its lightest term")
            if (c.keep_n, c.keep_d) != (out[0].keep_n, out[0].keep_d):
                out.append(c)
            break
    return out


# ---------------------------------------------------------------- establishing the bound
class Bound:
    def __init__(self, err2, points, proven, method, worst):
        self.err2 = err2            # exact largest squared relative error (fmpq) or None (inf)
        self.points = points        # exactly evaluated points
        self.proven = proven
        self.method = method
        self.worst = worst          # (u, omega) of the largest error found

    @property
    def value(self) -> float:
        """The bound as a float rounded up (never below the exact value)."""
        if self.err2 is None:
            return math.inf
        v = math.sqrt(float(Fraction(int(self.err2.p), int(self.err2.q))))
        return math.nextafter(math.nextafter(v, math.inf), math.inf)


def _grid_levels(m: int, per_x: int) -> int:
    """Levels per part of a full grid of at most ``EXACT_BUDGET / per_x`` points."""
    budget = max(1, EXACT_BUDGET // max(1, per_x))
    for k in (9, 7, 5, 3):
        if k ** m <= budget:
            return k
    return 0


def _exact_omegas(pb: Problem) -> list:
    if pb.band is None:
        return [None]
    lo, hi = (2 * math.pi * float(f) for f in pb.band)
    lo, hi = math.nextafter(math.nextafter(lo, math.inf), math.inf), \
        math.nextafter(math.nextafter(hi, 0), 0)
    n = max(2, int(math.ceil(math.log10(hi / lo) * EXACT_PER_DECADE)) + 1)
    return [_q(lo * (hi / lo) ** (i / (n - 1))) if 0 < i < n - 1 else _q([lo, hi][i > 0])
            for i in range(n)]


def _omega_in_band(pb, logf: float):
    lo, hi = (2 * math.pi * float(f) for f in pb.band)
    lo, hi = math.nextafter(math.nextafter(lo, math.inf), math.inf), \
        math.nextafter(math.nextafter(hi, 0), 0)
    return _q(min(hi, max(lo, 2 * math.pi * 10 ** logf)))


class Exact:
    """Exact squared relative error of one candidate at points (u, omegas)."""

    def __init__(self, pb: Problem, cand: Candidate):
        self.pb = pb
        self.parts = [pb.split(pb.num), pb.split(pb.den),
                      pb.split(list(cand.na.to_dict().items())),
                      pb.split(list(cand.da.to_dict().items()))]
        self.count = 0

    def err2(self, u, omegas) -> list:
        xv = self.pb.xpoint(u)
        N, D, NA, DA = (_cvalues(p, xv, omegas) for p in self.parts)
        out = []
        for n, d, na, da in zip(N, D, NA, DA):
            top = _cmul(na, d)
            nd = _cmul(n, da)
            diff = (top[0] - nd[0], top[1] - nd[1])
            den2 = nd[0] ** 2 + nd[1] ** 2
            self.count += 1
            if den2 == 0:
                out.append(None)
            else:
                out.append((diff[0] ** 2 + diff[1] ** 2) / den2)
        return out


def _proof(pb: Problem, cand: Candidate):
    """For Q without s: the proven largest squared error, or None where it is not proven.
    ``approx/exact`` monotone in every toleranced part puts its range between two corners."""
    if pb.si is not None or not pb.box:
        return None
    qn, qd = cand.na * pb.ring.from_dict(dict(pb.den)), pb.ring.from_dict(dict(pb.num)) * cand.da
    if len(qn) * len(qd) > tolerance.EXACT_PRODUCT_TERMS:
        return None
    g = qn.gcd(qd)
    if not g.is_zero() and not g.is_one():
        qn, qd = qn / g, qd / g
    form = sens.Form([], poly_expr(qn, pb.syms) / poly_expr(qd, pb.syms))
    signs = tolerance.exact_signs(form, pb.nominal, pb.box)
    used = form.final.free_symbols            # a part that cancels does not move Q
    rest = [x for x in pb.tol if x in used and x not in signs]
    if rest and len(qn) + len(qd) <= INTERVAL_TERMS:
        signs.update(_interval_signs(pb, form, rest))
    if any(x not in signs for x in pb.tol if x in used):
        return None
    ex = Exact(pb, cand)
    worst, where = flint.fmpq(0), None
    for sense in (1, -1):
        u = [sense * signs.get(x, 1) for x in pb.tol]
        e = ex.err2(u, [None])[0]
        if e is None:
            return None
        if e >= worst:
            worst, where = e, u
    return worst, where


def _interval_signs(pb: Problem, form, parts) -> dict:
    """Signs of d(approx/exact)/dx proven constant on the box by interval arithmetic
    (outward-rounded, with bisection: :func:`derive.analyses.tolerance.derivative_sign`)."""
    def widen(lo, hi):
        return math.nextafter(math.nextafter(lo, -math.inf), -math.inf), \
            math.nextafter(math.nextafter(hi, math.inf), math.inf)
    env = {x: widen(float(v), float(v)) for x, v in pb.nominal.items()}
    env.update({x: widen(float(c - h), float(c + h)) for x, (c, h) in pb.box.items()})
    out = {}
    for x in parts:
        dform = sens.derivative(form, x)[0]
        sgn = tolerance.derivative_sign(dform, env, list(pb.box))
        if sgn is None:
            break                       # one unproven part is enough to give up
        out[x] = sgn
    return out


def establish(pb: Problem, sc: Screen, cand: Candidate) -> Bound:
    """The largest relative error of ``cand``, evaluated exactly (see the module doc)."""
    ex = Exact(pb, cand)
    m = len(pb.tol)
    omegas = _exact_omegas(pb)
    best, where = flint.fmpq(0), None
    infinite = False

    def take(u, ws):
        nonlocal best, where, infinite
        for w, e in zip(ws, ex.err2(u, ws)):
            if e is None:
                infinite = True
                where = (list(u), w)
            elif e > best and not infinite:
                best, where = e, (list(u), w)

    # corners
    if m <= 12:
        corners = [list(c) for c in itertools.product((-1, 1), repeat=m)]
        n_corners = f"all {len(corners)} corners" if m else "the nominal point"
    else:
        rng = np.random.default_rng(11)
        corners = {tuple(int(v) for v in rng.choice((-1, 1), m)) for _ in range(MAX_CORNERS)}
        corners = [list(c) for c in sorted(corners)]
        n_corners = f"{len(corners)} of the 2^{m} corners (seeded)"
    grid_ws = omegas
    for c in corners:
        take(c, grid_ws)
    # grid of the box
    levels = _grid_levels(m, len(grid_ws)) if m else 0
    if levels:
        vals = [Fraction(2 * i, levels - 1) - 1 for i in range(levels)]
        pts = [list(p) for p in itertools.product(vals, repeat=m) if any(abs(v) != 1 for v in p)]
        grid = f"a {levels}-level grid of the box ({levels}^{m} points)"
    else:
        n = max(1, min(512, EXACT_BUDGET // max(1, len(grid_ws)))) if m else 0
        pts = [[2 * r - 1 for r in row] for row in halton(m, n, skip=SCREEN_SOBOL + 1)]
        grid = f"{len(pts)} quasi-random (Halton) points of the box" if n else ""
    for p in pts:
        take(p, grid_ws)
    # the worst screening points, exactly, then local searches from them
    e = sc.error_of(cand)
    flat = np.argsort(-e, axis=None)[:TOP_EXACT]
    starts = []
    for k in flat:
        ip, iw = np.unravel_index(k, e.shape)
        u = [_q(float(v)) for v in sc.U[ip]]
        w = [None] if pb.band is None else [_omega_in_band(pb, float(sc.logf[iw]))]
        take(u, w)
        if len(starts) < LOCAL_STARTS:
            starts.append(np.concatenate([sc.U[ip], [sc.logf[iw]] if pb.band else []]))
    dim = m + (1 if pb.band is not None else 0)
    n_local = 0
    if dim:
        from scipy.optimize import minimize
        lo_f, hi_f = ((math.log10(float(pb.band[0])), math.log10(float(pb.band[1])))
                      if pb.band is not None else (0, 0))
        bounds = [(-1.0, 1.0)] * m + ([(lo_f, hi_f)] if pb.band is not None else [])

        cn_terms, cd_terms = cand.term_lists()

        def obj(z):
            u, lf = z[:m], (z[m] if pb.band is not None else 0.0)
            X = pb.xfloat(np.asarray(u, float).reshape(1, m))
            W = np.array([2 * math.pi * 10 ** lf]) if pb.band is not None else np.ones(1)
            n, d = pb.term_values(pb.num, X, W).sum(0), pb.term_values(pb.den, X, W).sum(0)
            na = pb.term_values(cn_terms, X, W).sum(0)
            da = pb.term_values(cd_terms, X, W).sum(0)
            with np.errstate(all="ignore"):
                v = float((np.abs(na * d - n * da) / np.abs(n * da))[0, 0])
            return -v if math.isfinite(v) else -1e300
        for st in starts:
            r = minimize(obj, st, method="L-BFGS-B", bounds=bounds, options={"maxiter": 60})
            z = np.clip(r.x, [b[0] for b in bounds], [b[1] for b in bounds])
            u = [Fraction(float(t)).limit_denominator(2 ** 30) for t in z[:m]]
            u = [max(Fraction(-1), min(Fraction(1), t)) for t in u]
            w = [None] if pb.band is None else [_omega_in_band(pb, float(z[m]))]
            take(u, w)
            n_local += 1
    band = "" if pb.band is None else \
        (f" at {len(omegas)} log-spaced frequencies of the band ({EXACT_PER_DECADE} per decade)")
    parts = [n_corners + band] + ([grid + band] if grid else []) + \
        [f"the {min(TOP_EXACT, e.size)} worst of {e.size} floating-point screening points"] + \
        ([f"{n_local} bounded local searches (scipy L-BFGS-B) from the worst of them"]
         if n_local else [])
    method = (f"searched: exact rational evaluation at {ex.count} points (" +
              "; ".join(parts) + ")")
    if infinite:
        return Bound(None, ex.count, False, method + "; the exact value is 0 at a point, so "
                     "the relative error is unbounded", where)
    proof = _proof(pb, cand)
    if proof is not None and proof[0] >= best:
        method = ("proven: approx/exact is monotone in every toleranced part (signs of the "
                  "coefficients of its exact derivative numerators, or interval arithmetic on "
                  "the derivative), so the largest error is at one of two corners, evaluated "
                  "exactly; cross-checked by " + method)
        return Bound(proof[0], ex.count, True, method, (proof[1], None))
    return Bound(best, ex.count, False, method, where)


# ---------------------------------------------------------------- assumptions in words
def _fmt_factor(r: float) -> str:
    if not math.isfinite(r):
        return "more than any number (the dropped terms are 0 at nominal values)"
    if r >= 1000:
        k = 10 ** (int(math.floor(math.log10(r))) - 1)
        return f"{round(r / k) * k:,.0f}".replace(",", " ")
    return f"{r:.3g}"


def _words(e) -> str:
    """An expression in prose: ``·`` for products, superscript powers (``C·R·s²``)."""
    t = re.sub(r"\*\*(\d+)", lambda m: _power(int(m.group(1))), to_text(e))
    return t.replace("*", "·")


def _power(k: int) -> str:
    """A superscript power for prose (s², s³; higher powers as s^k)."""
    return {1: "", 2: "²", 3: "³"}.get(k, f"^{k}")


def assumptions(pb: Problem, sc: Screen, cand: Candidate, digits: int = 4) -> list:
    if cand.factors is not None:            # dominant terms per factor
        out = []
        for which, f, keep in cand.factors:
            T = pb.term_values(f, sc.X, sc.W)
            out += _group_words(pb, which, f, keep, T, T.sum(0))
        return out
    return (_group_words(pb, "numerator", pb.num, cand.keep_n, sc.Tn, sc.N) +
            _group_words(pb, "denominator", pb.den, cand.keep_d, sc.Td, sc.D))


def _group_words(pb, which, terms, keep, T, P) -> list:
    """The dropped terms of one polynomial in words, per power of s."""
    out = []
    powers = sorted({pb.s_power(e) for e, _ in terms})
    for k in powers:
        idx = [i for i, (e, _c) in enumerate(terms) if pb.s_power(e) == k]
        dropped = [i for i in idx if i not in keep]
        if not dropped:
            continue
        kept = [i for i in idx if i in keep]

        def part(ix, brief=False):
            ring = pb.ring
            p = ring.from_dict(dict(terms[i] for i in ix))
            if pb.si is not None and k:
                p = p / ring.gens()[pb.si] ** k
            e = factored_expr(p, pb.syms) if len(p) <= 12 else poly_expr(p, pb.syms)
            if e.could_extract_minus_sign():
                e = -e
            if brief and len(ix) > WORDS_TERMS and len(to_text(e)) > WORDS_CHARS:
                top = max(ix, key=lambda i: abs(T[i, 0, 0]))
                one = ring.from_dict(dict([terms[top]]))
                if pb.si is not None and k:
                    one = one / ring.gens()[pb.si] ** k
                e1 = poly_expr(one, pb.syms)
                e1 = -e1 if e1.could_extract_minus_sign() else e1
                return sympy.Symbol(f"the {len(ix)} terms led by {_words(e1)}")
            return e
        where = which if pb.si is None else \
            (f"the s{_power(k)} coefficient of the {which}" if k > 1 else
             f"the s coefficient of the {which}" if k == 1 else
             f"the constant coefficient of the {which}")
        dval = float(abs(sum(abs(T[i, 0, 0]) for i in dropped)))
        if kept:
            kval = abs(complex(T[kept, 0, 0].sum()))
            r = kval / dval if dval else math.inf
            out.append(f"{_words(part(kept, True))} ≫ {_words(part(dropped, True))} by a "
                       f"factor of "
                       f"{_fmt_factor(r)} ({where}, at nominal values)")
        else:
            with np.errstate(all="ignore"):
                share = float(np.nanmax(np.abs(T[dropped, 0, :].sum(0)) / np.abs(P[0, :])))
            out.append(f"the {'s%s ' % _power(k) if k else ''}term{'s' if len(dropped) > 1 else ''} "
                       f"{_words(part(dropped, True) * (S ** k if k else 1))} of the {which} "
                       f"{'are' if len(dropped) > 1 else 'is'} negligible"
                       + (" over the band" if pb.band else "") +
                       f": at most {format_bound(share * 100, digits)} % of the {which} at "
                       "nominal values")
    return out


# ---------------------------------------------------------------- the analysis
def _percent(v: float) -> str:
    """An entered bound E (``within 1%``) as written."""
    if v >= 10:
        return f"{v * 100:,.0f} %".replace(",", " ")
    return f"{v * 100:.3g} %"


def _error_percent(v: float, digits: int) -> str:
    """A computed largest error, rounded up so that it stays a bound (``--digits``)."""
    if v >= 10:
        return f"{v * 100:,.0f} %".replace(",", " ")
    return f"{format_bound(v * 100, digits)} %"


def _bound_up(v: float) -> sympy.Float:
    """``v`` rounded up to three significant digits (a bound stays a bound)."""
    if not math.isfinite(v) or v <= 0:
        return sympy.Float(v, 3)
    m, e = f"{v:.2e}".split("e")
    r = float(f"{m}e{e}")
    if r < v:
        r = float(f"{float(m) + 0.01:.2f}e{e}")
    return sympy.Float(r, 3)


def approximate(ctx, req, q) -> dict | None:
    """The approximation entry of one quantity (a dict with sympy values), and its step."""
    within = float(req.within)
    if q.expr is None and not q.sequence:
        return None
    if q.expr is not None and not (q.expr.free_symbols - {S}) and not q.expr.has(S):
        return {"note": f"{q.name} is a constant: there is nothing to approximate"}
    r = sens.rational(q.expr, []) if q.expr is not None else \
        sens.rational(q.in_sequence, list(q.sequence))
    if r is None:
        return {"note": f"{q.name} is not a rational function of its symbols: no approximation"}
    num, den, syms = r
    missing = sorted(str(x) for x in syms if x != S and x not in ctx.nominal)
    if missing:
        raise SheetError(f"an approximation of {q.name} needs nominal values of: "
                         f"{', '.join(missing)}", req.loc.line, req.loc.col)
    if len(num) > MAX_TERMS or len(den) > MAX_TERMS:
        return {"note": f"{q.name} has more than {MAX_TERMS} terms in its numerator or "
                        "denominator: no approximation is attempted"}
    band = tuple(req.band) if req.band else DEFAULT_APPROXIMATION_BAND
    box = tolerance.box_of(ctx, [x for x in syms if x != S])
    pb = Problem(num, den, syms, ctx.nominal, box, band)
    sc = Screen(pb)
    chosen, tried = None, []
    if len(pb.num) + len(pb.den) > 2:
        for margin in MARGINS:
            cands = candidates(pb, sc, within, margin)
            for c in sorted(cands, key=lambda c: (c.size, c.terms)):
                b = establish(pb, sc, c)
                tried.append((c, b))
                if b.value <= within:
                    chosen = (c, b)
                    break
            if chosen or not cands:
                break
    if chosen is None:
        short = [(c, establish(pb, sc, c)) for c in shortest_tried(pb, sc)] \
            if len(pb.num) + len(pb.den) > 2 else []
        return _failure(q, req, pb, short + tried, ctx.options.digits)
    c, b = chosen
    return _success(q, req, pb, sc, c, b, ctx.options.digits)


def _band_words(pb) -> str:
    if pb.band is None:
        return "over the whole tolerance box"
    lo, hi = (float(f) for f in pb.band)
    from derive.sheet.units import format_eng
    def hz(v):
        return re.sub(r"\.0+ ", " ", format_eng(v, "Hz", digits=4))
    return f"over the whole tolerance box and the band {hz(lo)} to {hz(hi)} at s = j·2π·f"


def _success(q, req, pb, sc, c, b, digits: int = 4) -> dict:
    within = float(req.within)
    words = assumptions(pb, sc, c, digits)
    name = q.name
    lhs = sympy.Symbol(f"{name}_approx")
    eq1 = Equation(lhs, c.expr, check=c.plain)
    bound = _bound_up(b.value)
    eq2 = Equation(sympy.Symbol("epsilon_max"), bound)
    ok = _recheck(pb, c, b, bound)
    eq2.mark("exact" if b.proven else "points", ok, None if b.proven else b.points)
    text = (f"Approximation of {name} within {_percent(within)}: keep the terms of the "
            f"exact numerator and denominator that dominate at nominal values ({c.label}), "
            f"adding terms back largest first until the magnitude of the relative error "
            f"({name}_approx − {name})/{name} stays within {_percent(within)} "
            f"{_band_words(pb)}. "
            f"The largest relative error is {_error_percent(b.value, digits)} (bound "
            f"{method_word(b)}). "
            + ("Assumptions: " + "; ".join(words) + "." if words else ""))
    step = Step(text, [eq1, eq2], kind="approximation")
    step.verify()
    return {"expr": c.expr, "latex": c.expr, "max_error": b.value, "within": within,
            "met": True, "method": b.method, "points": b.points,
            "proven": b.proven, "assumptions": words, "form": c.label, "step": step,
            **_band_entry(pb)}


def _band_entry(pb) -> dict:
    return {} if pb.band is None else {"band": [float(f) for f in pb.band]}


def method_word(b) -> str:
    return "proven" if b.proven else f"searched, {b.points} points"


def _recheck(pb, c, b, bound) -> bool:
    """The stated bound against the exact errors once more: at the worst point found and
    at every corner (exact comparison of squared values)."""
    ex = Exact(pb, c)
    lim = _q(float(bound)) ** 2
    u, w = b.worst if b.worst else ([0] * len(pb.tol), None)
    if pb.band is None:
        w = None
    elif w is None:
        w = _exact_omegas(pb)[0]
    pts = [(u, w)]
    if len(pb.tol) <= 10:
        pts += [(list(cn), w) for cn in itertools.product((-1, 1), repeat=len(pb.tol))]
    for u, w in pts:
        e = ex.err2(u, [w])[0]
        if e is None or e > lim:
            return False
    return True


def _failure(q, req, pb, tried, digits: int = 4) -> dict:
    within = float(req.within)
    shown = []
    for c, b in tried:
        if any(c.expr == s["expr"] for s in shown):
            continue
        finite = math.isfinite(b.value)
        shown.append({"expr": c.expr, "form": c.label,
                      "max_error": b.value if finite else None,
                      "method": b.method, "points": b.points, "proven": b.proven}
                     | ({} if finite else {"unbounded": True}))
    shown.sort(key=lambda s: len(to_text(s["expr"])))
    best = min((s["max_error"] for s in shown if s["max_error"] is not None), default=None)
    tried_words = "; ".join(f"{_words(s['expr'])} ({s['form']}): largest error "
                            + (_error_percent(s["max_error"], digits)
                               if s["max_error"] is not None else
                               "unbounded (the exact value is 0 at a point of the box)")
                            for s in shown)
    text = (f"Approximation of {q.name} within {_percent(within)}: no form shorter than the "
            f"exact one meets the bound {_band_words(pb)}"
            + (f". Shortest forms tried: {tried_words}." if shown else
               " (the exact form has a single term in its numerator and denominator)."))
    step = Step(text, [], kind="approximation")
    step.verify()
    return {"expr": None, "max_error": best, "within": within, "met": False,
            "method": (shown[0]["method"] if shown else "nothing to approximate"),
            "tried": [{k: v for k, v in s.items()} | {"latex": s["expr"]} for s in shown],
            "step": step, **_band_entry(pb)}


def answer(ctx, req, inner) -> RequestResult:
    """``find Q ... approximately within E%``: the result of ``inner`` (the handler of Q)
    with an approximation added to every quantity (``QuantityResult.approximation``) and
    one step each."""
    if not quantities.accepts("approximately", req.quantity):
        loc = req.name_locs.get("within", req.loc)
        raise SheetError(f"'approximately within' takes a single quantity, not "
                         f"'{req.quantity}' ({quantities.quantity(req.quantity).said}); ask "
                         "for one of them", loc.line, loc.col)
    result = inner(ctx, req)
    for q in result.quantities.values():
        a = approximate(ctx, req, q)
        if a is None:
            continue
        if "note" in a:
            result.notes.append(a["note"])
            continue
        step = a.pop("step")
        result.steps.append(step)
        q.approximation = a
    return result


# ---------------------------------------------------------------- check Q equals EXPR within E%
def _point_words(pb: Problem, u, w) -> tuple:
    """(symbol -> exact value, frequency in Hz as a float or None) of a point (u, omega)."""
    xv = pb.xpoint(u)
    point = {pb.syms[j]: sympy.Rational(int(xv[k].p), int(xv[k].q))
             for k, j in enumerate(pb.xs)}
    f = None if w is None else float(Fraction(int(w.p), int(w.q))) / (2 * math.pi)
    return point, f


def _sympy_err2(q_expr, claim, point: dict, w):
    """The squared relative error |claim − Q|²/|Q|² at one point, in exact sympy arithmetic
    from the two original expressions (independent of the polynomial rings above); None
    where Q is 0 or either side is undefined there."""
    env = dict(point)
    if w is not None:
        env[S] = sympy.I * sympy.Rational(int(w.p), int(w.q))
    try:
        vq = sympy.expand_complex(sympy.together(q_expr.xreplace(env)))
        vc = sympy.expand_complex(sympy.together(claim.xreplace(env)))
    except ZeroDivisionError:
        return None
    if vq.has(sympy.zoo, sympy.nan) or vc.has(sympy.zoo, sympy.nan):
        return None
    qr, qi = sympy.re(vq), sympy.im(vq)
    q2 = qr ** 2 + qi ** 2
    if q2 == 0:
        return None
    dr, di = sympy.re(vc) - qr, sympy.im(vc) - qi
    e = (dr ** 2 + di ** 2) / q2
    return e if e.is_Rational else None


def within_claim(ctx, req, name: str, q, q_expr, claim) -> dict:
    """``check Q equals EXPR within E% [from F1 to F2]``: the largest relative error of the
    claim against the exact Q over the tolerance box (and band), established by
    :func:`establish` exactly as an ``approximately within`` bound. A dict: ``holds``,
    ``bound`` (the largest error, rounded up; for a failing claim the error at the worst
    point found), ``proven``, ``method``, ``points``, ``worst`` (the point, its frequency,
    its error), ``band``, the verdict in words (``verdict``) and the step (``step``)."""
    within = float(req.within)
    loc = req.name_locs.get("within", req.loc)
    m1, m2 = sympy.Symbol("_Q_exact"), sympy.Symbol("_Q_claim")
    defs = ([*q.sequence, (m1, q.in_sequence)] if q.expr is None and q.sequence
            else [(m1, q_expr)]) + [(m2, claim)]
    rq, rc = sens.rational(m1, defs), sens.rational(m2, defs)
    if rq is None or rc is None:
        raise SheetError(f"'within' needs {name} and the claim as rational functions of their "
                         "symbols (no roots or other functions)", loc.line, loc.col)
    (num, den, syms), (cn, cd, _syms) = rq, rc
    missing = sorted(str(x) for x in syms if x != S and x not in ctx.nominal)
    if missing:
        raise SheetError(f"'within' needs nominal values of: {', '.join(missing)}",
                         loc.line, loc.col)
    band = tuple(req.band) if req.band else DEFAULT_APPROXIMATION_BAND
    if req.band and S not in syms:
        b = req.name_locs.get("band", loc)
        raise SheetError(f"{name} and the claim do not depend on s: a band has no meaning "
                         "here", b.line, b.col)
    box = tolerance.box_of(ctx, [x for x in syms if x != S])
    pb = Problem(num, den, syms, ctx.nominal, box, band)
    sc = Screen(pb)
    cand = Candidate(pb, None, None, "the claim", polys=(cn, cd))
    b = establish(pb, sc, cand)
    holds = b.value <= within
    u, w = b.worst if b.worst else ([0] * len(pb.tol), None)
    if pb.band is not None and w is None:
        w = _exact_omegas(pb)[0]
    point, freq = _point_words(pb, u, w)
    worst_e2 = Exact(pb, cand).err2(u, [w])[0]
    independent = _sympy_err2(q_expr, claim, point, w)
    over = f"{_band_words(pb)}"
    at = ", ".join(f"{x} = {float(v):.6g}" for x, v in sorted(point.items(), key=lambda kv:
                                                                  str(kv[0])))
    if freq is not None:
        from derive.sheet.units import format_eng
        at += (", " if at else "") + "f = " + format_eng(freq, "Hz", digits=4)
    lhs = sympy.Symbol("epsilon_max")
    if b.err2 is None:                       # 0 in a denominator inside the box
        holds = False
        verdict = (f"does not hold within {_percent(within)}: {name} or the claim's "
                   f"denominator is 0 at a point of the box ({at}), so the relative error is "
                   "unbounded")
        eq = Equation(lhs, sympy.oo)
        eq.mark("exact", worst_e2 is None and independent is None)
        bound = None
    elif holds:
        bound = _bound_up(b.value)
        verdict = (f"holds within {_percent(within)} (proven): the largest relative error "
                   f"is {_percent(b.value)} {over}" if b.proven else
                   f"holds within {_percent(within)} at all {b.points} searched points (not "
                   f"proven): the largest relative error found is {_percent(b.value)} {over}")
        eq = Equation(lhs, bound)
        ok = _recheck(pb, cand, b, bound) and independent is not None and \
            independent <= sympy.Rational(Fraction(float(bound))) ** 2
        eq.mark("exact" if b.proven else "points", ok, None if b.proven else b.points)
    else:
        bound = sympy.Float(math.sqrt(float(Fraction(int(worst_e2.p), int(worst_e2.q)))), 4)
        verdict = (f"does not hold within {_percent(within)}: the relative error is "
                   f"{_percent(float(bound))} at {at or 'nominal values'} (exact evaluation"
                   + (", the largest over the box: proven" if b.proven else
                      f"; the largest of {b.points} searched points") + ")")
        eq = Equation(sympy.Symbol("epsilon_worst"), bound)
        lim = sympy.Rational(Fraction(within)) ** 2
        ok = independent is not None and worst_e2 is not None and \
            independent == sympy.Rational(int(worst_e2.p), int(worst_e2.q)) and independent > lim
        eq.mark("exact", ok)
    text = (f"The claim against the exact {name}: the magnitude of the relative error "
            f"({name}_claimed − {name})/{name}, largest {over}, established "
            + ("by a proof" if b.proven else "by a search") + f" ({b.method}); at the worst "
            f"point found ({at or 'nominal values'}) it is rechecked in exact arithmetic from "
            f"the two expressions. Verdict: {verdict}.")
    step = Step(text, [eq], kind="check")
    step.verify()
    worst = {"point": {str(x): float(v) for x, v in point.items()},
             "error": (math.sqrt(float(Fraction(int(worst_e2.p), int(worst_e2.q))))
                       if worst_e2 is not None else None)}
    if freq is not None:
        worst["frequency"] = freq
    worst_f = worst["error"]
    return {"holds": bool(holds), "within": within,
            "bound": (b.value if holds else worst_f) if bound is not None else None,
            "max_error": b.value if math.isfinite(b.value) else None,
            "proven": bool(b.proven), "method_word": method_word(b), "method": b.method,
            "points": b.points, "worst": worst, "verdict": verdict, "step": step,
            **_band_entry(pb)}
