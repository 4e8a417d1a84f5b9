"""Requests answered: from a circuit to results (exact ratios, sympy forms, values).

:func:`analyse` runs every request of a circuit. Each request kind has a handler
registered in :data:`HANDLERS`; later stages (sensitivity, tolerance, solve, check, model,
twoport) register theirs from their own modules.
"""
from __future__ import annotations

from dataclasses import dataclass, field
from typing import Callable, Optional

import sympy

from derive.circuit.build import Circuit, key_of
from derive.errors import NotAvailableYet, SheetError
from derive.forms import select as forms
from derive.sheet.quantities import of_family


@dataclass
class QuantityResult:
    """One named result (``vth``, ``rth``, ``gain``, ...)."""
    name: str
    expr: Optional[sympy.Expr]          # compact closed form (None only if too large)
    value: Optional[complex | float]    # at nominal values
    unit: Optional[str]
    ratio: object = None                # exact Ratio over ring variables, when expanded
    sequence: list = field(default_factory=list)   # [(name, sympy expr)], in order
    in_sequence: Optional[sympy.Expr] = None
    form: str = "expanded"              # 'expanded', 'series-parallel', 'sequence'
    notes: list = field(default_factory=list)


@dataclass
class RequestResult:
    request: object                     # model.Request
    quantities: dict = field(default_factory=dict)
    steps: list = field(default_factory=list)
    extra: dict = field(default_factory=dict)
    notes: list = field(default_factory=list)   # said with the result in every record (str)


@dataclass
class Options:
    symbolic: Optional[list] = None     # keep only these symbols symbolic
    max_terms: float = 2e6
    expand_limit: float = 20000         # expand determinants up to this many terms
    mc_samples: int = 100_000           # Monte Carlo of `find tolerance`
    mc_seed: int = 1
    mc_distribution: str = "uniform"    # or 'normal' (tolerance = 3 sigma)


@dataclass
class Context:
    """What handlers share: the circuit, options and cached per-port work."""
    circuit: Circuit
    options: Options
    cache: dict = field(default_factory=dict)

    @property
    def nominal(self) -> dict:
        return self.circuit.nominal_values()

    def numeric_subs(self) -> dict:
        c = self.circuit
        if self.options.symbolic is not None:
            keep = {key_of(n) for n in self.options.symbolic}
            keys = {k for k, v in c.symbols.items() if v.nominal is not None and k not in keep}
        else:
            keys = set(c.numeric)
        nom = self.nominal
        return {sympy.Symbol(k): nom[sympy.Symbol(k)] for k in keys}

    def port(self, name):
        plus, minus, _ = self.circuit.ports[name]
        return plus, minus


Handler = Callable[[Context, object], RequestResult]
HANDLERS: dict = {}


def handler(*quantities):
    def deco(fn):
        for q in quantities:
            HANDLERS[q] = fn
        return fn
    return deco


@handler(*of_family("basic"))
def _basic(ctx: Context, req) -> RequestResult:
    out = RequestResult(req)
    for q in forms.port_quantities(ctx, req):
        out.quantities[q.name] = q
    from derive.derivation import port_steps as derivation
    out.steps = derivation.port_steps(ctx, req, out)
    return out


def analyse(circuit: Circuit, options: Options | None = None) -> list:
    """Answer every request of ``circuit``; a list of :class:`RequestResult`.

    Instances named in ``replace`` statements are put as their section models first; every
    result computed on such a substituted circuit is then marked so, here and only here
    (:func:`derive.analyses.substitution.annotate`)."""
    from derive.analyses import substitution as model_reuse
    options = options or Options()
    circuit = model_reuse.substitute(circuit, options)
    substituted = bool(getattr(circuit, "model_substitutions", None))
    ctx = Context(circuit, options)
    results = []
    for req in circuit.requests:
        fn = handler_for(req)
        result = fn(ctx, req)
        if substituted:
            model_reuse.annotate(ctx, req, result, fn)
        results.append(result)
    return results


# how a request kind is named in the "not available yet" message
_SHOWN = {"operating_point": "find operating point", "stress": "find stress",
          "noise": "find noise", "power": "power in", "choose": "choose",
          "drift": "find drift of", "budget": "find budget of"}


def handler_for(req) -> Handler:
    """The handler of one request, or a located :class:`NotAvailableYet`.

    A plain ``find Q`` goes to the handler of its quantity word; ``find ANALYSIS of Q``,
    ``solve``, ``check`` and ``choose`` go to the handler of the analysis or statement, and
    need the quantity itself to be computable too (so ``find sensitivity of power in R1``
    is refused while ``power in`` has no handler). ``approximately within`` needs a handler
    registered under 'approximately'.
    """
    kind = req.analysis or (None if req.statement == "find" else req.statement)
    if kind is None:
        fn, missing = HANDLERS.get(req.quantity), req.quantity
    elif req.quantity not in HANDLERS:
        fn, missing = None, req.quantity
    else:
        fn, missing = HANDLERS.get(kind), kind
    if fn is None:
        what = _SHOWN.get(missing, missing)
        raise NotAvailableYet(f"'{what}' requests are not available yet", req.loc.line,
                              req.loc.col)
    if getattr(req, "within", None) is not None and "approximately" not in HANDLERS:
        loc = req.name_locs.get("within", req.loc)
        raise NotAvailableYet("'approximately within' is not available yet", loc.line,
                              loc.col)
    return fn


def _load_handlers():
    """Import the modules that register further handlers (each optional until built)."""
    import importlib
    for mod in ("sensitivity", "tolerance", "inversion", "claims", "sections"):
        try:
            importlib.import_module(f"{__package__}.{mod}")
        except ModuleNotFoundError as e:
            if e.name != f"{__package__}.{mod}":
                raise


_load_handlers()
