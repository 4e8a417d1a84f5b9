"""The sheet model: what a sheet says, before any circuit is built.

The parser (:mod:`derive.sheet.parser`) turns text into these plain objects; the circuit builder
(:mod:`derive.circuit.build`) flattens and validates them. Every object keeps the location
(line, column, both 1-based) of the text it came from, so later layers can report errors
against the sheet.

Expressions are a small tree of their own (:class:`Num`, :class:`Name`, :class:`BinOp`,
:class:`Neg`, :class:`Call`); they are turned into sympy only at the circuit layer.
"""
from __future__ import annotations

from dataclasses import dataclass, field
from fractions import Fraction
from typing import Optional, Union

from derive.sheet.kinds import SHEET_KINDS


@dataclass(frozen=True)
class Loc:
    line: int
    col: int


# ---------------------------------------------------------------- expressions
@dataclass(frozen=True)
class Num:
    """An exact number (SI prefix or IEC 60062 code already applied)."""
    value: Fraction
    loc: Loc


@dataclass(frozen=True)
class Name:
    """A symbol, element or node name; qualified names keep their dots (``div1.Rt``)."""
    name: str
    loc: Loc


@dataclass(frozen=True)
class BinOp:
    """``op`` is one of ``+ - * / ^ ||``."""
    op: str
    left: "Expr"
    right: "Expr"
    loc: Loc


@dataclass(frozen=True)
class Neg:
    operand: "Expr"
    loc: Loc


@dataclass(frozen=True)
class Call:
    """``sqrt(x)``, ``across(a, b)`` (args are :class:`Name` nodes), ``through(X)``."""
    func: str
    args: tuple
    loc: Loc


Expr = Union[Num, Name, BinOp, Neg, Call]


# ---------------------------------------------------------------- values
@dataclass(frozen=True)
class Tolerance:
    """``±1%`` is relative=True, value=Fraction(1, 100); ``±5 mV`` is relative=False,
    value=Fraction(5, 1000), unit='V'."""
    value: Fraction
    relative: bool
    unit: Optional[str]
    loc: Loc


@dataclass(frozen=True)
class Quantity:
    """A number with an optional unit word, in SI base units (``4.7 kohm`` -> 4700, 'ohm').

    ``unit`` is the canonical unit: one of 'ohm', 'S', 'F', 'H', 'V', 'A', 'Hz', or None;
    in the design-review statements (SHEET.md section 5: a ``choose`` target, a band) also
    'W' (watt).
    """
    value: Fraction
    unit: Optional[str]
    loc: Loc


@dataclass(frozen=True)
class Value:
    """What follows ``=`` on an element line: a quantity or an expression, and a tolerance.

    Exactly one of ``quantity`` and ``expr`` is set.  A bare number (``= 10``) is a quantity
    with ``unit=None``.
    """
    quantity: Optional[Quantity]
    expr: Optional[Expr]
    tolerance: Optional[Tolerance]
    loc: Loc


# ---------------------------------------------------------------- statements
ELEMENT_KINDS = SHEET_KINDS      # the kinds a sheet line writes (derive.sheet.kinds)


@dataclass
class Element:
    """A two-terminal element.

    ``kind`` is one of :data:`ELEMENT_KINDS`. ``nodes`` is (first, second): for ``between X
    and Y`` that is (X, Y); for a current source ``from A to B`` it is (A, B).
    """
    kind: str
    name: str
    nodes: tuple
    node_locs: tuple
    value: Optional[Value]
    loc: Loc
    # design-review attributes (SHEET.md section 5), exact; None where not given
    power_rating: Optional[Fraction] = None     # W   (``rated 0.25 W``; resistors)
    voltage_rating: Optional[Fraction] = None   # V   (``rated 50 V``; R, C, L)
    tc: Optional[Fraction] = None               # 1/K (``tc 100 ppm/K`` -> Fraction(1, 10000))
    noiseless: bool = False                     # ``noiseless`` (resistors)
    attr_locs: dict = field(default_factory=dict)   # 'power_rating'/'voltage_rating'/'tc'/'noiseless' -> Loc


@dataclass
class OpAmp:
    """``opamp U1 inputs p, n output o [gain A] [rin Ri] [rout Ro]``.

    ``gain``/``rin``/``rout`` are expressions or quantities (:class:`Value`) or None;
    with all None the op-amp is ideal (a nullor).
    """
    name: str
    inputs: tuple          # (non-inverting, inverting)
    output: str
    node_locs: tuple       # locations of (inp, inn, out)
    gain: Optional[Value]
    rin: Optional[Value]
    rout: Optional[Value]
    loc: Loc
    # ``noise 4 nV/rtHz and 0.5 pA/rtHz``: input-referred white noise densities, exact;
    # a part not given is None (the noise analysis takes it as zero)
    voltage_noise: Optional[Fraction] = None    # V/sqrt(Hz)
    current_noise: Optional[Fraction] = None    # A/sqrt(Hz)
    attr_locs: dict = field(default_factory=dict)   # 'voltage_noise'/'current_noise' -> Loc


@dataclass
class Nominal:
    """``nominal R = 10 kohm ±1%``."""
    name: str
    quantity: Quantity
    tolerance: Optional[Tolerance]
    loc: Loc


@dataclass
class Port:
    name: str
    plus: str
    minus: str
    node_locs: tuple
    loc: Loc


@dataclass
class Use:
    """``use divider div1 (top, tap, gnd) with Rt = R1, Rb = R2``."""
    block: str
    instance: str
    nodes: tuple
    node_locs: tuple
    mappings: dict          # symbol name -> Expr
    mapping_locs: dict      # symbol name -> Loc
    loc: Loc


@dataclass
class Block:
    name: str
    terminals: tuple
    body: list              # Element, OpAmp, Use (and Nominal) in order
    loc: Loc


@dataclass(frozen=True)
class Temperature:
    """``temperature 25 C from -40 C to 85 C``: all in degrees Celsius, exact (kelvin
    converted by 273.15 exactly). Without ``from ... to ...`` the range is T0 alone."""
    nominal: Fraction
    low: Fraction
    high: Fraction
    loc: Loc
    nominal_loc: Loc
    range_loc: Optional[Loc] = None      # of the low end, when a range is written


@dataclass(frozen=True)
class Derating:
    """``derating 60%``: the share of each rating that may be used, 0 < factor <= 1."""
    factor: Fraction
    loc: Loc


DEFAULT_TEMPERATURE = Fraction(25)          # deg C, when a sheet has no temperature line
DEFAULT_APPROXIMATION_BAND = (Fraction(1), Fraction(10**9))   # Hz, ``approximately`` in s
E_SERIES = ("E3", "E6", "E12", "E24", "E48", "E96", "E192")  # IEC 60063, for ``choose``


@dataclass
class Request:
    """A ``find``/``solve``/``check``/``choose`` statement.

    ``statement`` is 'find', 'solve', 'check' or 'choose'. ``quantity`` is the quantity word:
    'thevenin', 'norton', 'vth', 'rth', 'isc', 'rn', 'resistance', 'impedance', 'voltage',
    'current', 'gain', 'model', 'twoport', 'power' (``power in X``), and for requests that
    are no quantity phrase 'operating_point', 'stress', 'noise' (``find noise at P``).
    ``port`` is the port name (``at P``), ``element``
    the element of ``current through X`` and ``power in X``, ``source`` the source of ``gain from S to P``,
    ``port2`` the second port of ``model/twoport from P1 to P2`` (then ``port`` is P1).
    ``analysis`` is None, 'sensitivity', 'tolerance', 'drift' or 'budget'
    (``find sensitivity of Q``); ``response`` is None or 'f0', 'w0', 'Q' (``find tolerance
    of f0 of Q``: the natural frequency or quality factor of Q's second-order denominator).
    ``solve_for`` is the symbol of ``solve Q for X``; ``claim`` the expression of
    ``check Q equals EXPR``. ``text`` is the statement as written (whitespace collapsed),
    used as the request key in records.

    Section 5 fields: ``symbols`` (with ``symbol_locs``), ``series`` and ``target`` of
    ``choose R1, R2 from E24 for Q = 1.2 V`` (the target a :class:`Quantity`, unit None
    or the quantity's unit); ``band`` the (low, high) frequencies in Hz of ``find noise at
    P from F1 to F2``, of ``approximately within E% from F1 to F2`` or of ``check Q equals
    EXPR within E% from F1 to F2`` (None where not written: see
    :data:`DEFAULT_APPROXIMATION_BAND`); ``within`` the relative error bound of
    ``approximately within 1%`` or of ``check Q equals EXPR within 1%`` (Fraction(1, 100);
    the statement tells the two apart).
    """
    statement: str
    quantity: str
    text: str
    loc: Loc
    port: Optional[str] = None
    port2: Optional[str] = None
    element: Optional[str] = None
    source: Optional[str] = None
    analysis: Optional[str] = None
    solve_for: Optional[str] = None
    claim: Optional[Expr] = None
    name_locs: dict = field(default_factory=dict)   # 'port'/'port2'/'element'/'source'/'solve_for' -> Loc
    symbols: tuple = ()
    symbol_locs: tuple = ()
    series: Optional[str] = None
    target: Optional[Quantity] = None
    band: Optional[tuple] = None
    within: Optional[Fraction] = None
    response: Optional[str] = None      # 'f0', 'w0' or 'Q' of ``find tolerance of f0 of Q``
    # also in name_locs: 'series', 'target', 'band', 'within' (the word 'approximately',
    # or 'within' of a check)


@dataclass
class Numeric:
    """``numeric R3, R4``: substitute these nominal values before solving."""
    names: tuple
    name_locs: tuple
    loc: Loc


@dataclass
class Replacement:
    """``replace INSTANCE by model from P1 to P2 [compare]``: analyse with the instance
    replaced by its section model (see :mod:`derive.analyses.substitution`)."""
    instance: str
    port: str
    port2: str
    compare: bool
    loc: Loc
    name_locs: tuple        # locations of instance, port, port2


@dataclass
class Sheet:
    source: str
    filename: str
    title: Optional[str] = None
    notes: list = field(default_factory=list)
    ground: Optional[str] = None
    ground_loc: Optional[Loc] = None
    elements: list = field(default_factory=list)     # Element and OpAmp, top level, in order
    uses: list = field(default_factory=list)
    nominals: list = field(default_factory=list)
    ports: list = field(default_factory=list)
    blocks: dict = field(default_factory=dict)       # name -> Block
    requests: list = field(default_factory=list)
    numeric: list = field(default_factory=list)      # Numeric statements
    replacements: list = field(default_factory=list)  # Replacement statements
    body: list = field(default_factory=list)         # top-level Element/OpAmp/Use in order
    temperature: Optional[Temperature] = None        # the ``temperature`` line, if any
    derating: Optional[Derating] = None              # the ``derating`` line, if any

    @property
    def nominal_temperature(self) -> Fraction:
        """T0 in deg C (default 25 C)."""
        return self.temperature.nominal if self.temperature else DEFAULT_TEMPERATURE

    @property
    def temperature_range(self) -> tuple:
        """(low, high) in deg C (default: T0 alone)."""
        if self.temperature is None:
            return (DEFAULT_TEMPERATURE, DEFAULT_TEMPERATURE)
        return (self.temperature.low, self.temperature.high)

    @property
    def derating_factor(self) -> Fraction:
        """The usable share of each rating (default 1, i.e. 100%)."""
        return self.derating.factor if self.derating else Fraction(1)
