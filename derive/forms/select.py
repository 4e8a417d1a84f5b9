"""Port and branch quantities in their best exact form.

For each quantity the expanded cancelled rational function is computed when the
determinants are of moderate size (estimated before expanding); a nested series-parallel
form is derived where the network reduces that way; otherwise a sequence of named
intermediate quantities (node elimination). The shortest exact form becomes ``expr``.
"""
from __future__ import annotations

import math

import flint
import sympy

from derive.solver import convert as edge
from derive.errors import SheetError
from derive.forms import cost, power
from derive.forms.results import QuantityResult
from derive.forms.text import printed
from derive.sheet import kinds, quantities
from derive.solver.determinant import estimate_det_terms
from derive.solver.stamping import System
from derive.solver.cramer import Solver



def system_of(ctx) -> System:
    return ctx.system()


def _solver(ctx, req) -> Solver:
    return ctx.solver(req.loc)


def expandable(ctx) -> bool:
    """Whether the circuit's determinants are expanded (exact ratios of polynomials).

    Up to ``LARGEST_EXPANDED`` estimated terms the expanded form may be shown, and it is
    expanded (up to ``Options.expand_limit``). Beyond that the expanded form is never
    written out; it serves only the value and the checks, which the other route does by
    exact nodal solves at points, so it is expanded only where that is estimated to cost
    less: its cost grows with the terms (cancellation, the vth = isc·rth check and every
    step check evaluate polynomials of that many terms), the nodal solves' with the
    unknowns. ``EXPAND_TERMS_PER_UNKNOWN`` is where the two costs meet (measured on the
    all-symbolic ladders of ``benchmarks/bench_verify_ladders.py``, process cpu time, the
    collector off: 4181 terms over 11 unknowns expanded 59 ms against 71 ms, 10946 over 12
    expanded 67 ms against 58 ms), so a larger circuit never takes longer than the smaller
    one because of the route."""
    if "expandable" not in ctx.cache:
        A = system_of(ctx).A
        est = estimate_det_terms(A)
        ctx.cache["expandable"] = est <= ctx.options.expand_limit and (
            est <= LARGEST_EXPANDED or est <= EXPAND_TERMS_PER_UNKNOWN * max(1, A.n))
    return ctx.cache["expandable"]


LONG_ELEMENTS = 200  # a reducible network of more elements is not expanded (see below)


def long_reducible(ctx, req, name) -> bool:
    """Whether ``name`` of ``req`` comes from a network of more than ``LONG_ELEMENTS`` elements
    that reduces by series and parallel moves: its exact form is then the reduction's
    sequence of named intermediates, in time and memory linear in the network, and the
    expanded ratio is not formed (a chain of N resistors would expand into N terms of N
    variables, O(N^2)), nor the stamped system (a ring of N variables stores every
    monomial with N exponents: O(N^2) memory); the steps are checked by sparse exact
    solves instead."""
    if len(ctx.circuit.elements) <= LONG_ELEMENTS or req.quantity == "current":
        return False
    from derive.forms import series_parallel as reduce
    return reduce.port_form(ctx, req, name) is not None

EXPAND_TERMS_PER_UNKNOWN = 600  # beyond LARGEST_EXPANDED: expanded while terms <= this * unknowns


def gain_unit(ctx, source):
    e = ctx.circuit.element(source)
    return kinds.kind(e.kind).gain_unit


def names_for(req):
    return list(quantities.members(req.quantity))


def port_quantities(ctx, req) -> list:
    """Results of a thevenin/norton/vth/.../current/gain/power request (a list of
    QuantityResult); ``find``, ``solve``, ``check``, ``find sensitivity`` and ``find
    tolerance`` all take their quantity from here."""
    if req.quantity == "power":
        return power.quantities(ctx, req, expandable(ctx))
    out = []
    for name in names_for(req):
        unit = gain_unit(ctx, req.source) if name == "gain" else quantities.unit(name)
        ratio = exact_ratio(ctx, req, name) if not long_reducible(ctx, req, name) and \
            expandable(ctx) else None
        q = QuantityResult(name, None, None, unit, ratio=ratio)
        readable = None
        if ratio is not None:
            q.value = edge.value_at(ratio, ctx.nominal)
            if ratio.terms() <= READABLE_TERMS:
                readable = ratio        # its sympy form, built only where it may be shown
        compact(ctx, req, q, readable)
        if q.expr is None and ratio is not None and ratio.terms() <= LARGEST_EXPANDED:
            q.expr, q.form = edge.to_sympy(ratio), "expanded"
        if q.expr is None and not q.sequence:
            raise SheetError(f"no closed form of {name} could be derived", req.loc.line, req.loc.col)
        undefined_at_nominal(ctx, q)
        out.append(q)
    if req.quantity in ("thevenin", "norton") and out[0].ratio is not None and \
            expandable(ctx):
        cross_check(ctx, req)
    return out


S = sympy.Symbol("s")


def undefined_at_nominal(ctx, q) -> None:
    """Mark ``q`` when every symbol it uses has a nominal value but it has no finite value
    there (its exact closed form divides by zero at nominal: the circuit is singular at
    nominal values). The value becomes None and ``q.undefined`` says why."""
    if q.value is not None and not (isinstance(q.value, float) and not math.isfinite(q.value)):
        return
    used = set(q.expr.free_symbols) if q.expr is not None else set()
    for _, e in q.sequence:
        used |= e.free_symbols
    if q.in_sequence is not None:
        used |= q.in_sequence.free_symbols
    used -= {s for s, _ in q.sequence}
    nominal = ctx.nominal
    if S in used or any(x not in nominal for x in used):
        return                       # symbolic, or a function of s: no single value
    if q.value is None:
        if q.expr is None:
            return
        v = q.expr.xreplace(nominal)
        if v.is_finite or not v.is_number:
            return                   # a finite (or irrational) value: not a pole
    q.value = None
    q.undefined = (f"{q.name} is unbounded or undefined at nominal values: the denominator "
                   "of its exact closed form vanishes there (the circuit is singular at "
                   "nominal values), so no value is given")
    q.notes.append(q.undefined)


def _reactive(ctx) -> bool:
    return any(kinds.kind(e.kind).reactive for e in ctx.circuit.elements)


def exact_ratio(ctx, req, name):
    """The exact Ratio of quantity ``name`` of a request (None where it does not exist)."""
    key = ("ratio", name, req.port, req.element, req.source)
    if key in ctx.cache:
        return ctx.cache[key]
    solver = _solver(ctx, req)
    port = ctx.port(req.port) if req.port else None
    base = quantities.twin(name)
    if base == "vth":
        r = solver.vth(port)
    elif base == "rth":
        r = solver.rth(port)
    elif base == "isc":
        r = solver.isc(port)
        if r is None:
            raise SheetError(f"port {req.port!r} is directly across an ideal voltage source: "
                             "its resistance is 0 and no finite short-circuit current exists",
                             req.loc.line, req.loc.col)
    elif base == "current":
        r = solver.current(req.element)
    elif base == "gain":
        r = solver.vth(port, only=req.source)
    else:
        raise KeyError(name)
    ctx.cache[key] = r
    return r


def cross_check(ctx, req):
    """vth = isc * rth wherever both exist, checked exactly at random rational points.

    The three ratios come from the solver (vth and rth as reported, isc solved afresh from
    its own bordered determinants) and are never multiplied out: each numerator and
    denominator is evaluated exactly (flint ``fmpq``) at the same random rational point and
    the identity is compared there (:func:`product_identity_holds`). Raises AssertionError
    when the identity fails, or when no point with nonzero denominators is found.
    """
    port = ctx.port(req.port)
    rth = exact_ratio(ctx, req, "rth")
    if rth.is_zero:
        return True
    isc = _solver(ctx, req).isc(port)
    vth = exact_ratio(ctx, req, "vth")
    if isc is None or not product_identity_holds(vth, [isc, rth]):
        raise AssertionError(f"internal check failed: vth != isc*rth at port {req.port}")
    ctx.cache[("vth = isc*rth holds", req.port)] = CHECK_POINTS    # points it passed at
    return True


CHECK_POINTS = 3            # independent random points an identity must pass
CHECK_TRIES = 40            # draws allowed in all (points where a denominator vanishes redrawn)
_CHECK_RANGE = 2 ** 62      # coordinates of the points drawn from 1..this (integers)


def product_identity_holds(lhs, factors, points: int = CHECK_POINTS, tries: int = CHECK_TRIES,
                           seed: int = 20240917) -> bool:
    """Whether the exact ratio ``lhs`` equals the product of the ratios ``factors``.

    Decided by exact evaluation at ``points`` random rational points (Schwartz-Zippel: the
    polynomial ``lhs.num * prod(f.den) - lhs.den * prod(f.num)`` has total degree ``D`` at most
    the sum of the degrees involved; if it is not identically zero it vanishes at a point
    drawn uniformly from a grid of ``N`` values per coordinate with probability at most
    ``D/N``; here the coordinates are integers drawn from ``1..N``, ``N = 2^62``, so a wrong
    identity passes ``points`` independent draws with probability below ``(D/2^62)^points``;
    integer points keep the evaluation in integer arithmetic). Only
    numerators and denominators are evaluated -- no product or gcd of the polynomials is
    formed. Points where a denominator vanishes are redrawn; if fewer than ``points`` usable
    points are found in ``tries`` draws, AssertionError is raised (the check refuses rather
    than passes). All ratios must share one ring (one system's context).

    >>> import flint
    >>> from derive.solver.cramer import Ratio
    >>> c = flint.fmpq_mpoly_ctx.get(("a", "b"), "lex"); a, b = c.gens()
    >>> r = lambda n, d: Ratio(n, d, None)
    >>> product_identity_holds(r(a, b), [r(a, a + b), r(a + b, b)])
    True
    >>> product_identity_holds(r(a, b), [r(a, a + b), r(a + b, a)])
    False
    """
    import random
    rnd = random.Random(seed)
    ctx = lhs.num.context()
    nv = ctx.nvars()
    polys = [(lhs.num, lhs.den)] + [(f.num, f.den) for f in factors]
    # a polynomial that occurs more than once (det A is the denominator of vth and rth) is
    # evaluated once per point
    flat = [p for pair in polys for p in pair]
    first = []
    for i, p in enumerate(flat):
        first.append(next((j for j in range(i) if flat[j] is p or flat[j] == p), i))
    passed = 0
    for _ in range(tries):
        pt = [flint.fmpq(rnd.randint(1, _CHECK_RANGE)) for _ in range(nv)]
        vals = []
        for i, p in enumerate(flat):
            vals.append(vals[first[i]] if first[i] != i else p(*pt))
        dens = vals[1::2]
        if any(d == 0 for d in dens):
            continue            # a denominator vanishes here: draw another point
        nums = vals[0::2]
        left = nums[0] / dens[0]
        right = flint.fmpq(1)
        for n, d in zip(nums[1:], dens[1:]):
            right *= n / d
        if left != right:
            return False
        passed += 1
        if passed == points:
            return True
    raise AssertionError(f"internal check refused: only {passed} of {points} random points "
                         f"with nonzero denominators found in {tries} draws")


def compact(ctx, req, q, readable=None):
    """Attach the series-parallel or elimination-sequence form when it is better.
    ``readable``: a ratio whose expanded form is short enough to show; its sympy form is
    built only when the nested form is not surely the shorter one."""
    from derive.forms import series_parallel as reduce
    from derive.forms import elimination as sequence
    sp = reduce.port_form(ctx, req, q.name) if req.quantity != "current" else None
    nested = None
    inline_size = None
    if sp is not None:
        defs, final = sp
        # the printed length of the nested form, read off its named pieces (the length of
        # the text with every name replaced by its expression: printing the nested sympy
        # expression itself costs more than all the rest of a small ladder)
        if len(defs) <= INLINE_DEFS:
            inline_size = _inline_size(defs, final)
            nested = sequence.inline(defs, final) if inline_size <= INLINE_LIMIT else None
    shorter = None
    if readable is not None:
        if nested is not None and inline_size < expanded_length_at_least(readable):
            shorter = True              # what the comparison below would find
        else:
            q.expr = edge.to_sympy(readable)
    if req.quantity != "current":
        if sp is not None:
            if nested is not None and (shorter or q.expr is None or
                                       inline_size < len(str(q.expr))):
                q.expr, q.form = nested, "series-parallel"
            elif q.expr is None:
                q.form = "series-parallel"
            if q.expr is None or (defs and len(defs) > 1 and q.form == "series-parallel"):
                q.sequence, q.in_sequence = defs, final
            if q.ratio is None:
                q.value = sequence.evaluate(defs, final, ctx.nominal)
            return
    if q.expr is None:
        seq, final, value = sequence.quantity_sequence(ctx, req, q.name)
        q.sequence, q.in_sequence, q.form = seq, final, "sequence"
        q.value = value
        if _inline_size(seq, final) <= 2000:
            q.expr = sequence.inline(seq, final)


def expanded_length_at_least(ratio) -> int:
    """A lower bound of the printed length of the expanded (factored) form of ``ratio``:
    read off its term counts where that applies (:func:`derive.forms.cost.printed_length_bound`,
    no factoring or printing), else from its factors
    (:func:`derive.solver.convert.printed_length_at_least`)."""
    bound = cost.printed_length_bound(ratio)
    return edge.printed_length_at_least(ratio) if bound is None else bound


INLINE_LIMIT = 8000         # characters: a longer nested form is given as its sequence (its
                            # printing costs more than the sequence and no reviewer reads it)
INLINE_DEFS = 400           # longer sequences stay sequences (inlining a chain is O(N^2))
READABLE_TERMS = 400        # expanded forms up to this many terms are shown as such
LARGEST_EXPANDED = 3000     # beyond this the expanded form is never written out


def _inline_size(defs, final) -> int:
    """Length of the expression with every name substituted back (without building it)."""
    size = {}
    for s, e in defs:
        text = printed(e)                   # printed once per expression (kept for export)
        size[s] = len(text) + sum((size[x] - len(str(x))) * text.count(str(x))
                                  for x in e.free_symbols if x in size)
        if size[s] > 10 * INLINE_LIMIT:
            size[s] = 10 * INLINE_LIMIT
    text = printed(final)
    return len(text) + sum((size[x] - len(str(x))) * text.count(str(x))
                           for x in final.free_symbols if x in size)
