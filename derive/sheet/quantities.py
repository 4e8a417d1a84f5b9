"""The quantity table: every fact about a quantity word, in one entry per name.

A *request word* is what follows ``find`` (``thevenin``, ``vth``, ``gain``, ``model``,
``power``, ``operating_point``...); a *result name* is a key a result is reported under
(``vth``, ``rin``, ``z11``...). Every name of either sort has one :class:`Quantity` here:

* ``members``: the results a request word gives (``thevenin`` -> ``vth``, ``rth``); a
  single quantity is its own only member;
* ``twin``: the quantity it is computed as (``rn``, ``resistance`` and ``impedance`` are
  ``rth``; ``voltage`` is ``vth``), itself otherwise;
* ``unit``: the unit of the result (``None`` where it depends: ``gain`` is V/V per volt of a
  voltage source, ohm per ampere of a current source, see
  :attr:`derive.sheet.kinds.Kind.gain_unit`; groups have their members' units);
* ``slots``: the names a request phrase fills, in order (``gain from S to P``: source, port);
* ``family``: ``"basic"`` (the port and branch quantities of
  :func:`derive.forms.select.port_quantities`), ``"section"`` (``model``, ``twoport``),
  ``"element"`` (``power in X``), ``"circuit"`` (requests of the whole circuit),
  ``"response"`` (``f0``, ``w0``, ``Q`` of a result's second-order denominator, written
  ``find tolerance of f0 of Q``) or ``"result"`` (a result name only, never a request word);
* ``analyses``: which of ``find sensitivity of``/``tolerance``/``drift``/``budget``,
  ``solve``, ``check``, ``choose``, ``approximately within`` and ``within`` (``check Q
  equals EXPR within E%``) take it;
* ``frequency``: ``"bode"`` (frequency annotation with Bode figures), ``"annotate"``
  (annotation without figures) or ``None``;
* ``tex``: its LaTeX name in records, where it has a typeset one.

A name not in the table is an error *here*: :func:`quantity` raises
:class:`UnknownQuantity` (a :class:`~derive.errors.DeriveError` that is also a
``KeyError``, naming it).

Why the table lives in ``derive.sheet`` (stage 1) and not in ``derive.forms``: the parser
reads the slots of a phrase, the unit of a ``choose`` target and which requests ``choose``
takes, and the circuit stage (``derive.circuit.requests``) which requests need a port;
a stage imports only itself and earlier stages (``tests/test_layers.py``), so the one table
lives in the earliest stage that reads it.

>>> quantity("thevenin").members, quantity("rn").twin, quantity("power").unit
(('vth', 'rth'), 'rth', 'W')
>>> quantity("flux")
Traceback (most recent call last):
...
derive.sheet.quantities.UnknownQuantity: unknown quantity 'flux'
"""
from __future__ import annotations

from dataclasses import dataclass

from derive.errors import DeriveError


class UnknownQuantity(DeriveError, KeyError):
    """A quantity name that is not in :data:`QUANTITIES` (a bug in the caller)."""

    def __str__(self):      # the message itself, not KeyError's quoted repr of it
        return str(self.args[0]) if self.args else ""


#: every analysis a quantity may be taken by
ANALYSES = ("sensitivity", "tolerance", "solve", "check", "drift", "budget", "choose",
            "approximately", "within")
_SCALAR = frozenset(ANALYSES)
_GROUP = frozenset(("sensitivity", "tolerance", "drift", "budget"))
_NONE = frozenset()
_RESPONSE = frozenset(("sensitivity", "tolerance"))


@dataclass(frozen=True)
class Quantity:
    name: str
    unit: str | None
    family: str
    members: tuple = ()
    twin: str = ""
    slots: tuple = ("port",)
    analyses: frozenset = _NONE
    frequency: str | None = None
    tex: str | None = None

    def __post_init__(self):
        if not self.members:
            object.__setattr__(self, "members", (self.name,))
        if not self.twin:
            object.__setattr__(self, "twin", self.name)

    @property
    def needs_port(self) -> bool:
        """Whether the request phrase names a port (``at P``, ``to P``, ``from P1``)."""
        return "port" in self.slots

    @property
    def said(self) -> str:
        """The members in words: ``vth and rth``, ``rin, gain and rout``."""
        if len(self.members) > 3:
            return "the two-port parameters"
        if len(self.members) == 1:
            return self.members[0]
        return ", ".join(self.members[:-1]) + " and " + self.members[-1]


def _basic(name, unit, twin="", slots=("port",), tex=None):
    return Quantity(name, unit, "basic", twin=twin, slots=slots, analyses=_SCALAR,
                    frequency="bode", tex=tex)


#: two-port parameters (IEEE/IEC standard names) with their units
_TWOPORT = (("z11", "ohm"), ("z12", "ohm"), ("z21", "ohm"), ("z22", "ohm"),
            ("y11", "S"), ("y12", "S"), ("y21", "S"), ("y22", "S"),
            ("h11", "ohm"), ("h12", "V/V"), ("h21", "A/A"), ("h22", "S"),
            ("g11", "S"), ("g12", "A/A"), ("g21", "V/V"), ("g22", "ohm"),
            ("a", "V/V"), ("b", "ohm"), ("c", "S"), ("d", "A/A"))

_TABLE = (
    Quantity("thevenin", None, "basic", members=("vth", "rth"), analyses=_GROUP,
             frequency="bode"),
    Quantity("norton", None, "basic", members=("isc", "rn"), analyses=_GROUP,
             frequency="bode"),
    _basic("vth", "V", tex=r"v_{\mathrm{th}}"),
    _basic("rth", "ohm", tex=r"R_{\mathrm{th}}"),
    _basic("isc", "A", tex=r"i_{\mathrm{sc}}"),
    _basic("rn", "ohm", twin="rth", tex=r"R_{\mathrm{N}}"),
    _basic("resistance", "ohm", twin="rth", tex=r"\mathrm{resistance}"),
    _basic("impedance", "ohm", twin="rth", tex=r"\mathrm{impedance}"),
    _basic("voltage", "V", twin="vth", tex=r"\mathrm{voltage}"),
    _basic("current", "A", slots=("element",), tex=r"\mathrm{current}"),
    _basic("gain", None, slots=("source", "port"), tex=r"\mathrm{gain}"),
    Quantity("power", "W", "element", slots=("element",), analyses=_SCALAR),
    Quantity("model", None, "section", members=("rin", "gain", "rout"),
             slots=("port", "port2"), frequency="bode"),
    Quantity("twoport", None, "section", members=tuple(n for n, _ in _TWOPORT),
             slots=("port", "port2"), frequency="annotate"),
    Quantity("rin", "ohm", "result", tex=r"R_{\mathrm{in}}"),
    Quantity("rout", "ohm", "result", tex=r"R_{\mathrm{out}}"),
    *(Quantity(n, u, "result") for n, u in _TWOPORT),
    # the natural frequency and quality factor of a result's second-order denominator,
    # taken by ``find sensitivity of``/``find tolerance of`` (``f0 of gain from S to P``)
    Quantity("f0", "Hz", "response", slots=(), analyses=_RESPONSE, tex=r"f_{0}"),
    Quantity("w0", "rad/s", "response", slots=(), analyses=_RESPONSE, tex=r"\omega_{0}"),
    Quantity("Q", None, "response", slots=(), analyses=_RESPONSE, tex=r"Q"),
    Quantity("operating_point", None, "circuit", slots=()),
    Quantity("stress", None, "circuit", slots=()),
    Quantity("noise", None, "circuit", slots=("port",)),
)

#: name -> :class:`Quantity`
QUANTITIES = {q.name: q for q in _TABLE}
assert len(QUANTITIES) == len(_TABLE), "a quantity is in the table twice"


def quantity(name: str) -> Quantity:
    """The entry of ``name``; :class:`UnknownQuantity` for any other name."""
    try:
        return QUANTITIES[name]
    except (KeyError, TypeError):
        raise UnknownQuantity(f"unknown quantity {name!r}") from None


def of_family(family: str) -> tuple:
    """The names of one family, in table order (``"basic"``: every port/branch quantity)."""
    return tuple(q.name for q in _TABLE if q.family == family)


def response_words() -> tuple:
    """The words of ``find ANALYSIS of WORD of Q`` (``f0``, ``w0``, ``Q``)."""
    return of_family("response")


def twin(name: str) -> str:
    """The quantity ``name`` is computed as (``rn`` -> ``rth``)."""
    return quantity(name).twin


def members(name: str) -> tuple:
    return quantity(name).members


def unit(name: str) -> str | None:
    return quantity(name).unit


def accepts(analysis: str, name: str) -> bool:
    """Whether ``analysis`` (one of :data:`ANALYSES`) takes quantity ``name``."""
    if analysis not in ANALYSES:
        raise UnknownQuantity(f"unknown analysis {analysis!r}")
    return analysis in quantity(name).analyses
