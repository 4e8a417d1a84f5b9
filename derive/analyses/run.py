"""Running a sheet: from a circuit to one result per request.

:data:`HANDLERS` is the one table from request kind to the function that answers it; the
kind of ``find Q`` is its quantity word, of ``find ANALYSIS of Q`` the analysis, of ``solve``
and ``check`` the statement. :func:`run` is the whole run, in order: the circuit
transformation (``replace`` statements: model substitution), the up-front refusal of a
sheet estimated to need more than about 1 GB (:mod:`derive.forms.footprint`), then for
every request its
handler (which gives the quantities and the derivation steps) and the post-steps applied to
every result (frequency analysis, substitution notes). A request kind that is not in the
table is refused, with its location, by :func:`handler_of`. The time of each part is charged
to a phase of the running clock (:mod:`derive.clock`): the handlers to ``forms`` (their
determinants to ``solve``, their checks to ``verification``), the annotation to ``frequency``.
"""
from __future__ import annotations

import functools
from typing import Callable

from derive.analyses import approximation, claims, frequency, inversion, ports, power, sections
from derive.analyses import budget, choose, drift
from derive.analyses import noise, operating_point, stress
from derive.analyses import sensitivity, substitution, tolerance
from derive.circuit.build import Circuit
from derive.clock import phase
from derive.errors import NotAvailableYet
from derive.forms import footprint
# the results types live in derive.forms.results; re-exported for callers of this module
from derive.forms.results import Context, Options, QuantityResult, RequestResult

Handler = Callable[[Context, object], RequestResult]

#: request kind -> handler ``fn(ctx, request) -> RequestResult``
HANDLERS: dict = {
    "thevenin": ports.answer, "norton": ports.answer, "vth": ports.answer,
    "rth": ports.answer, "isc": ports.answer, "rn": ports.answer,
    "resistance": ports.answer, "impedance": ports.answer, "voltage": ports.answer,
    "gain": ports.answer, "current": ports.answer,
    "power": power.answer,
    "operating_point": operating_point.answer, "stress": stress.answer,
    "noise": noise.answer,
    "model": sections.model_handler, "twoport": sections.twoport_handler,
    "sensitivity": sensitivity.sensitivity, "tolerance": tolerance.tolerance,
    "solve": inversion.solve_request, "check": claims.check_request,
    "drift": drift.answer, "budget": budget.answer, "choose": choose.answer,
    # ``find Q ... approximately within E%``: wraps the handler of Q (see handler_of)
    "approximately": approximation.answer,
}

# how a request kind without a handler is named in the refusal
_SHOWN = {"operating_point": "find operating point", "stress": "find stress",
          "noise": "find noise", "power": "power in", "choose": "choose",
          "drift": "find drift of", "budget": "find budget of",
          "approximately": "approximately within"}


def run(circuit: Circuit, options: Options | None = None) -> list:
    """Answer every request of ``circuit``: a list of :class:`RequestResult`, in order."""
    with phase("forms"):                      # the frequency annotation nests inside
        return _run(circuit, options)


def _run(circuit: Circuit, options: Options | None) -> list:
    options = options or Options()
    circuit = substitution.substitute(circuit, options)          # ``replace`` statements
    substituted = bool(getattr(circuit, "model_substitutions", None))
    ctx = Context(circuit, options)
    footprint.refuse_runaway(ctx)                                # > about 1 GB: refused
    results = []
    for req in circuit.requests:
        answer = handler_of(req)
        result = answer(ctx, req)                                # quantities and steps
        with phase("frequency"):
            frequency.annotate(ctx, req, result)                 # s-dependent results
        if substituted:
            substitution.annotate(ctx, req, result, answer)      # computed on a model
        results.append(result)
    return results


def _lookup(kind: str, req, loc=None) -> Handler:
    try:
        return HANDLERS[kind]
    except KeyError:
        loc = loc or req.loc
        raise NotAvailableYet(f"'{_SHOWN.get(kind, kind)}' requests are not supported by "
                              "this version", loc.line, loc.col) from None


def handler_of(req) -> Handler:
    """The handler of one request, from :data:`HANDLERS`; a located error where there is none.

    ``find Q`` goes to the handler of its quantity word; ``find ANALYSIS of Q``, ``solve``,
    ``check`` and ``choose`` to the handler of the analysis or statement, and need Q itself
    in the table too. ``find Q ... approximately within`` wraps the handler of Q: the handler
    keyed ``"approximately"`` gets it as ``inner`` (``check Q equals EXPR within E%`` is a
    ``check``: its bound is read by the check handler).
    """
    kind = req.analysis or (None if req.statement == "find" else req.statement)
    fn = _lookup(req.quantity, req)
    if kind is not None:
        fn = _lookup(kind, req)
    if getattr(req, "within", None) is not None and req.statement == "find":
        wrap = _lookup("approximately", req, req.name_locs.get("within", req.loc))
        fn = functools.partial(wrap, inner=fn)
    return fn
