"""Exact results as a short sequence of named intermediate quantities (node elimination).

When the expanded rational function would be too large (a 4x4 resistor grid has 100 352
spanning trees), a quantity ``c^T A^-1 b`` is found by eliminating the unknowns of the
bordered system ``[[A, b], [c^T, 0]]`` one at a time (Gaussian elimination, pivots chosen
to keep the fill low). Every updated matrix entry gets a name, ``q1 = Y22 - Y21*Y12/Y11``,
the way a hand derivation introduces ``Rp = R2 || R3``; the result is the last entry.
Each entry uses only names defined before it, so the sequence evaluates in order.
"""
from __future__ import annotations

import random
import weakref

import sympy

from derive.sheet import quantities
from derive.solver import convert as edge
from derive.solver import exact_eval


# the sympy value of each ring variable of a system (1/R for recips), built once per system
_ENTRY_VALS: "weakref.WeakKeyDictionary" = weakref.WeakKeyDictionary()


def entry_vals(system) -> list:
    """The sympy value of each ring variable of ``system`` (``1/R`` for a reciprocal), in
    ring order; built once per system."""
    vals = _ENTRY_VALS.get(system)
    if vals is None or len(vals) != len(system.vars):
        vals = [1 / v.expr if v.kind == "recip" else v.expr for v in system.vars]
        _ENTRY_VALS[system] = vals
    return vals


def entry_expr(system, p):
    """A ring polynomial entry as a sympy expression in circuit symbols (1/R for recips)."""
    return edge.poly_expr(p, entry_vals(system))


def _probe_point(syms):
    rnd = random.Random(7)
    return {s: sympy.Rational(rnd.randint(11, 97), rnd.randint(3, 17)) for s in syms}


def eliminate(entries: dict, n: int, reserved: set, prefix="q"):
    """Eliminate unknowns 0..n-1 of the (n+1)x(n+1) sparse system ``entries``.

    Returns (sequence, final) with the last diagonal entry named; ``sequence`` is a list of
    (Symbol, expr). Pivots are chosen by Markowitz cost among entries that are nonzero at a
    probe point (so no pivot is identically zero).
    """
    rows: dict = {}
    cols: dict = {}
    for (i, j), v in entries.items():
        if v != 0:
            rows.setdefault(i, {})[j] = v
            cols.setdefault(j, set()).add(i)
    syms = set()
    for v in entries.values():
        syms |= v.free_symbols
    point = _probe_point(syms)
    seq = []
    names = [0]
    taken = {str(s) for s in syms} | set(reserved)

    numval_sym: dict = {}

    def name(expr, value=None):
        if expr.is_Atom or (expr.is_Mul and len(expr.args) == 2 and expr.args[0].is_Number
                             and expr.args[1].is_Atom) or _prints_within(expr, 12):
            return expr
        names[0] += 1
        while f"{prefix}{names[0]}" in taken:
            names[0] += 1
        s = sympy.Symbol(f"{prefix}{names[0]}")
        seq.append((s, expr))
        if value is None:
            value = expr.xreplace(numval_sym).xreplace(point)
        numval_sym[s] = sympy.nsimplify(value) if value.is_number and not value.is_Rational else value
        return s

    probe: dict = {}          # entry -> (its value at the probe point, its printed length)

    def probed(v):
        got = probe.get(v)
        if got is None:
            got = probe[v] = (v.xreplace(numval_sym).xreplace(point), len(str(v)))
        return got

    remaining = set(range(n))
    rem_cols = set(range(n))
    while remaining:
        best = None
        for r in remaining:
            row = rows.get(r, {})
            for c, v in row.items():
                if c not in rem_cols:
                    continue
                val, size = probed(v)
                if val == 0:
                    continue
                cost = (len(row) - 1) * (len(cols.get(c, ())) - 1)
                key = (cost, size)
                if best is None or key < best[0]:
                    best = (key, r, c)
        if best is None:
            raise ZeroDivisionError("singular system")
        _, r, c = best
        p = rows[r][c]
        prow = {j: v for j, v in rows[r].items() if j != c}
        pcol = [i for i in cols.get(c, ()) if i != r]
        for i in pcol:
            f = rows[i].pop(c)
            for j, x in prow.items():
                old = rows[i].get(j, sympy.Integer(0))
                new = old - f * x / p
                if new == 0:
                    rows[i].pop(j, None)
                    cols.get(j, set()).discard(i)
                else:
                    # the new entry's probe value from its operands' (exact rationals)
                    vo, vf, vx, vp = (probed(e)[0] for e in (old, f, x, p))
                    value = vo - vf * vx / vp if all(
                        e.is_Rational for e in (vo, vf, vx, vp)) else None
                    rows[i][j] = name(new, value)
                    cols.setdefault(j, set()).add(i)
        for j in list(rows[r]):
            cols.get(j, set()).discard(r)
        del rows[r]
        cols.pop(c, None)
        remaining.discard(r)
        rem_cols.discard(c)
    final = rows.get(n, {}).get(n, sympy.Integer(0))
    return seq, final


def bordered_entries(system, col: dict, row: dict):
    ent = {}
    for i, r in enumerate(system.A.rows):
        for j, v in r.items():
            ent[(i, j)] = entry_expr(system, v)
    n = system.n
    for i, v in col.items():
        ent[(i, n)] = entry_expr(system, v) if not isinstance(v, int) else sympy.Integer(v)
    for j, v in row.items():
        ent[(n, j)] = entry_expr(system, v) if not isinstance(v, int) else sympy.Integer(v)
    return ent


_FINAL = sympy.Dummy("final")   # the quantity's own name in an exact evaluation


def quantity_sequence(ctx, req, name):
    """(sequence, final expression, value at nominal) for a port/branch quantity."""
    system = ctx.system()
    base = quantities.twin(name)
    port = ctx.port(req.port) if req.port else None
    reserved = set(ctx.circuit.symbols)
    sign = -1
    if base in ("vth", "gain", "isc"):
        u = system.port_vector(*port)
        b = system.rhs(only=req.source if base == "gain" else None)
        seq, final = eliminate(bordered_entries(system, b, u), system.n, reserved)
        final = -final
        if base == "isc":
            seq2, f2 = eliminate(bordered_entries(system, u, u), system.n,
                                 reserved | {str(s) for s, _ in seq}, prefix="p")
            seq = seq + seq2
            final = final / (-f2)
    elif base == "rth":
        u = system.port_vector(*port)
        seq, final = eliminate(bordered_entries(system, u, u), system.n, reserved)
        final = -final
    elif base == "current":
        f = system.through(req.element)
        b = system.rhs()
        seq, final = eliminate(bordered_entries(system, b, f.coef), system.n, reserved)
        final = entry_expr(system, f.const) - final if not isinstance(f.const, int) else -final
    else:
        raise KeyError(name)
    return seq, final, evaluate(seq, final, ctx.nominal)


def evaluate(seq, final, nominal):
    """Value of a sequence's result at nominal values (None if a symbol *of the result* has
    none): exact rational arithmetic (:func:`exact_value`), a float only at the end."""
    v = exact_value(seq, final, nominal)
    return None if v is None else edge.exact_number(v)


CANCEL_LIMIT = 4000     # operations: larger leftovers in missing symbols are not cancelled


def exact_value(seq, final, point: dict):
    """The exact value (a sympy number) of ``final`` after the named entries ``seq``, at
    ``point`` (Symbol -> exact number); None where the result depends on a symbol that
    ``point`` does not give.

    Only the entries the result needs are evaluated. A symbol without a value that still
    occurs may cancel (an element in series with a current source, a part across an ideal
    voltage source): two exact evaluations with random rational values for the missing
    symbols prove a dependence when they differ; otherwise the leftover is cancelled
    exactly and decides.
    """
    needed = set(final.free_symbols)
    for s, e in reversed(seq):
        if s in needed:
            needed |= e.free_symbols
    names = {s for s, _ in seq}
    used = [(s, e) for s, e in seq if s in needed]
    missing = {x for x in needed - names if x not in point}

    def run(env):
        for s, e in used:
            env[s] = e.xreplace(env)
        return final.xreplace(env)

    def run_rational(env):
        """:func:`run` at a point where every symbol has a rational value, in flint."""
        try:
            got = exact_eval.values_in_order([*used, (_FINAL, final)], env)
        except ZeroDivisionError:
            return None
        if got is None:
            return None
        v = got[_FINAL]
        return sympy.Rational(int(v.p), int(v.q))

    if missing:
        rnd = random.Random(11)
        probes = []
        for _ in range(2):
            env = dict(point)
            env.update({x: sympy.Rational(rnd.randint(10 ** 5, 10 ** 6), rnd.randint(1, 997))
                        for x in missing})
            fast = run_rational(env) if all(v.is_Rational for v in env.values()) else None
            probes.append(fast if fast is not None else run(env))
        if all(p.is_Rational for p in probes) and probes[0] != probes[1]:
            return None          # proven: the result depends on a missing symbol
    v = run(dict(point))
    if v.free_symbols:
        if sympy.count_ops(v) > CANCEL_LIMIT:
            return None
        v = sympy.cancel(sympy.together(v))
        if v.free_symbols:
            return None
    if not v.is_number or _bad(v):
        return None
    return v


def _prints_within(e, limit: int) -> bool:
    """``len(str(e)) <= limit``, printing ``e`` only when a lower bound of its printed length
    (its symbols' names, each printed at least once, one character between two) allows it."""
    syms = e.free_symbols
    if sum(len(x.name) for x in syms) + len(syms) - 1 > limit:
        return False
    return len(str(e)) <= limit


def _bad(v) -> bool:
    return v.has(sympy.zoo, sympy.nan, sympy.oo, -sympy.oo)


def inline(seq, final):
    """The sequence substituted back into one expression (for short sequences): each
    intermediate built once from the ones before it (one pass, not one walk of the growing
    expression per name)."""
    env = {}
    for s, x in seq:
        env[s] = x.xreplace(env) if env else x
    return final.xreplace(env) if env else final
