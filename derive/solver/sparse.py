"""Exact solves of large sparse linear systems at one point, in linear time on chains.

:func:`solve` takes ``A x = b`` with exact rational entries (python-flint ``fmpq``) as a
dict of rows and eliminates one unknown at a time, each time the column with the fewest
entries left (a minimum-degree order, ties by index), pivoting on the diagonal where it is
nonzero and else on the shortest row of that column. On a chain or a tree the order
creates no fill, so N unknowns cost O(N log N) operations on numbers whose size stays that
of the data; back substitution follows the same order. :func:`nodal_solve` writes the
modified nodal equations of a network of two-terminal elements (impedances, admittances,
independent sources) at one point, straight from the elements (independent of
:mod:`derive.solver.stamping`), and solves them.

>>> q = flint.fmpq
>>> sorted(solve(2, {0: {0: q(2), 1: q(-1)}, 1: {0: q(-1), 1: q(2)}}, {0: q(1)}).items())
[(0, 2/3), (1, 1/3)]
"""
from __future__ import annotations

import heapq

import flint
import sympy

from derive.sheet import kinds


class Singular(ZeroDivisionError):
    """The system has no unique solution at this point."""


def solve(n: int, rows: dict, b: dict) -> dict:
    """x with ``A x = b``: ``rows`` maps a row index to {column: value} (nonzero values),
    ``b`` a row index to its value; the result maps every unknown 0..n-1 to its value.
    :class:`Singular` where no pivot is left for some unknown."""
    rows = {i: dict(r) for i, r in rows.items() if r}
    b = {i: v for i, v in b.items() if v != 0}
    cols: dict = {}
    for i, r in rows.items():
        for j in r:
            cols.setdefault(j, set()).add(i)
    heap = [(len(s), j) for j, s in cols.items()]
    heapq.heapify(heap)
    done_rows: set = set()
    order = []                                     # (pivot row, column)
    while heap:
        cnt, j = heapq.heappop(heap)
        s = cols.get(j)
        if s is None or len(s) != cnt:
            continue
        del cols[j]
        live = [i for i in s if i not in done_rows]
        if not live:
            raise Singular(f"no pivot for unknown {j}")
        p = j if j in live and rows[j].get(j, 0) != 0 else \
            min(live, key=lambda i: (len(rows[i]), i))
        prow = rows[p]
        piv = prow[j]
        done_rows.add(p)
        order.append((p, j))
        for i in live:
            if i == p:
                continue
            r = rows[i]
            f = r.pop(j) / piv
            for k, v in prow.items():
                if k == j:
                    continue
                w = r.get(k, 0) - f * v
                if w == 0:
                    if k in r:
                        del r[k]
                        cols[k].discard(i)
                        heapq.heappush(heap, (len(cols[k]), k))
                else:
                    if k not in r:
                        cols[k].add(i)
                        heapq.heappush(heap, (len(cols[k]), k))
                    r[k] = w
            if p in b:
                b[i] = b.get(i, 0) - f * b[p]
        for k in prow:
            if k != j and k in cols:
                cols[k].discard(p)
                heapq.heappush(heap, (len(cols[k]), k))
    if len(order) != n:
        raise Singular("the system is singular")
    x: dict = {}
    for p, j in reversed(order):
        acc = b.get(p, flint.fmpq(0))
        for k, v in rows[p].items():
            if k != j:
                acc -= v * x[k]
        x[j] = acc / rows[p][j]
    return x


def _num(v):
    if isinstance(v, flint.fmpq):
        return v
    if not v.is_Rational:
        raise Singular(f"not an exact rational value: {v}")
    return flint.fmpq(int(v.p), int(v.q))


def two_terminal(circuit) -> bool:
    """Whether every element is a two-terminal impedance, admittance or independent source
    (the networks :func:`nodal_solve` writes)."""
    for e in circuit.elements:
        k = kinds.kind(e.kind)
        if e.controls or k.terminals != 2 or not (k.passive or e.independent_source):
            return False
    return True


def nodal_solve(circuit, point: dict, subs: dict, s_value=None, sources="all",
                inject=None) -> dict:
    """Node voltages (node -> fmpq, ground 0) of a network of two-terminal elements at one
    point (Symbol -> exact value; ``subs`` the sheet's numeric substitutions first).
    ``sources``: ``"all"`` (every independent source at its value), ``"none"`` (zeroed),
    or a source name (that source at 1, the others zeroed); ``inject`` (plus, minus) adds
    a 1 A test current into ``plus`` and out of ``minus``."""
    s = sympy.Symbol("s")
    gnd = circuit.ground
    index: dict = {}

    def node(n):
        if n == gnd:
            return None
        if n not in index:
            index[n] = len(index)
        return index[n]
    for n in circuit.nodes:
        node(n)
    rows: dict = {}
    b: dict = {}

    def add(i, j, v):
        if i is None or j is None:
            return
        r = rows.setdefault(i, {})
        w = r.get(j, 0) + v
        if w == 0:
            r.pop(j, None)
        else:
            r[j] = w

    def rhs(i, v):
        if i is not None:
            b[i] = b.get(i, 0) + v

    def value(e):
        v = e.value.xreplace(subs) if subs else e.value
        return v.xreplace(point)
    vsrc = []
    for e in circuit.elements:
        k = kinds.kind(e.kind)
        a, c = (node(x) for x in e.nodes)
        if k.passive:
            y = kinds.admittance(e.kind, value(e), s)
            if y.has(s):
                y = y.xreplace({s: s_value})
            y = _num(y)
            add(a, a, y)
            add(c, c, y)
            add(a, c, -y)
            add(c, a, -y)
        elif k.source == "voltage":
            vsrc.append((e, a, c))
        else:
            on = sources == "all" or sources == e.name
            v = (_num(value(e)) if sources == "all" else flint.fmpq(1)) if on else 0
            if v:
                rhs(a, -v)           # drives current from a through itself into c
                rhs(c, v)
    n_nodes = len(index)
    for t, (e, a, c) in enumerate(vsrc):
        j = n_nodes + t
        add(a, j, flint.fmpq(1))
        add(c, j, flint.fmpq(-1))
        add(j, a, flint.fmpq(1))
        add(j, c, flint.fmpq(-1))
        on = sources == "all" or sources == e.name
        v = (_num(value(e)) if sources == "all" else flint.fmpq(1)) if on else 0
        if v:
            b[j] = b.get(j, 0) + v
    if inject is not None:
        rhs(node(inject[0]), flint.fmpq(1))
        rhs(node(inject[1]), flint.fmpq(-1))
    x = solve(n_nodes + len(vsrc), rows, b)
    out = {n: x.get(i, flint.fmpq(0)) for n, i in index.items()}
    out[gnd] = flint.fmpq(0)
    return out
