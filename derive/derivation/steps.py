"""The derivation model: ordered, verified steps between the solver and the exporters.

A :class:`Step` says in one sentence what was done and why, the equations it establishes
(each an :class:`Equation`, ``lhs = rhs`` as sympy expressions), and the elements involved.
Every equation carries how it was verified (``Equation.verified_by``):

``"exact"``
    the difference ``rhs - check`` cancelled to zero exactly (sympy, small expressions), or
    both sides are constants with the same exact value;
``"points"``
    ``rhs`` and ``check`` evaluated in exact rational arithmetic (python-flint ``fmpq``) at
    ``Equation.points`` random rational points and equal at every one (a wrong identity of
    rational functions passes only with negligible probability, Schwartz–Zippel lemma);
    points where a side is undefined are replaced by new ones (bounded), and with no usable
    point the equation is *not* verified;
``"system"``
    the equation is a row of the stamped nodal system, or follows directly from it, and was
    checked against it (exactly, or by exact solves at ``points`` random rational points);
``"definition"``
    the equation only gives a name to an expression (``lhs`` a plain symbol) and asserts
    nothing that could be checked; a derived result is never a definition;
``None``
    not verified (no independent check, a failed check, or an error while checking).

``Step.verified`` is true only when every equation is verified (definitions included); a
step without equations is vacuously verified and has an empty ``verified_by`` list in JSON.
Steps hold sympy equations only; the exporters render them (JSON:
:func:`derive.export.json_record.step_json`). In JSON every step carries ``"verified_by"``:
one entry per equation, in order, each an object
``{"method": "exact" | "points" | "system" | "definition" | null}`` with ``"points": n``
where random points were used.

>>> import sympy
>>> R1, R2 = sympy.symbols('R1 R2')
>>> st = Step("Combine R1 and R2 in parallel.",
...           [Equation(sympy.Symbol('Rp'), R1*R2/(R1 + R2), R1/(1 + R1/R2))], ["R1", "R2"])
>>> st.verify()
True
>>> st.equations[0].verified_by
'exact'
>>> Step("Nothing checks this.", [Equation(sympy.Symbol('Rp'), R1 + R2)]).verify()
False
"""
from __future__ import annotations

import random
from dataclasses import dataclass, field
from fractions import Fraction
from typing import Optional

import flint
import sympy

from derive.clock import timed

METHODS = ("exact", "points", "system", "definition")
EXACT_OPS = 400         # difference cancelled exactly up to this many operations
POINTS = 3              # random rational points of an evaluation check
ATTEMPTS = 10           # draws per wanted point before a check gives up


@dataclass
class Equation:
    """``lhs = rhs``; ``check`` (optional) is an independent expression that must equal
    ``rhs`` (e.g. the same quantity from the full nodal solution). ``defs`` are named
    intermediates (Symbol -> expr) that ``rhs``/``check`` may use. ``definition`` marks an
    equation that only names an expression. ``verified``/``verified_by``/``points`` say
    whether and how it was verified (see the module docstring)."""
    lhs: sympy.Expr
    rhs: sympy.Expr
    check: Optional[sympy.Expr] = None
    defs: dict = field(default_factory=dict)
    verified: Optional[bool] = None
    verified_by: Optional[str] = None
    points: Optional[int] = None
    definition: bool = False

    def mark(self, method: Optional[str], ok: bool, points: Optional[int] = None) -> bool:
        """Record the outcome of a check made elsewhere: ``method`` is kept only if ``ok``."""
        ok = bool(ok) and method in METHODS
        self.verified = ok
        self.verified_by = method if ok else None
        self.points = points if ok else None
        return ok

    def run_check(self) -> bool:
        """Verify (once): against ``check``, or as a definition; otherwise not verified."""
        if self.verified is not None:
            if self.verified and self.verified_by not in METHODS:
                self.mark(None, False)          # a claim without a method is no claim
            return bool(self.verified)
        if self.check is not None:
            try:
                method, ok, n = compare(self.rhs, self.check, self.defs)
            except Exception:                   # never verified through an error
                return self.mark(None, False)
            return self.mark(method, ok, n)
        if self.definition and isinstance(self.lhs, sympy.Symbol):
            return self.mark("definition", True)
        return self.mark(None, False)


@dataclass
class Figure:
    """A plot that an exporter may draw: its ``chart`` and the plain numbers it needs
    (``data``); :func:`derive.export.plots.draw` draws it. Charts: ``"sensitivity"``
    (``symbols``, ``values``), ``"histogram"`` (``counts``, ``edges``, ``quantity``,
    ``unit``, ``marks``), ``"bode"`` (``num``, ``den`` ascending numeric coefficients,
    ``unit``), ``"noise"`` (``f`` in Hz, ``total`` and ``parts`` name -> densities in
    V/√Hz, ``band``)."""
    name: str
    caption: str
    chart: str
    data: dict = field(default_factory=dict)


@dataclass
class Step:
    text: str
    equations: list = field(default_factory=list)
    elements: list = field(default_factory=list)
    verified: Optional[bool] = None
    kind: str = "step"          # free label for templates: 'reduction', 'nodal', 'value', ...
    table: Optional[list] = None   # optional rows (list of lists of str) to show as a table

    def verify(self) -> bool:
        ok = True
        for eq in self.equations:
            ok = eq.run_check() and ok
        self.verified = ok
        return ok


# ------------------------------------------------------------------ exact evaluation
class NotRational(Exception):
    """An expression that is not a rational function of its symbols (roots, floats, ...)."""


class Program:
    """Sympy expressions compiled once into straight-line exact rational arithmetic.

    ``roots`` are the expressions to evaluate; a symbol that is a key of ``defs`` stands for
    its expression (compiled in dependency order, so the order of ``defs`` does not matter).
    :meth:`run` evaluates at a point (Symbol -> number) in python-flint ``fmpq``; a division
    by zero raises :class:`ZeroDivisionError`.

    >>> a, b, q = sympy.symbols('a b q')
    >>> p = Program([q/(a - b)], {q: a**2 - b**2})
    >>> p.run({a: sympy.Rational(3), b: sympy.Rational(1, 2)})[0]
    7/2
    """

    def __init__(self, roots, defs: dict | None = None):
        self.defs = dict(defs or {})
        self.ops: list = []
        self.inputs: dict = {}
        self._reg: dict = {}
        self._open: set = set()
        self.out = [self._compile(e) for e in roots]

    def _emit(self, op) -> int:
        self.ops.append(op)
        return len(self.ops) - 1

    def _compile(self, e) -> int:
        if e in self._reg:
            return self._reg[e]
        stack = [(e, False)]
        while stack:
            x, done = stack.pop()
            if x in self._reg:
                continue
            if x.is_Symbol and x in self.defs:
                target = self.defs[x]
                if done:
                    self._reg[x] = self._reg[target]
                    self._open.discard(x)
                    continue
                if x in self._open:
                    raise NotRational(f"named intermediate {x} depends on itself")
                self._open.add(x)
                stack.append((x, True))
                stack.append((target, False))
                continue
            if x.is_Symbol:
                self._reg[x] = self._emit(("in", x))
                self.inputs[x] = self._reg[x]
                continue
            if x.is_Rational:
                self._reg[x] = self._emit(("const", flint.fmpq(int(x.p), int(x.q))))
                continue
            if x.is_Add or x.is_Mul:
                kids = x.args
            elif x.is_Pow and x.exp.is_Integer:
                kids = (x.base,)
            else:
                raise NotRational(f"not a rational function: {type(x).__name__}")
            if not done:
                stack.append((x, True))
                stack.extend((k, False) for k in kids if k not in self._reg)
                continue
            if x.is_Add:
                self._reg[x] = self._emit(("add", [self._reg[k] for k in kids]))
            elif x.is_Mul:
                self._reg[x] = self._emit(("mul", [self._reg[k] for k in kids]))
            else:
                self._reg[x] = self._emit(("pow", self._reg[x.base], int(x.exp)))
        return self._reg[e]

    def symbols(self) -> set:
        return set(self.inputs)

    def dual(self, point: dict, x) -> list:
        """Every root at ``point`` with its exact derivative in ``x``, as :class:`Dual`
        numbers (forward-mode differentiation through the compiled expression, in exact
        rationals: independent of any symbolic derivative).

        >>> a, b = sympy.symbols('a b')
        >>> d = Program([a**2/b]).dual({a: sympy.Integer(3), b: sympy.Integer(2)}, a)[0]
        >>> d.a, d.b
        (9/2, 3)
        """
        return self.run(point, lambda sym, v: Dual(v, flint.fmpq(1 if sym == x else 0)))

    def run(self, point: dict, seed=None) -> list:
        vals = [None] * len(self.ops)
        for i, op in enumerate(self.ops):
            k = op[0]
            if k == "in":
                vals[i] = fmpq_of(point[op[1]])
                if seed is not None:
                    vals[i] = seed(op[1], vals[i])
            elif k == "const":
                vals[i] = op[1]
            elif k == "add":
                s = vals[op[1][0]]
                for j in op[1][1:]:
                    s = s + vals[j]
                vals[i] = s
            elif k == "mul":
                s = vals[op[1][0]]
                for j in op[1][1:]:
                    s = s * vals[j]
                vals[i] = s
            else:
                b, n = vals[op[1]], op[2]
                if n < 0:
                    if b == 0:
                        raise ZeroDivisionError("power of zero with a negative exponent")
                    vals[i] = (1 / b) ** (-n)
                else:
                    vals[i] = b ** n
        return [vals[r] for r in self.out]


class Dual:
    """``a + b·ε`` with ``ε² = 0``, over exact rationals: the value and the derivative of an
    expression carried together (forward-mode automatic differentiation)."""
    __slots__ = ("a", "b")

    def __init__(self, a, b):
        self.a, self.b = a, b

    @staticmethod
    def of(v) -> "Dual":
        return v if isinstance(v, Dual) else Dual(v, flint.fmpq(0))

    def __add__(self, o):
        o = Dual.of(o)
        return Dual(self.a + o.a, self.b + o.b)

    __radd__ = __add__

    def __mul__(self, o):
        o = Dual.of(o)
        return Dual(self.a * o.a, self.a * o.b + self.b * o.a)

    __rmul__ = __mul__

    def __rtruediv__(self, o):
        o = Dual.of(o)
        if self.a == 0:
            raise ZeroDivisionError("division by a dual number with zero value")
        return Dual(o.a / self.a, (o.b * self.a - o.a * self.b) / (self.a * self.a))

    def __truediv__(self, o):
        return Dual.of(o).__rtruediv__(self)

    def __pow__(self, n: int):
        if n == 0:
            return Dual(flint.fmpq(1), flint.fmpq(0))
        return Dual(self.a ** n, n * self.a ** (n - 1) * self.b)

    def __eq__(self, o):
        o = Dual.of(o)
        return self.a == o.a and self.b == o.b

    __hash__ = None


def fmpq_of(v) -> flint.fmpq:
    """An exact rational (sympy Rational, int, Fraction or fmpq) as ``fmpq``; anything else
    (a float, a root) raises :class:`NotRational`."""
    if isinstance(v, flint.fmpq):
        return v
    if isinstance(v, int):
        return flint.fmpq(v)
    if isinstance(v, Fraction):
        return flint.fmpq(v.numerator, v.denominator)
    if isinstance(v, sympy.Basic) and v.is_Rational:
        return flint.fmpq(int(v.p), int(v.q))
    raise NotRational(f"not an exact rational: {v!r}")


def to_rational(v) -> sympy.Rational:
    """``fmpq`` → sympy Rational."""
    return sympy.Rational(int(v.p), int(v.q))


def to_float(v) -> float:
    """An exact rational as the nearest float (the only place a value becomes a float)."""
    v = fmpq_of(v)
    return float(Fraction(int(v.p), int(v.q)))


def exact_value(expr, point: dict, defs: dict | None = None):
    """``expr`` (with named intermediates ``defs``) at ``point``, exactly, as a sympy
    Rational; None where a symbol has no value, the expression is not rational or it is
    undefined there."""
    try:
        prog = Program([expr], defs)
        if not prog.symbols() <= set(point):
            return None
        return to_rational(prog.run(point)[0])
    except (NotRational, ZeroDivisionError):
        return None


def square_roots_away(exprs, limit: int = 8) -> dict:
    """{x: expression} that makes every square root in ``exprs`` rational: for a root
    ``sqrt(E)`` (or ``E**(k/2)``) with ``E`` affine in one of its symbols ``x``,
    ``E = c1*x + c0``, the substitution ``x = (t**2 - c0)/c1`` with ``t`` a new positive
    symbol turns ``sqrt(E)`` into ``t``. Substituted (one ``xreplace``), the expressions
    become rational functions of the other symbols and ``t``, so exact random-point checks
    apply to them: a random ``t`` stands for a random point where ``E`` is a square. Roots
    that cannot be so removed are left (the check then fails honestly)."""
    out: dict = {}
    exprs = list(exprs)
    for k in range(limit):
        pick = None
        for e in exprs:
            for x in sympy.preorder_traversal(e):
                if x.is_Pow and x.exp.is_Rational and x.exp.q == 2 and x.base.free_symbols:
                    for v in sorted(x.base.free_symbols, key=str):
                        c1 = sympy.diff(x.base, v)
                        if c1 != 0 and not c1.has(v) and v not in out:
                            pick = (v, c1, x.base.xreplace({v: 0}))
                            break
                if pick:
                    break
            if pick:
                break
        if pick is None:
            break
        v, c1, c0 = pick
        t = sympy.Symbol(f"_sqrt{k}_{v}", positive=True)
        sub = {v: (t ** 2 - c0) / c1}
        exprs = [e.xreplace(sub) for e in exprs]
        out = {key: val.xreplace(sub) for key, val in out.items()}
        out[v] = sub[v]
    return out


def random_point(rnd: random.Random, syms) -> dict:
    """Positive random rationals for ``syms`` (sorted by name, so the draw is repeatable)."""
    return {x: sympy.Rational(rnd.randint(1, 10**6), rnd.randint(1, 10**3))
            for x in sorted(syms, key=str)}


def _name(x) -> str:
    """``str(x)`` of a symbol without the printer (a Dummy prints with a leading ``_``)."""
    if isinstance(x, sympy.Dummy):
        return "_" + x.name
    if isinstance(x, sympy.Symbol):
        return x.name
    return str(x)


_DRAWS: dict = {}           # (seed, names, inverse names) -> points drawn so far
_DRAWS_KEPT = 256


def draws(seed: int, syms, inverse=()):
    """The repeatable sequence of random points of ``random.Random(seed)`` over ``syms``:
    :func:`random_point` at every draw, except that symbols in ``inverse`` get ``1/n`` (n
    in 1..10^6, drawn from the seed, the draw's index and the symbol's name alone, so two
    checks over different symbol sets share these values: a polynomial of the solver, det A
    say, is then evaluated once per point for all of them). The points are drawn once per (seed, symbols) and shared by every check
    that asks for the same sequence (each check at the same points: one draw, one
    conversion; the values are the same as drawing afresh)."""
    order = sorted(syms, key=_name)
    inv = tuple(sorted((_name(x) for x in inverse if x in syms)))
    key = (seed, tuple(_name(x) for x in order), inv)
    got = _DRAWS.get(key)
    if got is None:
        if len(_DRAWS) >= _DRAWS_KEPT:
            _DRAWS.clear()
        got = _DRAWS[key] = ([], random.Random(seed))
    pts, rnd = got
    invset = set(inverse)
    i = 0
    while True:
        if i == len(pts):
            pts.append({x: (sympy.Rational(1, random.Random(f"{seed}/{i}/{_name(x)}")
                                           .randint(1, 10**6)) if x in invset else
                            sympy.Rational(rnd.randint(1, 10**6), rnd.randint(1, 10**3)))
                        for x in order})
        yield pts[i]
        i += 1


def _free(a, b, defs) -> set:
    syms = set(a.free_symbols) | set(b.free_symbols)
    for v in defs.values():
        syms |= v.free_symbols
    return syms - set(defs)


def _is_rational_function(e) -> bool:
    for x in sympy.preorder_traversal(e):
        if x.is_Symbol or x.is_Rational:
            continue
        if x.is_Add or x.is_Mul or (x.is_Pow and x.exp.is_Integer):
            continue
        return False
    return True


def _sympy_point(exprs, defs, pt):
    """Exact (algebraic) values by sympy substitution, for expressions with roots."""
    env = dict(pt)
    pending = dict(defs)
    while pending:
        ready = [k for k, v in pending.items() if not (v.free_symbols & set(pending))]
        if not ready:
            raise NotRational("named intermediates depend on each other in a cycle")
        for k in ready:
            env[k] = pending.pop(k).xreplace(env)
    out = [e.xreplace(env) for e in exprs]
    for v in out:
        if v.has(sympy.zoo, sympy.nan, sympy.oo, -sympy.oo):
            raise ZeroDivisionError("undefined at this point")
        if v.has(sympy.Float) or v.free_symbols:
            raise NotRational("not an exact value")
    return out


def _algebraic_zero(d) -> bool:
    """Whether an exact algebraic number is zero (False where sympy cannot tell)."""
    if d == 0:
        return True
    for f in (lambda x: sympy.expand(sympy.radsimp(x)), sympy.simplify):
        try:
            if f(d) == 0:
                return True
        except Exception:
            return False
    return False


def count_ops_capped(e, limit: int) -> int:
    """``min(sympy.count_ops(e), limit)``, without walking more of ``e`` than needed.

    The same counting rules as :func:`sympy.count_ops` (sympy 1.x: NEG, DIV, SUB, ADD, MUL,
    POW; the running count never decreases, so the walk stops once ``limit`` is reached);
    anything but numbers, symbols, sums, products and powers is counted by
    :func:`sympy.count_ops` itself.

    >>> x, y = sympy.symbols('x y')
    >>> e = (x - y) / (x + 2*y) ** 2 - 1 / x
    >>> count_ops_capped(e, 400) == sympy.count_ops(e), count_ops_capped(e, 3)
    (True, 3)
    """
    if not isinstance(e, sympy.Expr) or e.is_Relational:
        return min(int(sympy.count_ops(e)), limit)
    from sympy.core.function import _coeff_isneg
    one, m1 = sympy.S.One, sympy.S.NegativeOne
    total = 0
    args = [e]
    while args:
        if total >= limit:
            return limit
        a = args.pop()
        if a.is_Rational:
            if a is not one:
                total += int(a.p < 0) + int(a.q != 1)
                continue
        elif a.is_Mul:
            if _coeff_isneg(a):
                total += 1
                a = a.as_two_terms()[1] if a.args[0] is m1 else -a
            n, d = sympy.fraction(a)
            if n.is_Integer:
                total += 1 + bool(n < 0)
                args.append(d)
                continue
            elif d is not one:
                if not d.is_Integer:
                    args.append(d)
                total += 1
                args.append(n)
                continue
        elif a.is_Add:
            aargs = a.args
            total += len(aargs) - 1
            if total >= limit:
                return limit
            negs = 0
            for ai in aargs:
                if _coeff_isneg(ai):
                    negs += 1
                    args.append(-ai)
                else:
                    args.append(ai)
            if negs == len(aargs):
                total += 1
            continue
        if a.is_Pow and a.exp is m1:
            total += 1
            args.append(a.base)
            continue
        if a is sympy.E or (a.is_Pow and a.base is sympy.E):
            return min(int(sympy.count_ops(e)), limit)
        if a.is_Mul:
            total += len(a.args) - 1
        elif a.is_Pow:
            total += 1
        elif a.args and not a.is_Symbol:
            return min(int(sympy.count_ops(e)), limit)   # functions etc.: sympy's own rules
        if not a.is_Symbol:
            args.extend(a.args)
    return min(total, limit)


class TooLarge(Exception):
    """Exact cancellation would need polynomials beyond :data:`CANCEL_TERMS` terms."""


CANCEL_TERMS = 20000    # terms of a polynomial in the exact cancellation, at most


def _reduced(n, d):
    g = n.gcd(d)
    if not g.is_one() and not g.is_zero():
        n, d = n / g, d / g
    if len(n) > CANCEL_TERMS or len(d) > CANCEL_TERMS:
        raise TooLarge
    return n, d


def _sized(n, d):
    if n.is_zero() and not d.is_one():
        d = d.context().constant(1)         # 0/d in lowest terms
    if len(n) > CANCEL_TERMS or len(d) > CANCEL_TERMS:
        raise TooLarge
    return n, d


def _reduced_by(n, d, g):
    """``n/d`` in lowest terms where every common factor of ``n`` and ``d`` divides ``g``."""
    h = n.gcd(g)
    if not h.is_one() and not h.is_zero():
        n, d = n / h, d / h
    return n, d


def _rational_function(prog: "Program", k: int, ring=None):
    """Root ``k`` of ``prog`` as an exact rational function ``(num, den)`` of python-flint
    ``fmpq_mpoly`` in the program's input symbols, cancelled after every operation;
    ZeroDivisionError where a denominator is the zero polynomial, :class:`TooLarge` where
    a polynomial exceeds :data:`CANCEL_TERMS` terms. ``ring`` = (context, {Symbol: index
    of its generator}) computes in a given ring (KeyError for a symbol not in it)."""
    if ring is None:
        names = sorted(prog.inputs, key=str)
        where = {x: i for i, x in enumerate(names)}
        ctx = flint.fmpq_mpoly_ctx.get(tuple(f"x{i}" for i in range(max(1, len(names)))),
                                       "lex")
    else:
        ctx, where = ring
    gens = ctx.gens()
    one = ctx.constant(1)
    vals = [None] * len(prog.ops)
    for i, op in enumerate(prog.ops):
        kind = op[0]
        if kind == "in":
            vals[i] = (gens[where[op[1]]], one)
        elif kind == "const":
            vals[i] = (ctx.constant(op[1]), one)
        # every value is kept in lowest terms; the gcds below are the only ones that can
        # be nontrivial for operands in lowest terms (n/d + n2/d2 with g = gcd(d, d2) can
        # share a factor with g only; (n n2)/(d d2) only gcd(n, d2) and gcd(n2, d); a
        # power of a reduced fraction is reduced), so no gcd of the whole result is taken
        elif kind == "add":
            n, d = vals[op[1][0]]
            for j in op[1][1:]:
                n2, d2 = vals[j]
                if d2 == d:
                    n, d = _reduced(n + n2, d)
                elif d2.is_one():
                    n = n + n2 * d
                elif d.is_one():
                    n, d = n * d2 + n2, d2
                else:
                    g = d.gcd(d2)
                    if g.is_one():
                        n, d = n * d2 + n2 * d, d * d2
                    else:
                        a, b = d / g, d2 / g
                        n, d = _reduced_by(n * b + n2 * a, a * d2, g)
            vals[i] = _sized(n, d)
        elif kind == "mul":
            n, d = vals[op[1][0]]
            for j in op[1][1:]:
                n2, d2 = vals[j]
                if d.is_one() and d2.is_one():
                    n = n * n2
                    continue
                n, d2 = _reduced(n, d2)
                n2, d = _reduced(n2, d)
                n, d = n * n2, d * d2
            vals[i] = _sized(n, d)
        else:
            (n, d), k2 = vals[op[1]], op[2]
            if k2 < 0:
                if n.is_zero():
                    raise ZeroDivisionError("power of zero with a negative exponent")
                n, d, k2 = d, n, -k2
            vals[i] = _sized(n ** k2, d ** k2)
    n, d = vals[prog.out[k]]
    if d.is_zero():
        raise ZeroDivisionError("a denominator is identically zero")
    return n, d


def _cancels(a, b):
    """Whether ``a - b`` cancels to zero as a rational function: True, False, or None where
    it cannot be decided this way (not rational functions, a denominator identically zero).
    Exact polynomial arithmetic in python-flint (the cross-multiplied numerators compared),
    in place of ``sympy.cancel(sympy.together(a - b)) == 0`` (the same answer, far faster;
    sympy leaves e.g. ``-9/4 + 9/4`` uncancelled). :class:`TooLarge` where the polynomials
    grow beyond :data:`CANCEL_TERMS` terms."""
    try:
        prog = Program([a, b])
        na, da = _rational_function(prog, 0)
        nb, db = _rational_function(prog, 1)
    except (NotRational, ZeroDivisionError):
        return None
    return na * db == nb * da


_POLY_VALUES: list = []     # [poly, variables it uses, {their values: value}], newest last
_POLY_KEPT = 16


def poly_value(p, x: list):
    """``p(*x)`` for a python-flint polynomial, exactly; the value is kept per polynomial
    (an equal polynomial counts as the same one) and per values of the variables it uses,
    so the solver's shared polynomials (det A in vth and rth) are evaluated once a point."""
    for entry in _POLY_VALUES:
        q = entry[0]
        if q is p or (len(q) == len(p) and q == p):
            break
    else:
        used = tuple(k for k, d in enumerate(p.degrees()) if d > 0) if not p.is_zero() else ()
        entry = [p, used, {}]
        if len(_POLY_VALUES) >= _POLY_KEPT:
            del _POLY_VALUES[0]
        _POLY_VALUES.append(entry)
    key = tuple(x[k] for k in entry[1])
    got = entry[2].get(key)
    if got is None:
        got = entry[2][key] = p(*x)
    return got


class RatioCheck:
    """The solver's exact ratio (:class:`derive.solver.cramer.Ratio`) as the independent
    side of a check, evaluated in its own ring: at a point, every ring variable gets the
    value of its expression (``1/R`` for a conductance variable) and the ratio's numerator
    and denominator are evaluated exactly (python-flint). Its sympy form
    (:func:`derive.solver.convert.to_sympy`) is built only where a check needs it (the
    exact route of :func:`compare` on small expressions)."""

    def __init__(self, ratio):
        from derive.solver import convert
        self.ratio = ratio
        self._expr = None
        self._form = None
        self._used = convert.used_vars(ratio)
        vs = ratio.system.vars
        self._prog = Program([vs[k].expr for k in self._used])
        self._recip = [vs[k].kind == "recip" for k in self._used]
        # symbols that stand alone behind a conductance variable (1/R): drawn as 1/n, so
        # the ring is evaluated at integers (ten times faster than at fractions)
        self._inverse = {vs[k].expr for k in self._used
                         if vs[k].kind == "recip" and vs[k].expr.is_Symbol}
        self._inverse -= {vs[k].expr for k in self._used if vs[k].kind != "recip"}
        self.inverse = frozenset(self._inverse)
        self._values: dict = {}

    def _symbols_form(self):
        if self._form is None:
            from derive.solver import convert
            self._form = convert.to_symbols(self.ratio)
        return self._form

    def cancels_with(self, a):
        """Whether ``a`` equals the ratio as a rational function, decided exactly in the
        ratio's own polynomial ring in the circuit symbols (cross-multiplied); None where
        that cannot decide (placeholders, symbols outside the ring, not rational)."""
        num, den, ctx, syms, subs = self._symbols_form()
        if subs or len(set(map(str, syms))) != len(syms):
            return None
        try:
            na, da = _rational_function(Program([a]), 0,
                                        (ctx, {x: i for i, x in enumerate(syms)}))
        except (NotRational, ZeroDivisionError, KeyError):
            return None
        return na * den == num * da

    def expr(self):
        if self._expr is None:
            from derive.solver import convert
            self._expr = convert.to_sympy(self.ratio)
        return self._expr

    def symbols(self) -> set:
        return self._prog.symbols()

    def ops_at_least(self, limit: int) -> bool:
        """Whether the sympy form surely has at least ``limit`` operations (count_ops): a
        lower bound from the factors of numerator and denominator (each factor a sum of
        its terms: terms - 1 additions), without building the sympy form."""
        if self._expr is not None:
            return count_ops_capped(self._expr, limit) >= limit
        from derive.forms import cost
        bound = cost.factor_terms_bound(self.ratio)     # from term counts, no factoring
        if bound is not None and bound >= limit:
            return True
        num, den, _ctx, _syms, subs = self._symbols_form()
        if subs:                        # placeholders substituted back: sympy decides
            return count_ops_capped(self.expr(), limit) >= limit
        bound = 0
        for p in (num, den):
            if p.is_zero():
                continue
            if len(p) > 3000:
                bound += len(p) - 1
                continue
            _c, factors = p.factor()
            bound += sum(len(f) - 1 for f, _e in factors)
        return bound >= limit

    def at(self, point: dict):
        """The ratio's exact value at ``point`` (Symbol -> rational) as ``fmpq``;
        ZeroDivisionError where it is undefined (values cached per point)."""
        key = tuple(sorted(((str(k), v) for k, v in point.items()
                            if k in self._prog.inputs), key=lambda kv: kv[0]))
        if key in self._values:
            got = self._values[key]
            if got is None:
                raise ZeroDivisionError("the ratio is undefined at this point")
            return got
        try:
            got = self._at(point)
        except ZeroDivisionError:
            self._values[key] = None
            raise
        self._values[key] = got
        return got

    def _at(self, point: dict):
        vals = self._prog.run(point)
        nv = len(self.ratio.system.vars)
        x = [flint.fmpq(0)] * nv
        for k, v, r in zip(self._used, vals, self._recip):
            if r:
                if v == 0:
                    raise ZeroDivisionError("a conductance of an infinite value")
                v = 1 / v
            x[k] = v
        if nv == 0:
            n, d = self.ratio.num.to_dict(), self.ratio.den.to_dict()
            num = flint.fmpq(n.get((0,), 0)) if n else flint.fmpq(0)
            den = flint.fmpq(d.get((0,), 1)) if d else flint.fmpq(1)
        else:
            num, den = poly_value(self.ratio.num, x), poly_value(self.ratio.den, x)
        if den == 0:
            raise ZeroDivisionError("the ratio's denominator vanishes")
        return flint.fmpq(num) / flint.fmpq(den)


@timed("verification")
def compare(a, b, defs: dict | None = None, points: int = POINTS,
            seed: int = 20261202) -> tuple:
    """(method, equal, points used) for the claim that ``a`` and ``b`` are the same function.

    Small expressions without named intermediates: exact cancellation of ``a - b``
    (``"exact"``). Otherwise ``"points"``: evaluation in exact rational arithmetic at
    ``points`` random rational points (named intermediates in ``defs`` are evaluated in
    dependency order); a point where either side is undefined is replaced by a new draw, at
    most ``ATTEMPTS * points`` draws; with no usable point the claim is not verified.
    Expressions with roots are evaluated by exact sympy substitution instead of flint.
    """
    defs = defs or {}
    ref = b_ref = b if isinstance(b, RatioCheck) else None
    if not defs:
        ca = count_ops_capped(a, EXACT_OPS)
        small = ca < EXACT_OPS
        if small and ref is not None:
            small = not ref.ops_at_least(EXACT_OPS - ca)
            if small:
                try:
                    zero = ref.cancels_with(a)
                except TooLarge:
                    zero = None
                if zero is not None:
                    return "exact", zero, None
                b, ref = ref.expr(), None
        elif small:
            small = ca + count_ops_capped(b, EXACT_OPS - ca) < EXACT_OPS
    else:
        small = False
    if small:
        try:
            zero = _cancels(a, b)
        except TooLarge:          # too large to cancel: decided at random points
            zero = "large"
        if zero is None:
            try:
                zero = sympy.cancel(sympy.together(a - b)) == 0
            except Exception:
                zero = None
        if zero:
            return "exact", True, None
        if zero is False and _is_rational_function(a) and _is_rational_function(b):
            return "exact", False, None
        if zero == "large" and ref is None and isinstance(b_ref, RatioCheck):
            b, ref = b_ref, b_ref
    if ref is not None:
        try:
            prog = Program([a], defs)
            syms = (prog.symbols() | ref.symbols()) - set(defs)
            run = lambda pt: [prog.run(pt)[0], ref.at(pt)]
            same = lambda va, vb: va == vb
        except NotRational:
            b, ref = ref.expr(), None
    if ref is None:
        syms = _free(a, b, defs)
        try:
            prog = Program([a, b], defs)
            run = lambda pt: prog.run(pt)
            same = lambda va, vb: va == vb
        except NotRational:
            run = lambda pt: _sympy_point([a, b], defs, pt)
            same = lambda va, vb: _algebraic_zero(va - vb)
    if not syms:
        try:
            va, vb = run({})
        except ZeroDivisionError:
            return "exact", False, None
        return "exact", bool(same(va, vb)), None
    seq = draws(seed, syms, ref.inverse if ref is not None else ())
    used = 0
    for _ in range(ATTEMPTS * points):
        if used == points:
            break
        pt = next(seq)
        try:
            va, vb = run(pt)
        except ZeroDivisionError:
            continue
        if not same(va, vb):
            return "points", False, None
        used += 1
    return "points", used > 0, used


def equal(a, b, defs: dict | None = None, points: int = POINTS, seed: int = 20261202) -> bool:
    """Whether ``a`` and ``b`` are the same function (see :func:`compare`)."""
    return compare(a, b, defs, points, seed)[1]


def count_methods(equations) -> dict:
    """{method or None: number of equations} over ``equations``."""
    out: dict = {}
    for e in equations:
        m = e.verified_by if e.verified else None
        out[m] = out.get(m, 0) + 1
    return out
