"""``find operating point``: every node voltage, element current and absorbed power at DC,
exact, with the power balance verified (:mod:`derive.forms.operating_point`,
:mod:`derive.derivation.op_steps`).

JSON (``RequestResult.extra``): ``"operating_point": {"nodes": {node: {"expr", "value",
"unit"}}, "currents": {element: ...}, "power": {element: ...}, "balance": {...}}``; node
voltages are against the ground node, currents in each element's reference direction,
powers absorbed (passive sign convention). ``value`` is the float of the exact value at
nominal (``null`` where a symbol has none).
"""
from __future__ import annotations

from derive.derivation import op_steps
from derive.forms import operating_point as op_forms
from derive.forms.results import RequestResult
from derive.solver.convert import finite_float


def _json(entries: dict) -> dict:
    return {k: {"expr": e.expr, "value": finite_float(e.value), "unit": e.unit}
            for k, e in entries.items()}


def answer(ctx, req) -> RequestResult:
    out = RequestResult(req)
    op = op_forms.operating_point(ctx, req)
    out.steps = op_steps.steps(ctx, req, op)
    out.extra["operating_point"] = {
        "nodes": _json(op.nodes), "currents": _json(op.currents), "power": _json(op.power),
        "balance": {"exact_zero": bool(op.balance_zero),
                    "value": (finite_float(float(op.balance_at_nominal))
                              if op.balance_at_nominal is not None else None),
                    "unit": "W"}}
    if op.reactive:
        out.notes.append("the operating point is the DC solution (s = 0: capacitors open, "
                         "inductors shorted)")
    return out
