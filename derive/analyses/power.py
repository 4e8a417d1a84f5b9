"""``find power in X``: the power X absorbs in W (passive sign convention), exact, with the
steps of its derivation (:func:`derive.forms.power.quantities`,
:func:`derive.derivation.port_steps.power_steps`)."""
from __future__ import annotations

from derive.derivation.port_steps import power_steps
from derive.forms import select as forms
from derive.forms.results import RequestResult


def answer(ctx, req) -> RequestResult:
    out = RequestResult(req)
    for q in forms.port_quantities(ctx, req):
        out.quantities[q.name] = q
        out.notes += q.notes
    out.steps = power_steps(ctx, req, out)
    return out
