"""``power in X``: the power element X absorbs, exactly, in the circuit's symbols.

Passive sign convention: ``p = v·i`` with ``v`` the voltage of X's first node against its
second and ``i`` the current through X from its first node to its second (its reference
direction, see DEVELOPERS.md "Signs"); ``p > 0`` when X absorbs power. Both factors are
exact ratios of the circuit's one solver (``v`` a bordered determinant with the port vector
of X's nodes, ``i`` with X's current form), so their product is exact too.

A reactive circuit is answered at DC: ``s = 0`` in the cancelled ratios (capacitors open,
inductors shorted). Where the voltage or the current has a pole at ``s = 0`` there is no DC
solution, and a located error says so.
"""
from __future__ import annotations

from derive.circuit.build import S
from derive.errors import SheetError
from derive.forms.results import QuantityResult
from derive.solver import convert as edge
from derive.solver.cramer import Ratio

UNIT = "W"
REACTIVE = ("capacitor", "inductor", "impedance", "admittance")


def reactive(circuit) -> bool:
    return any(e.kind in REACTIVE for e in circuit.elements)


def at_dc(ratio: Ratio, what: str, req, subject: str | None = None) -> Ratio:
    """``ratio`` with ``s = 0`` (the ring variable that is ``s`` itself set to zero).
    ``what`` names the ratio in errors (``voltage``), ``subject`` the request (default
    ``power in X``); errors point at ``req.loc``."""
    subject = subject or f"power in {req.element}"
    system = ratio.system
    names = [v.name for v in system.vars if v.kind == "expr" and v.expr == S]
    others = [v for v in system.vars if not (v.kind == "expr" and v.expr == S)
              and S in getattr(v.expr, "free_symbols", ())]
    if others:
        raise SheetError(f"{subject} at DC is not offered: an element value "
                         f"divides by or nests s ({others[0].expr}); give the element as a "
                         "capacitor or an inductor", req.loc.line, req.loc.col)
    if not names:
        return ratio
    at = {names[0]: 0}
    num, den = ratio.num.subs(at), ratio.den.subs(at)
    if den.is_zero():
        raise SheetError(f"{subject} has no DC value: the {what} has a pole at s = 0 (at DC "
                         "a capacitor is open and an inductor is a short, and the circuit "
                         "then has no solution)", req.loc.line, req.loc.col)
    return Ratio(num, den, system).cancel()


def factors(ctx, req) -> tuple:
    """(voltage, current) Ratios of element ``req.element``, at DC for a reactive circuit
    (cached per element)."""
    return element_factors(ctx, req.element, req)


def element_factors(ctx, name: str, req, subject: str | None = None) -> tuple:
    """(voltage, current) Ratios of element ``name`` (voltage of its first node against its
    second, current in its reference direction; an ideal op-amp: its output against ground
    and the current into its output), at DC for a reactive circuit, cached per element.
    Errors point at ``req.loc`` and name ``subject``."""
    key = ("power factors", name)
    if key not in ctx.cache:
        e = ctx.circuit.element(name)
        solver = ctx.solver(req.loc)
        nodes = e.nodes if len(e.nodes) == 2 else (e.nodes[-1], ctx.circuit.ground)
        v, i = solver.voltage(*nodes), solver.current(e.name)
        if reactive(ctx.circuit):
            subject = subject or f"power in {name}"
            v = at_dc(v, f"voltage of {name}", req, subject)
            i = at_dc(i, f"current of {name}", req, subject)
        ctx.cache[key] = (v, i)
    return ctx.cache[key]


def quantities(ctx, req, expandable: bool) -> list:
    """The one :class:`QuantityResult` ``power`` of ``power in X`` (in W)."""
    if len(ctx.circuit.element(req.element).nodes) != 2:
        raise SheetError(f"power in {req.element}: only two-terminal elements have a power "
                         "here", req.loc.line, req.loc.col)
    if not expandable:
        raise SheetError(f"power in {req.element} needs the expanded solution, which is too "
                         "large here: keep fewer symbols symbolic ('numeric R1, R2' or "
                         "--symbolic)", req.loc.line, req.loc.col)
    v, i = factors(ctx, req)
    p = v * i
    q = QuantityResult("power", edge.to_sympy(p), edge.value_at(p, ctx.nominal), UNIT, ratio=p)
    if reactive(ctx.circuit):
        q.notes.append(f"power in {req.element} is given at DC (s = 0: capacitors open, "
                       "inductors shorted)")
    return [q]
