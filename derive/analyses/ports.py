"""``find Q`` for a port or branch quantity (thevenin, norton, vth, rth, isc, rn,
resistance, impedance, voltage, gain, current): the quantities in their best exact form
(:mod:`derive.forms.select`) and the steps of their derivation."""
from __future__ import annotations

from derive.derivation.port_steps import port_steps
from derive.forms import select as forms
from derive.forms.results import RequestResult


def answer(ctx, req) -> RequestResult:
    out = RequestResult(req)
    for q in forms.port_quantities(ctx, req):
        out.quantities[q.name] = q
    out.steps = port_steps(ctx, req, out)
    return out
