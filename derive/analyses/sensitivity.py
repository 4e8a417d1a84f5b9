"""Sensitivities of a result to its parts: dQ/dx and S = (x/Q)·dQ/dx, exact and at nominal.

``find sensitivity of Q ...`` (Q any scalar quantity: vth, rth, isc, rn, resistance,
impedance, voltage, current, gain; ``thevenin``/``norton`` give both members). For every
symbol x with a nominal value the derivative and the normalized sensitivity are derived in
closed form (simplified: the shorter of the factored and the plain form) and evaluated
exactly at nominal values; entries are ranked by |S| at nominal.

Where Q exists only as a sequence of named intermediates, the derivative is carried through
the sequence in forward mode (chain rule, one new named entry ``dq3_dRa`` per intermediate
that depends on x), so the derivative is itself a sequence.

JSON (in ``RequestResult.extra``; expressions are sympy objects, printed by the JSON
exporter):

- ``"sensitivities"``: ``{x: {"expr", "normalized", "value", "derivative_value", "rank"}}``
  for the request's quantity; for ``thevenin``/``norton`` for the first member (vth, isc);
  sequence-only derivatives carry ``"sequence"``/``"in_sequence"`` instead of ``"expr"``.
- ``"sensitivity_of"``: the name of the quantity under ``"sensitivities"``.
- ``"sensitivities_by_quantity"``: ``{name: {x: ...}}`` for every member (always present).
- ``"quantity_sequences"``: ``{name: {"sequence", "in_sequence"}}`` for members that exist
  only as a sequence (the derivative sequences use these names).
- ``"figures"``: ranked bar charts (:class:`derive.derivation.steps.Figure`, not JSON).

Sensitivities are always taken with every symbol symbolic (a ``numeric`` line or
``--symbolic`` does not hide a part from its sensitivity).

>>> import sympy
>>> V, R1, R2 = sympy.symbols('V R1 R2')
>>> f = Form([], V*R2/(R1 + R2))
>>> d, _ = derivative(f, R1)
>>> d.final
-R2*V/(R1 + R2)**2
>>> tidy(R1*d.final/f.final)
-R1/(R1 + R2)
"""
from __future__ import annotations

import dataclasses
import functools
from dataclasses import dataclass, field
from typing import Optional

import flint
import sympy

from derive.solver import convert as edge
from derive.analyses import frequency
from derive.forms import cost
from derive.forms import select as forms
from derive.forms.results import Context, RequestResult
from derive.circuit.build import S as LAPLACE_S
from derive.errors import SheetError
from derive.sheet import quantities
from derive.forms.text import to_text
from derive.derivation.steps import Equation, Figure, Step, compare
from derive.sheet.units import DEFAULT_DIGITS, format_value

TIDY_OPS = 600          # factor only expressions up to this many operations


@dataclass
class Form:
    """A result as named intermediates ``defs`` [(Symbol, expr)] and a final expression."""
    defs: list
    final: sympy.Expr

    def base_symbols(self) -> set:
        names = {q for q, _ in self.defs}
        out = set(self.final.free_symbols)
        for _, e in self.defs:
            out |= e.free_symbols
        return out - names

    def value(self, point: dict):
        """Exact value at ``point`` (Symbol -> Rational); None if a symbol of the result is
        missing (or the value is not finite). Symbols that cancel do not count."""
        from derive.forms.elimination import exact_value
        return exact_value(self.defs, self.final, point)


SEQUENCE_CHARS = 400    # a closed form longer than this is differentiated through its sequence


def form_of(q) -> Form:
    """The form a quantity is differentiated in: its closed form, or its sequence of named
    intermediates where the closed form is long (a nested ladder expression's derivative
    grows with every level of nesting; forward mode through the sequence adds one short
    entry per intermediate)."""
    if q.expr is not None and not (q.sequence and len(str(q.expr)) > SEQUENCE_CHARS):
        return Form([], q.expr)
    return Form(list(q.sequence), q.in_sequence)


def tidy(e: sympy.Expr) -> sympy.Expr:
    """The shorter of ``e`` and its cancelled, factored form.

    The rational function is rebuilt exactly as a ratio of python-flint polynomials
    (:func:`rational`), cancelled and factored there; forms with roots are factored by sympy
    when small, else left as they are. An expanded form that is certainly longer than ``e``
    (:func:`_too_long`) is not built at all.
    """
    if e.is_Atom:
        return e
    r = rational(e)
    if r is not None:
        budget = len(str(e))
        if _too_long(r[0], budget) or _too_long(r[1], budget):
            return e
        f = _factored(*r)
    elif sympy.count_ops(e) <= TIDY_OPS:
        f = sympy.factor(sympy.cancel(sympy.together(e)))
    else:
        return e
    return f if len(str(f)) <= len(str(e)) else e


MIN_TERM_CHARS = 4      # a printed term of a polynomial in circuit symbols: " + " and a name


def _too_long(p, budget) -> bool:
    """Whether the printed expansion of ``p`` is certainly longer than ``budget``
    characters (every term costs at least MIN_TERM_CHARS). Factoring can shorten a
    polynomial, so only polynomials too large to be factored (over FACTOR_TERMS terms) are
    judged this way. ``budget`` may be a function giving it (asked only then)."""
    if len(p) <= FACTOR_TERMS:
        return False
    return len(p) * MIN_TERM_CHARS > (budget() if callable(budget) else budget)


FACTOR_TERMS = 3000     # edge.factored_expr factors polynomials up to this many terms


def rational(e: sympy.Expr, defs=(), max_terms: int | None = None):
    """(num, den, symbols): ``e`` as a cancelled ratio of flint polynomials over its free
    symbols, or None when ``e`` is not a rational function (roots, other functions) or,
    with ``max_terms``, when an intermediate numerator and denominator together pass that
    many terms (the expansion of a large sequence would cost more than it can save).
    ``defs``: named intermediates [(Symbol, expr)] that ``e`` uses, each converted once."""
    names = {q for q, _ in defs}
    syms = set(e.free_symbols)
    for _, x in defs:
        syms |= x.free_symbols
    syms = sorted(syms - names, key=str)
    if not syms:
        return None
    ctx = flint.fmpq_mpoly_ctx.get(tuple(f"v{i}" for i in range(len(syms))), "lex")
    gens = dict(zip(syms, ctx.gens()))
    memo: dict = {}

    def conv(x):
        if x in memo:
            return memo[x]
        if x.is_Symbol:
            r = (gens[x], ctx.constant(1))
        elif x.is_Rational:
            r = (ctx.constant(flint.fmpq(int(x.p), int(x.q))), ctx.constant(1))
        elif x.is_Add:
            n, d = conv(x.args[0])
            for a in x.args[1:]:
                n2, d2 = conv(a)
                g = d.gcd(d2)
                n, d = n * (d2 / g) + n2 * (d / g), d * (d2 / g)
            r = _cancel(n, d)
        elif x.is_Mul:
            # cross-cancelled products: a nested form's factors telescope (a ladder's
            # denominators cancel the next factor's numerator), so partial products stay
            # the size of the result instead of the product of every factor's expansion
            n, d = ctx.constant(1), ctx.constant(1)
            for a in x.args:
                n2, d2 = conv(a)
                g1, g2 = n.gcd(d2), n2.gcd(d)
                if not g1.is_one():
                    n, d2 = n / g1, d2 / g1
                if not g2.is_one():
                    n2, d = n2 / g2, d / g2
                n, d = n * n2, d * d2
            r = _cancel(n, d)
        elif x.is_Pow and x.exp.is_Integer:
            n, d = conv(x.base)
            k = int(x.exp)
            r = (n ** k, d ** k) if k >= 0 else (d ** -k, n ** -k)
        else:
            raise _NotRational
        if r[1].is_zero():
            raise _NotRational
        if max_terms is not None and len(r[0]) + len(r[1]) > max_terms:
            raise _NotRational
        memo[x] = r
        return r
    try:
        for q, x in defs:
            memo[q] = conv(x)
        n, d = conv(e)
    except _NotRational:
        return None
    return n, d, syms


class _NotRational(Exception):
    pass


def _cancel(n, d):
    g = n.gcd(d)
    if not g.is_one() and not g.is_zero():
        n, d = n / g, d / g
    lc = d.leading_coefficient()
    return n / lc, d / lc


def _factored(n, d, syms) -> sympy.Expr:
    n, d = _cancel(n, d)
    return edge.factored_expr(n, syms) / edge.factored_expr(d, syms)


def _cancel_pieces(num, pieces):
    """``num / prod(pieces)`` cancelled piece by piece, without forming the product.

    Returns (num', pieces') with ``gcd(num', p) = 1`` for every piece: if a factor f divided
    both num' and a piece p' = p/g, then f*g would divide both the numerator before that
    piece and p, contradicting g = gcd. Each piece is made monic (its leading coefficient
    moved into the numerator)."""
    out = []
    for p in pieces:
        g = num.gcd(p)
        if not g.is_one() and not g.is_zero():
            num, p = num / g, p / g
        lc = p.leading_coefficient()
        if lc != 1:
            num, p = num / lc, p / lc
        out.append(p)
    return num, out


class _Factors:
    """Factored sympy forms of the polynomial pieces of one quantity, each factored once."""

    def __init__(self, syms):
        self.syms = syms
        self.memo = []          # [(poly, expr)]: the few pieces a quantity's derivatives share

    def expr(self, p):
        for q, e in self.memo:
            if q is p or q == p:
                return e
        e = edge.factored_expr(p, self.syms)
        self.memo.append((p, e))
        return e

    def ratio(self, num, pieces) -> sympy.Expr:
        out = edge.factored_expr(num, self.syms)
        for p in pieces:
            if not p.is_one():
                out = out / self.expr(p)
        return out


_RATIONAL_MEMO: dict = {}


def _rational_cached(e):
    """:func:`rational` of a quantity's expression, kept while it is analysed (one entry)."""
    hit = _RATIONAL_MEMO.get("e")
    if hit is not None and hit[0] is e:
        return hit[1], hit[2]
    r = rational(e)
    _RATIONAL_MEMO.clear()             # also the derivatives of the previous expression
    _RATIONAL_MEMO["e"] = (e, r, _Factors(r[2]) if r is not None else None)
    return r, _RATIONAL_MEMO["e"][2]


RAW_OPS = 150           # above this size, no sympy derivative is taken for comparison


@functools.lru_cache(maxsize=16)
def _ops(e) -> int:
    """``sympy.count_ops`` of a closed form, counted once (it is asked once per part)."""
    return sympy.count_ops(e)
TOO_LONG = "too long"    # _rational_derivative: the expanded derivative is longer than the budget


def _rational_derivative(e, x, budget: int | None = None):
    """(dQ/dx, x/Q·dQ/dx) tidied, for a rational ``e``; None otherwise.

    ``dQ/dx = (n'd - nd')/d^2`` and ``S = x (n'd - nd')/(n d)``: the denominators are never
    multiplied out -- cancelled piece by piece (``d, d`` and ``n, d``) and written as
    products of the factored pieces. ``budget``: a form whose printed numerator would
    certainly exceed this many characters is not built (None in its place)."""
    r, fac = _rational_cached(e)
    if r is None or x not in r[2]:
        return None
    done = _RATIONAL_MEMO.setdefault("derivatives", {})
    if x not in done:                   # _analyse asks again after derivative() did
        done[x] = _rational_derivative_of(r, fac, x, budget)
    return done[x]


def _rational_derivative_of(r, fac, x, budget):
    n, d, syms = r
    i = syms.index(x)
    dn, dd = n.derivative(i), d.derivative(i)
    num = dn * d - n * dd
    if budget is not None and _too_long(num, budget):
        return TOO_LONG
    a, pieces = _cancel_pieces(num, [d, d])
    dq = fac.ratio(a, pieces)
    if n.is_zero():
        return dq, None
    xg = n.context().gens()[i]
    a, pieces = _cancel_pieces(xg * num, [n, d])
    return dq, fac.ratio(a, pieces)


def agree(a, b, points: int = 3, seed: int = 5) -> bool:
    """Whether two expressions agree at ``points`` random rational points, evaluated exactly
    (a wrong identity of rational functions passes only with negligible probability,
    Schwartz-Zippel lemma). Undefined points are redrawn; with none usable, no agreement
    (:func:`derive.derivation.steps.compare`)."""
    return _agree_how(a, b, points, seed)[0]


def _agree_how(a, b, points: int = 3, seed: int = 5):
    """(agree, points used) by exact evaluation at random rational points."""
    from derive.derivation.steps import ATTEMPTS, NotRational, Program, random_point
    import random
    try:
        prog = Program([a, b])
    except NotRational:
        _m, ok, n = compare(a, b, None, points, seed)
        return ok, n
    syms = prog.symbols()
    rnd = random.Random(seed)
    used = 0
    for _ in range(ATTEMPTS * points):
        try:
            va, vb = prog.run(random_point(rnd, syms))
        except ZeroDivisionError:
            continue
        if va != vb:
            return False, None
        used += 1
        if used == points or not syms:
            break
    return used > 0, (used if syms else None)


def _dual_checked(name, q_expr, s, points: int = 3, seed: int = 5) -> list:
    """The equations dQ/dx = ... and S_x = ... checked by forward-mode differentiation of Q
    in exact rationals (:meth:`derive.derivation.steps.Program.dual`) at random rational
    points: an independent computation of the derivative, not the quotient rule that
    produced the formulas."""
    from derive.derivation.steps import ATTEMPTS, NotRational, Program, fmpq_of, random_point
    import random
    x = s.symbol
    e1 = Equation(sympy.Symbol(f"d{name}/d{x}"), s.deriv.final)
    e2 = Equation(sympy.Symbol(f"S_{x}"), s.normalized)
    try:
        q_prog, f_prog = Program([q_expr]), Program([s.deriv.final, s.normalized])
    except NotRational:
        return [e1, e2]                 # neither is verified
    syms = q_prog.symbols() | f_prog.symbols() | {x}
    rnd = random.Random(seed)
    used, ok = 0, True
    for _ in range(ATTEMPTS * points):
        pt = random_point(rnd, syms)
        try:
            (q,) = q_prog.dual(pt, x)
            d, sn = f_prog.run(pt)
            if q.a == 0:
                continue
            want_s = fmpq_of(pt[x]) * q.b / q.a
        except ZeroDivisionError:
            continue
        if d != q.b or sn != want_s:
            ok = False
            break
        used += 1
        if used == points:
            break
    ok = ok and used > 0
    for e in (e1, e2):
        e.mark("points", ok, used if ok else None)
    return [e1, e2]


def _fresh(base: str, taken: set) -> sympy.Symbol:
    name, k = base, 1
    while name in taken:
        k += 1
        name = f"{base}_{k}"
    taken.add(name)
    return sympy.Symbol(name)


def derivative(form: Form, x: sympy.Symbol, taken: Optional[set] = None):
    """(dQ/dx as a Form, the unsimplified derivative of a single expression or None).

    Single expressions are differentiated and tidied; sequences in forward mode: every
    intermediate that depends on x gets a derivative entry after the original entries.
    """
    if not form.defs:
        if _ops(form.final) > RAW_OPS:
            fast = _rational_derivative(form.final, x)
            if fast is not None and fast is not TOO_LONG:
                # large: the flint quotient rule alone (sympy's own derivative of a large
                # expression costs more than the rest of the analysis); its step is checked
                # by forward-mode differentiation in exact rationals instead
                return Form([], fast[0]), None
        raw = sympy.diff(form.final, x)
        raw_len = functools.lru_cache(maxsize=1)(lambda: len(str(raw)))
        fast = _rational_derivative(form.final, x, budget=raw_len)
        if fast is TOO_LONG:        # raw is the same rational function, shorter than expanded
            return Form([], raw), raw
        if fast is None:
            best = raw
        else:
            # raw is printed only where its lower bound (names and separators, one walk of
            # the tree) does not already show it no shorter than the flint form
            fast_len = len(str(fast[0]))
            shorter = cost.printed_length_at_least(raw) < fast_len and raw_len() < fast_len
            best = raw if shorter else fast[0]
        if fast is None and not raw.is_Atom:
            best = tidy(raw)
        return Form([], best), raw
    taken = set(taken or ()) | {str(q) for q, _ in form.defs} | {str(s) for s in form.base_symbols()}
    d: dict = {}
    new = []

    def chain(e):
        out = sympy.diff(e, x)
        for y in e.free_symbols:
            if d.get(y, 0) != 0:
                out += sympy.diff(e, y) * d[y]
        return out

    for q, e in form.defs:
        de = chain(e)
        if de == 0 or de.is_Atom:
            d[q] = de
            continue
        de = tidy(de) if sympy.count_ops(de) < 60 else de
        name = _fresh(f"d{q}_d{x}", taken)
        new.append((name, de))
        d[q] = name
    final = chain(form.final)
    return Form(list(form.defs) + new, tidy(final) if sympy.count_ops(final) < 60 else final), None


@dataclass
class Sens:
    symbol: sympy.Symbol
    deriv: Form
    normalized: sympy.Expr          # over the base symbols, or over the sequence names
    d_value: object = None          # exact dQ/dx at nominal (sympy number) or None
    s_value: object = None          # exact S at nominal, or None (Q = 0 or no nominal)
    raw: Optional[sympy.Expr] = None


@dataclass
class Analysed:
    """One quantity with its sensitivities (shared with :mod:`derive.analyses.tolerance`)."""
    q: object                       # analysis.QuantityResult
    form: Form
    nominal_value: object           # exact, or None
    sens: list = field(default_factory=list)   # Sens, ranked by |S|


def full_context(ctx: Context) -> Context:
    """A context with every symbol symbolic (so no part is substituted away)."""
    if not ctx.numeric_subs():
        return ctx
    if "sens_ctx" not in ctx.cache:
        opts = dataclasses.replace(ctx.options, symbolic=list(ctx.circuit.symbols))
        ctx.cache["sens_ctx"] = Context(ctx.circuit, opts)
    return ctx.cache["sens_ctx"]


def _check_scalar(req):
    if not quantities.accepts(req.analysis or "sensitivity", req.quantity):
        raise SheetError(f"sensitivity/tolerance of '{req.quantity}' is not offered: ask for one "
                         "scalar quantity (vth, rth, isc, rn, resistance, impedance, voltage, "
                         "current, gain, power)", req.loc.line, req.loc.col)


def analysed(ctx: Context, req) -> list:
    """Every member of the request's quantity with its ranked sensitivities (cached)."""
    _check_scalar(req)
    response = getattr(req, "response", None)
    key = ("sensitivity", req.quantity, req.port, req.element, req.source, response)
    if key in ctx.cache:
        return ctx.cache[key]
    fctx = full_context(ctx)
    nominal = ctx.nominal
    out = []
    for q in forms.port_quantities(fctx, req):
        if response is not None:     # f0, w0 or Q of the result's second-order denominator
            q = frequency.response_quantity(q, response,
                                            req.name_locs.get("response", req.loc))
        form = form_of(q)
        if LAPLACE_S in form.base_symbols():
            raise SheetError(f"{q.name} depends on the Laplace variable s: sensitivities and "
                             "tolerances of frequency-dependent results are not available yet "
                             "(a later feature); ask for a resistive result or make the "
                             "reactive parts numeric", req.loc.line, req.loc.col)
        form, pre = _route(ctx, q, form)
        out.append(_analyse(ctx, q, form, nominal, pre))
    ctx.cache[key] = out
    return out


def _parts(ctx) -> list:
    return [sympy.Symbol(k) for k, v in ctx.circuit.symbols.items() if v.nominal is not None]


def _route(ctx, q, form: Form):
    """(form, derivatives already taken): the closed form or the quantity's sequence,
    whichever gives the shorter derivatives, where both exist.

    A short closed form is differentiated as one expression (sympy's derivative and the
    flint quotient rule, factored: the shorter of the two is shown), a sequence in forward
    mode. Where the quantity has a sequence too, its forward-mode derivatives (cheap: one
    short entry per intermediate) are taken first and their printed length is compared
    with a lower bound of that of the factored quotient-rule derivatives of the closed form
    (flint, no sympy derivative, not printed: ``forms.cost.printed_length_at_least``); the
    sequence is used where its derivatives are surely shorter in all.
    Then sympy's derivative of a nested closed form (the costly step: it grows with every
    level of nesting) is taken only where the closed form is kept."""
    if form.defs or not q.sequence:
        return form, None
    r, fac = _rational_cached(form.final)
    if r is None:
        return form, None
    seq = Form(list(q.sequence), q.in_sequence)
    base = seq.base_symbols()
    if base != form.base_symbols():
        return form, None
    taken = set(ctx.circuit.symbols)
    done = _RATIONAL_MEMO.setdefault("derivatives", {})
    pre, seq_len, closed_len = {}, 0, 0
    nseq = len(seq.defs)
    for x in _parts(ctx):
        if x not in base:
            continue
        fast = done.get(x) if x in done else _rational_derivative_of(r, fac, x, lambda: 0)
        if fast is None or fast is TOO_LONG:
            return form, None       # no factored form to compare with: as before
        done[x] = fast
        closed_len += cost.printed_length_at_least(fast[0])     # no printing
        d, raw = derivative(seq, x, taken)
        taken |= {str(n) for n, _ in d.defs}
        pre[x] = (d, raw)
        seq_len += sum(len(str(n)) + len(str(e)) for n, e in d.defs[nseq:]) + len(str(d.final))
    return (seq, pre) if seq_len < closed_len else (form, None)


def _analyse(ctx, q, form: Form, nominal: dict, pre: Optional[dict] = None) -> Analysed:
    q0 = form.value(nominal)
    a = Analysed(q, form, q0)
    syms = _parts(ctx)
    base = form.base_symbols()
    taken = set(ctx.circuit.symbols)
    for x in syms:
        if x not in base:
            a.sens.append(Sens(x, Form([], sympy.Integer(0)), sympy.Integer(0),
                               sympy.Integer(0), sympy.Integer(0)))
            continue
        d, raw = pre[x] if pre else derivative(form, x, taken)
        taken |= {str(n) for n, _ in d.defs}
        if not form.defs:
            fast = _rational_derivative(form.final, x)
            if fast is TOO_LONG:
                norm = x * d.final / form.final
            else:
                norm = fast[1] if fast is not None and fast[1] is not None \
                    else tidy(x * d.final / form.final)
        else:
            norm = x * d.final / form.final
        dv = d.value(nominal)
        sv = None
        if dv is not None and q0 is not None and q0 != 0:
            sv = nominal[x] * dv / q0
        a.sens.append(Sens(x, d, norm, dv, sv, raw))
    a.sens.sort(key=lambda s: -abs(float(s.s_value)) if s.s_value is not None
                else (-abs(float(s.d_value)) if s.d_value is not None else 0.0))
    return a


def _f(v):
    if v is None:
        return None
    c = complex(v)
    return c.real if c.imag == 0 else None


def sens_json(a: Analysed) -> dict:
    out = {}
    nseq = len(a.form.defs)
    for rank, s in enumerate(a.sens, 1):
        e: dict = {}
        if s.deriv.defs:
            e["sequence"] = [[str(n), x] for n, x in s.deriv.defs[nseq:]]
            e["in_sequence"] = s.deriv.final
        else:
            e["expr"] = s.deriv.final
        e["normalized"] = s.normalized
        e["value"] = _f(s.s_value)
        e["derivative_value"] = _f(s.d_value)
        e["rank"] = rank
        out[str(s.symbol)] = e
    return out


def _steps(a: Analysed, digits: int = DEFAULT_DIGITS) -> list:
    name = a.q.name
    Q = sympy.Symbol(name)
    steps = []
    if a.form.defs:
        txt = (f"{name} is available as a sequence of {len(a.form.defs)} named intermediates; "
               "each derivative is carried through the sequence by the chain rule (forward "
               "mode), so it is a sequence too.")
    else:
        txt = f"Differentiate {name} = {to_text(a.form.final)} with respect to each part."
    eqs = []
    for s in a.sens:
        if s.raw is None:
            if not a.form.defs and s.deriv.final != 0 and not s.deriv.defs:
                eqs += _dual_checked(name, a.form.final, s)
            continue
        dsym = sympy.Symbol(f"d{name}/d{s.symbol}")
        e1 = Equation(dsym, s.deriv.final, check=s.raw)
        e2 = Equation(sympy.Symbol(f"S_{s.symbol}"), s.normalized,
                      check=s.symbol * s.raw / a.form.final)
        for e in (e1, e2):      # checked against sympy's own derivative of Q
            try:
                ok, n = _agree_how(e.rhs, e.check)
            except Exception:
                ok, n = False, None
            e.mark("points" if n is not None else "exact", ok, n)
        eqs += [e1, e2]
    st = Step(txt, eqs, [str(s.symbol) for s in a.sens], kind="sensitivity")
    st.verify()
    steps.append(st)
    rows = [["symbol", f"d{name}/dx at nominal", f"S = (x/{name}) d{name}/dx", "rank"]]
    for k, s in enumerate(a.sens, 1):
        rows.append([str(s.symbol), g(s.d_value, digits), g(s.s_value, digits), str(k)])
    top = a.sens[0] if a.sens else None
    summ = (f"At nominal values {name} = {g(a.nominal_value, digits, a.q.unit)}; the parts "
            f"ranked by |S| (a 1 % rise of x changes {name} by about S %)."
            + (f" Largest: {top.symbol} (S = {g(top.s_value, digits)})." if top is not None
               else ""))
    if a.nominal_value == 0:
        summ += f" {name} is 0 at nominal, so normalized sensitivities are undefined there."
    st2 = Step(summ, [], [], kind="value", table=rows)
    st2.verify()
    steps.append(st2)
    return steps


def g(v, digits: int = DEFAULT_DIGITS, unit=None) -> str:
    """A computed real value at nominal for prose and tables (``n/a`` where it is none)."""
    return format_value(_f(v), unit, digits)


def _slug(text: str) -> str:
    return "".join(c if c.isalnum() else "-" for c in text).strip("-").lower()


def sensitivity(ctx: Context, req) -> RequestResult:
    res = RequestResult(req)
    items = analysed(ctx, req)
    by = {a.q.name: sens_json(a) for a in items}
    res.extra["sensitivity_of"] = items[0].q.name
    res.extra["sensitivities"] = by[items[0].q.name]
    res.extra["sensitivities_by_quantity"] = by
    seqs = {a.q.name: {"sequence": [[str(n), x] for n, x in a.form.defs],
                       "in_sequence": a.form.final} for a in items if a.form.defs}
    if seqs:        # the names that sequence-form derivatives refer to
        res.extra["quantity_sequences"] = seqs
    figs = []
    for a in items:
        res.steps.extend(_steps(a, ctx.options.digits))
        figs.append(Figure(
            f"{_slug(req.text)}-{a.q.name}",
            f"Normalized sensitivities of {a.q.name} ({req.text}), ranked by magnitude.",
            "sensitivity", {"symbols": [str(s.symbol) for s in a.sens],
                            "values": [_f(s.s_value) for s in a.sens]}))
    res.extra["figures"] = figs
    return res

