"""``find operating point``: the DC solution of the whole circuit, exactly.

DC means ``s = 0`` (capacitors open, inductors shorted; :func:`derive.forms.power.at_dc`).
Every quantity is an exact ratio of the circuit's one solver (``ctx.solver``), so the
determinants are shared with every other request on the circuit:

* the voltage of every node against the ground node (a bordered determinant with the node's
  port vector);
* the current through every element in its reference direction, and its voltage and
  absorbed power ``p = v·i`` (passive sign convention), from
  :func:`derive.forms.power.element_factors` -- the same factors ``find power in X`` uses;
* the sum of all absorbed powers, added exactly over the ring (Tellegen's theorem says it is
  zero: :attr:`OperatingPoint.balance_zero`).

An ideal op-amp (nullor) has the voltage of its output against ground and the current into
its output terminal (it returns through ground); its inputs carry no current.
"""
from __future__ import annotations

from dataclasses import dataclass, field
from typing import Optional

import sympy

from derive.forms import power
from derive.forms.elimination import exact_value
from derive.solver import convert as edge

SUBJECT = "the operating point"


@dataclass
class Entry:
    """One value of the operating point: closed form, exact value at nominal, unit."""
    name: str
    expr: sympy.Expr
    exact: Optional[sympy.Expr]     # sympy Rational at nominal values, None without one
    unit: str
    ratio: object = None            # the solver's exact Ratio

    @property
    def value(self) -> Optional[float]:
        return None if self.exact is None else float(self.exact)


@dataclass
class OperatingPoint:
    nodes: dict = field(default_factory=dict)       # node -> Entry (V, against ground)
    voltages: dict = field(default_factory=dict)    # element -> Entry (V across it)
    currents: dict = field(default_factory=dict)    # element -> Entry (A)
    power: dict = field(default_factory=dict)       # element -> Entry (W absorbed)
    balance_zero: Optional[bool] = None             # sum of absorbed powers cancels exactly
    balance_at_nominal: Optional[sympy.Expr] = None  # exact sum of the nominal values
    reactive: bool = False


def _entry(name, ratio, unit, nominal) -> Entry:
    expr = edge.to_sympy(ratio)
    return Entry(name, expr, exact_value([], expr, nominal), unit, ratio)


def ratio_sum(ratios):
    """(num, den) of the exact sum of Ratios over one system's ring (cancelled pairwise)."""
    num = den = None
    for r in ratios:
        if num is None:
            num, den = r.num, r.den
            continue
        g = den.gcd(r.den)
        num = num * (r.den / g) + r.num * (den / g)
        den = den * (r.den / g)
    return num, den


def elements_of(circuit) -> list:
    """The elements an operating point reports on, in sheet order."""
    return [e for e in circuit.elements if len(e.nodes) in (2, 3)]


def operating_point(ctx, req) -> OperatingPoint:
    """The exact DC operating point of ``ctx.circuit`` (cached in ``ctx``)."""
    key = ("operating point",)
    if key in ctx.cache:
        return ctx.cache[key]
    c = ctx.circuit
    nominal = ctx.nominal
    solver = ctx.solver(req.loc)
    out = OperatingPoint(reactive=power.reactive(c))
    for n in c.nodes:
        if n == c.ground:
            continue
        r = solver.voltage(n, c.ground)
        if out.reactive:
            r = power.at_dc(r, f"voltage of node {n}", req, SUBJECT)
        out.nodes[n] = _entry(n, r, "V", nominal)
    for e in elements_of(c):
        v, i = power.element_factors(ctx, e.name, req, SUBJECT)
        out.voltages[e.name] = _entry(e.name, v, "V", nominal)
        out.currents[e.name] = _entry(e.name, i, "A", nominal)
        out.power[e.name] = _entry(e.name, v * i, "W", nominal)
    num, _den = ratio_sum([p.ratio for p in out.power.values()])
    out.balance_zero = bool(num is not None and num.is_zero())
    vals = [p.exact for p in out.power.values()]
    if vals and all(x is not None for x in vals):
        out.balance_at_nominal = sympy.Add(*vals)
    ctx.cache[key] = out
    return out
