"""``choose X[, Y ...] from E<n> for Q = target``: standard values closest to a target.

The values come from the IEC 60063 series named (:mod:`derive.analyses.eseries`), in any
decade; every other symbol is at its nominal value. Every candidate is judged by an EXACT
evaluation of Q (rational arithmetic on the derived closed form, python-flint): the error is
``|Q - target| / |target|`` (``|Q|`` for a target of 0). The best combination wins; ties go
to the lower value (for several symbols: the lower value of the first symbol named, then of
the next, ...).

The search is bounded and still finds the exact optimum of what it searches:

* One symbol X (any decade): Q is a rational function ``N(X)/D(X)``. Between two
  consecutive *special points* -- positive real roots of ``N - target·D`` (the continuous
  solutions), of ``N'D - ND'`` (where Q turns) and of ``D`` (poles) -- ``Q - target`` is
  continuous, monotone and of one sign, so ``|Q - target|`` is monotone there and the best
  series value of that piece is a series neighbour of one of its ends. The candidates are
  therefore the two series neighbours of every special point (roots isolated exactly,
  :func:`derive.solver.univariate.real_roots`), a handful of exact evaluations. Beyond the
  last special point Q may still approach the target towards 0 or infinity without
  reaching it; the record says so when the limit there is closer than the value found.
* Several symbols X1, ..., Xk: X1 ... X(k-1) each range over three decades of the series
  around their nominal value (the decade of the nominal, one below and one above), and for
  every combination of them the last symbol Xk is chosen as above, within its own three
  decades (their ends added as candidates). With W values per window the search makes
  ``W^(k-1)`` univariate solves of a few exact evaluations each, instead of the ``W^k``
  evaluations of an exhaustive search (two symbols from E96: 288 solves instead of 82 944
  evaluations). At most :data:`MAX_COMBINATIONS` outer combinations are searched; more is a
  located error (name fewer symbols or a coarser series).

The continuous solution of a one-symbol choice is also given in closed form where the
inverted formula is linear or quadratic in X (:func:`derive.analyses.inversion.polynomial_roots`),
checked by substituting it back.

JSON: ``"choice": {"values", "series", "result", "target", "error", "runners_up",
"method", "evaluations", "continuous"}``.
"""
from __future__ import annotations

import bisect
import functools
import itertools
from fractions import Fraction

import flint
import sympy

from derive.analyses.eseries import decade
from derive.solver.numbers import fmpq_of, fraction_of
from derive.analyses import eseries
from derive.analyses import inversion
from derive.analyses import sensitivity as _sens
from derive.circuit.build import S as LAPLACE_S, key_of
from derive.derivation.steps import Equation, Step
from derive.errors import SheetError
from derive.forms import select as forms
from derive.forms.results import Context, RequestResult
from derive.forms.text import to_text
from derive.solver import univariate
from derive.sheet.units import format_exact, format_value

MAX_COMBINATIONS = 200_000
RUNNERS_UP = 4
WINDOW_DECADES = 3
SHADE = Fraction(1, 10 ** 6)    # below a series value, above the one before it


def _at(loc):
    return loc.line, loc.col





@functools.lru_cache(maxsize=4096)
def _row(series: str, k: int) -> tuple:
    """The series values of the decade [10**k, 10**(k+1)] (both ends), ascending."""
    m = eseries.mantissas(series)
    scale = 10 if len(m) <= 24 else 100
    unit = Fraction(10) ** k / scale
    return tuple(v * unit for v in m) + (m[0] * unit * 10,)


def neighbours(series: str, x: Fraction) -> tuple:
    """(largest series value <= x, smallest >= x): :func:`eseries.neighbours` with the
    decades cached (the search asks for thousands)."""
    row = _row(series, decade(x))
    return row[bisect.bisect_right(row, x) - 1], row[bisect.bisect_left(row, x)]


def window(series: str, nominal: Fraction) -> list:
    """The series values of three decades around ``nominal``: its decade, one below and one
    above (the next decade's first value excluded)."""
    k = decade(nominal)
    lo, hi = Fraction(10) ** (k - 1), Fraction(10) ** (k + WINDOW_DECADES - 1)
    return [v for v in eseries.values(series, lo, hi) if v < hi]


def _cauchy(p: flint.fmpq_poly) -> Fraction:
    """An upper bound of the absolute values of the roots of ``p`` (Cauchy)."""
    lead = abs(fraction_of(p[p.degree()]))
    return 1 + max((abs(fraction_of(p[k])) / lead for k in range(p.degree())), default=Fraction(0))


def positive_roots(p: flint.fmpq_poly) -> list:
    """The real roots of ``p`` in (0, oo) as enclosures (lo, hi) of rationals."""
    if p.is_zero() or p.degree() < 1:
        return []
    out = []
    for r in univariate.real_roots(p, 0, _cauchy(p), width=Fraction(1, 2 ** 40)):
        if r.exact is not None and r.exact == 0:
            continue
        if r.hi <= 0:
            continue
        out.append((max(r.lo, Fraction(0)), r.hi, r))
    return out


class Problem:
    """Q as exact flint polynomials with every symbol but the chosen ones at nominal."""

    def __init__(self, ctx: Context, req):
        self.req = req
        self.ctx = ctx
        try:
            eseries.mantissas(req.series)
        except eseries.SeriesError as e:
            raise SheetError(str(e), *_at(req.name_locs.get("series", req.loc))) from None
        qs = forms.port_quantities(_sens.full_context(ctx), req)
        if len(qs) != 1:
            raise SheetError(f"'choose' takes one quantity, not {req.quantity}", *_at(req.loc))
        self.q = qs[0]
        form = _sens.form_of(self.q)
        base = form.base_symbols()
        if LAPLACE_S in base:
            raise SheetError(f"{self.q.name} depends on the Laplace variable s: 'choose' needs "
                             "a frequency-independent quantity", *_at(req.loc))
        self.chosen = []
        for name, loc in zip(req.symbols, req.symbol_locs):
            if key_of(name) not in ctx.circuit.symbols:
                raise SheetError(f"'{name}' is not a symbol of this circuit", *_at(loc))
            x = sympy.Symbol(key_of(name))
            if x not in base:
                raise SheetError(f"{self.q.name} does not depend on {name}: choosing it cannot "
                                 "change the result", *_at(loc))
            self.chosen.append(x)
        nominal = ctx.nominal
        missing = sorted(str(x) for x in base - set(self.chosen) if x not in nominal)
        if missing:
            raise SheetError(f"'choose' evaluates {self.q.name} with every other symbol at its "
                             f"nominal value, but these have none: {', '.join(missing)}",
                             *_at(req.loc))
        self.windows = []
        if len(self.chosen) > 1:
            for x, name, loc in zip(self.chosen, req.symbols, req.symbol_locs):
                info = ctx.circuit.symbols[str(x)]
                if info.nominal is None or info.nominal <= 0:
                    raise SheetError(f"choosing several symbols searches three decades around "
                                     f"each one's nominal value, but {name} has "
                                     f"{'none' if info.nominal is None else 'no positive one'}",
                                     *_at(loc), )
                self.windows.append(window(req.series, Fraction(info.nominal)))
            n_outer = 1
            for w in self.windows[:-1]:
                n_outer *= len(w)
            if n_outer > MAX_COMBINATIONS:
                raise SheetError(f"choosing {len(self.chosen)} symbols from {req.series} would "
                                 f"search {n_outer} combinations (at most {MAX_COMBINATIONS}): "
                                 "name fewer symbols or a coarser series", *_at(req.loc))
        r = _sens.rational(form.final, list(form.defs))
        if r is None:
            raise SheetError(f"'choose' needs a rational closed form of {self.q.name}",
                             *_at(req.loc))
        n, d, syms = r
        self.form = form
        self.nominal = nominal
        fixed = {f"v{i}": fmpq_of(nominal[x]) for i, x in enumerate(syms) if x not in self.chosen}
        self.n = n.subs(fixed) if fixed else n
        self.d = d.subs(fixed) if fixed else d
        self.index = [syms.index(x) for x in self.chosen]
        self.nvars = len(syms)
        self.target = fraction_of(req.target.value)
        self.evaluations = 0

    def value(self, vals) -> Fraction | None:
        """Q at the chosen symbols' values ``vals`` (exact), None at a pole."""
        point = [flint.fmpq(0)] * self.nvars
        for i, v in zip(self.index, vals):
            point[i] = fmpq_of(v)
        self.evaluations += 1
        dv = self.d(*point)
        if dv == 0:
            return None
        return fraction_of(self.n(*point) / dv)

    def error(self, v: Fraction) -> Fraction:
        t = self.target
        return abs(v - t) / abs(t) if t != 0 else abs(v)

    def univariate(self, outer):
        """(N, D) as fmpq_poly in the last chosen symbol, the others at ``outer``."""
        last = self.index[-1]
        sub = {f"v{i}": fmpq_of(v) for i, v in zip(self.index[:-1], outer)}
        n = self.n.subs(sub) if sub else self.n
        d = self.d.subs(sub) if sub else self.d

        def poly(p):
            cs = {}
            for exps, c in p.to_dict().items():
                cs[exps[last]] = cs.get(exps[last], 0) + c
            top = max(cs) if cs else 0
            return flint.fmpq_poly([cs.get(k, 0) for k in range(top + 1)])
        return poly(n), poly(d)

    def special(self, N, D) -> tuple:
        """(continuous solutions, all special points) in (0, oo) as (lo, hi) enclosures."""
        P = N - flint.fmpq_poly([fmpq_of(self.target)]) * D
        roots = positive_roots(P)
        crit = positive_roots(N.derivative() * D - N * D.derivative())
        poles = positive_roots(D)
        return roots, roots + crit + poles

    def candidates(self, N, D, win=None) -> set:
        out = set()
        _, points = self.special(N, D)
        series = self.req.series
        for lo, hi, _r in points:
            for x in (lo, hi):
                if x > 0:
                    below, above = neighbours(series, x)
                    out.update((below, above))
                    if win is None:     # the next values out, for the runners-up
                        out.add(neighbours(series, below * (1 - SHADE))[0])
                        out.add(neighbours(series, above * (1 + SHADE))[1])
        if win is not None:
            out = {c for c in out if win[0] <= c <= win[-1]}
            out.update((win[0], win[-1]))
        return out

    def search(self) -> list:
        """Every candidate combination examined: [(error, values, result)], best first."""
        seen = {}
        if len(self.chosen) == 1:
            N, D = self.univariate(())
            cands = self.candidates(N, D)
            if not cands:
                lims = ", ".join("unbounded" if v is None else f"{float(v):.6g}"
                                 for v in _limits(self, N, D))
                raise SheetError(f"no positive value of {self.req.symbols[0]} gives "
                                 f"{self.q.name} = {float(self.target):g}, and {self.q.name} "
                                 f"has no turning point or pole in it (its limits towards 0 "
                                 f"and infinity: {lims}): the target is out of reach",
                                 *_at(self.req.name_locs.get("target", self.req.loc)))
            for c in cands:
                v = self.value((c,))
                if v is not None:
                    seen[(c,)] = (self.error(v), (c,), v)
        else:
            for outer in itertools.product(*self.windows[:-1]):
                N, D = self.univariate(outer)
                for c in self.candidates(N, D, self.windows[-1]):
                    vals = tuple(outer) + (c,)
                    v = self.value(vals)
                    if v is not None:
                        seen[vals] = (self.error(v), vals, v)
        if not seen:
            raise SheetError(f"no combination of {self.req.series} values gives a finite "
                             f"{self.q.name}", *_at(self.req.loc))
        return sorted(seen.values(), key=lambda e: (e[0], e[1]))


def _limits(pb: Problem, N, D):
    """Q's limits towards 0 and infinity in the one chosen symbol (None where infinite)."""
    out = []
    d0 = fraction_of(D(0)) if D.degree() >= 0 else Fraction(0)
    out.append(fraction_of(N(0)) / d0 if d0 != 0 else None)
    if N.degree() < D.degree():
        out.append(Fraction(0))
    elif N.degree() == D.degree():
        out.append(fraction_of(N[N.degree()]) / fraction_of(D[D.degree()]))
    else:
        out.append(None)
    return out


def _continuous(pb: Problem, name: str):
    """(Equation or None, text) for the continuous solution of a one-symbol choice."""
    N, D = pb.univariate(())
    roots, _ = pb.special(N, D)
    if not roots:
        return None, [], "no positive value of it gives the target exactly"
    vals = [(lo + hi) / 2 for lo, hi, _ in roots]
    text = ", ".join(format_value(float(v), pb.ctx.circuit.symbols[key_of(name)].unit,
                                  pb.ctx.options.digits) for v in vals)
    eq = None
    f = pb.form
    x = pb.chosen[0]
    if not f.defs:
        qsym = inversion.measured_symbol(pb.ctx, pb.q.name)
        num, den = sympy.fraction(sympy.cancel(sympy.together(f.final)))
        try:
            poly = sympy.Poly(sympy.expand(num - qsym * den), x)
        except sympy.PolynomialError:
            poly = None
        if poly is not None and 1 <= poly.degree() <= 2:
            sols, _how = inversion.polynomial_roots(poly)
            at = {**{k: v for k, v in pb.nominal.items() if k != x},
                  qsym: sympy.Rational(pb.target.numerator, pb.target.denominator)}
            best = None
            for s in sols:
                try:
                    sv = complex(s.xreplace(at))
                except (TypeError, ValueError, ZeroDivisionError):
                    continue
                if abs(sv.imag) < 1e-12 * max(1.0, abs(sv.real)) and any(
                        abs(sv.real - float(v)) <= 1e-9 * abs(float(v)) for v in vals):
                    best = s
            if best is not None:
                eq = Equation(sympy.Symbol(f"{name}_cont"), best)
                back = sympy.cancel(sympy.together(f.final.xreplace({x: best}) - qsym)) \
                    if poly.degree() == 1 else None
                if back is not None:
                    eq.mark("exact", back == 0)
                else:
                    # a square root: substituting back, checked at random rational points
                    ok, n = _sens._agree_how(f.final.xreplace({x: best}), qsym * sympy.Integer(1))
                    eq.mark("points" if n is not None else "exact", ok, n)
    return eq, vals, text


def answer(ctx: Context, req) -> RequestResult:
    res = RequestResult(req)
    pb = Problem(ctx, req)
    ranked = pb.search()
    err, vals, v = ranked[0]
    names = list(req.symbols)
    unit = pb.q.unit
    u = f" {unit}" if unit else ""          # after the entered target
    d = ctx.options.digits
    units = {n: ctx.circuit.symbols[key_of(n)].unit for n in names}

    def v_(x):
        return format_value(float(x), unit, d)
    runners = [{"values": {n: float(x) for n, x in zip(names, c)}, "result": float(r),
                "error": float(e)} for e, c, r in ranked[1:1 + RUNNERS_UP]]
    one = len(names) == 1
    method = (("exact evaluation of every series neighbour of the special points of Q in "
               f"{names[0]} (continuous solutions, turning points, poles), any decade")
              if one else
              (f"{', '.join(names[:-1])} over three decades around "
               f"{'its' if len(names) == 2 else 'their'} nominal value{'' if len(names) == 2 else 's'} "
               f"({' × '.join(str(len(w)) for w in pb.windows[:-1])} combinations); for each, "
               f"{names[-1]} from the series neighbours of the special points of Q in it "
               f"within its three decades ({len(pb.windows[-1])} values) and the window ends; "
               "every candidate evaluated exactly"))
    choice = {"values": {n: float(x) for n, x in zip(names, vals)}, "series": req.series,
              "result": float(v), "target": float(pb.target), "error": float(err),
              "unit": unit, "units": {n: ctx.circuit.symbols[key_of(n)].unit for n in names},
              "runners_up": runners, "method": method, "evaluations": pb.evaluations,
              "exact": {"values": {n: str(x) for n, x in zip(names, vals)},
                        "result": str(v), "error": str(err)}}
    steps = []
    if one:
        eq, cont, text = _continuous(pb, names[0])
        choice["continuous"] = [float(c) for c in cont]
        steps.append(Step(f"Continuous solution: {names[0]} for {pb.q.name} = "
                          f"{float(pb.target):g}{u} with every other symbol at nominal: {text} "
                          "(a real root of the numerator of Q − target, isolated exactly). "
                          f"The candidates are the {req.series} values next to it and next to "
                          f"the other special points of {pb.q.name} in {names[0]}.",
                          [eq] if eq is not None else [], names, kind="choice"))
        N, D = pb.univariate(())
        for lim, where in zip(_limits(pb, N, D), ("0", "infinity")):
            if lim is not None and pb.error(lim) < err:
                res.notes.append(f"{pb.q.name} comes closer to the target as {names[0]} goes to "
                                 f"{where} (limit {v_(lim)}) than at any value "
                                 "next to its special points.")
    else:
        steps.append(Step(f"Search: {method}. {pb.evaluations} exact evaluations (an exhaustive "
                          "search of the windows would take "
                          f"{_product(len(w) for w in pb.windows)}).", [], names,
                          kind="choice"))
    table = [["rank", *names, pb.q.name, "relative error"]]
    for k, (e, c, r) in enumerate(ranked[:1 + RUNNERS_UP], 1):
        table.append([str(k), *[format_exact(x, units[n]) for n, x in zip(names, c)], v_(r),
                      format_value(float(e), None, d)])
    point = {**{k: v for k, v in pb.nominal.items()},
             **{x: sympy.Rational(c.numerator, c.denominator) for x, c in zip(pb.chosen, vals)}}
    again = pb.form.value(point)
    check = Equation(sympy.Symbol(f"{pb.q.name}_chosen"), sympy.Rational(v.numerator, v.denominator),
                     check=sympy.Rational(again) if again is not None else None)
    steps.append(Step(f"Best {req.series} choice: " +
                      ", ".join(f"{n} = {format_exact(x, units[n])}" for n, x in zip(names, vals)) +
                      f", giving {pb.q.name} = {v_(v)} against the target "
                      f"{float(pb.target):g}{u} (relative error {format_value(float(err), None, d)}; exact "
                      "evaluation, checked against the derived closed form). Ties go to the "
                      "lower value.", [check], names, kind="choice", table=table))
    for s in steps:
        s.verify()
    res.steps = steps
    res.extra["choice"] = choice
    res.extra["standard_values"] = {n: float(x) for n, x in zip(names, vals)}
    return res


def _product(it):
    out = 1
    for k in it:
        out *= k
    return out
