"""What a request's answer is made of: :class:`QuantityResult`, :class:`RequestResult`, the
run's :class:`Options` and the :class:`Context` handlers share (the circuit, its stamped
system and one :class:`~derive.solver.cramer.Solver` with its determinant cache)."""
from __future__ import annotations

from dataclasses import dataclass, field
from typing import Optional

import sympy

from derive.circuit.build import Circuit, key_of
from derive.clock import phase
from derive.sheet.units import format_value
from derive.solver.cramer import Solver
from derive.solver.stamping import System


@dataclass
class QuantityResult:
    """One named result (``vth``, ``rth``, ``gain``, ``power``, ...)."""
    name: str
    expr: Optional[sympy.Expr]          # compact closed form (None only if too large)
    value: Optional[complex | float]    # at nominal values
    unit: Optional[str]
    ratio: object = None                # exact Ratio over ring variables, when expanded
    sequence: list = field(default_factory=list)   # [(name, sympy expr)], in order
    in_sequence: Optional[sympy.Expr] = None
    form: str = "expanded"              # 'expanded', 'series-parallel', 'sequence'
    notes: list = field(default_factory=list)
    # why there is no value although every symbol has a nominal value (a pole there)
    undefined: Optional[str] = None
    # an inverted formula: intervals (low, high) of the measured symbol where the chosen root
    # is real and positive, each end a sympy expression or None (unbounded); empty: none
    # derived, or an end known only as a number at nominal values
    validity: list = field(default_factory=list)
    # ``approximately within E%``: {"expr", "max_error", "method", ...} (analyses.approximation)
    approximation: Optional[dict] = None

    def __repr__(self) -> str:
        value = "no value" if self.value is None else format_value(self.value, self.unit)
        return f"<{self.name} = {_short(self.expr)} ({value}, {self.form})>"

    def _repr_latex_(self) -> str:
        """Jupyter: the closed form and its value at nominal."""
        rhs = sympy.latex(self.expr) if self.expr is not None else r"\text{(sequence)}"
        value = "" if self.value is None else \
            r" \approx \text{" + format_value(self.value, self.unit) + "}"
        return f"$\\mathrm{{{self.name}}} = {rhs}{value}$"


@dataclass
class RequestResult:
    request: object                     # model.Request
    quantities: dict = field(default_factory=dict)
    steps: list = field(default_factory=list)
    extra: dict = field(default_factory=dict)
    notes: list = field(default_factory=list)   # said with the result in every record (str)

    def __repr__(self) -> str:
        names = ", ".join(self.quantities) or "no quantities"
        return f"<result of {getattr(self.request, 'text', '?')!r}: {names}; " \
               f"{len(self.steps)} step(s)>"

    def _repr_markdown_(self) -> str:
        """Jupyter: the request and one line per quantity (closed form and value)."""
        lines = [f"**{getattr(self.request, 'text', '')}**", ""]
        lines += [f"- {q._repr_latex_()}" for q in self.quantities.values()]
        noise = self.extra.get("noise")
        if noise and noise.get("rms") is not None:
            lo, hi = noise["band"]
            lines.append(f"- output noise {format_value(noise['rms'], 'V')} rms from "
                         f"{format_value(lo, 'Hz')} to {format_value(hi, 'Hz')}")
        lines += [f"- {n}" for n in self.notes]
        return "\n".join(lines) + "\n"


def _short(expr, limit: int = 60) -> str:
    text = str(expr)
    return text if len(text) <= limit else text[: limit - 1] + "…"


@dataclass
class Options:
    symbolic: Optional[list] = None     # keep only these symbols symbolic
    max_terms: float = 2e6
    expand_limit: float = 20000         # expand determinants up to this many terms
    mc_samples: int = 100_000           # Monte Carlo of `find tolerance`
    mc_seed: int = 1
    mc_distribution: str = "uniform"    # or 'normal' (tolerance = 3 sigma)
    digits: int = 4                     # significant figures of computed values in prose


@dataclass
class Context:
    """What handlers share: the circuit, options and cached work (``cache``): the stamped
    system and its solver are made once per context, so every request on the circuit
    shares their determinants."""
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

    def system(self) -> System:
        """The circuit's stamped system (numeric symbols substituted), made once."""
        if "system" not in self.cache:
            with phase("solve"):                   # stamping is the solver's work
                self.cache["system"] = System(self.circuit, self.numeric_subs())
        return self.cache["system"]

    def solver(self, where=None) -> Solver:
        """The system's solver, made once; ``where`` (a request's location) is where its
        errors point. Every view shares one determinant cache."""
        if "solver" not in self.cache:
            self.cache["solver"] = Solver(self.system(), self.options.max_terms)
        return self.cache["solver"].at(where)
