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

    ``unit`` is the canonical unit: one of 'ohm', 'S', 'F', 'H', 'V', 'A', 'Hz', or None.
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
ELEMENT_KINDS = ("resistor", "conductance", "capacitor", "inductor", "impedance",
                 "admittance", "vsource", "isource")


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


@dataclass
class Request:
    """A ``find``/``solve``/``check`` statement.

    ``statement`` is 'find', 'solve' or 'check'. ``quantity`` is the quantity word:
    'thevenin', 'norton', 'vth', 'rth', 'isc', 'rn', 'resistance', 'impedance', 'voltage',
    'current', 'gain', 'model', 'twoport'. ``port`` is the port name (``at P``), ``element``
    the element of ``current through X``, ``source`` the source of ``gain from S to P``,
    ``port2`` the second port of ``model/twoport from P1 to P2`` (then ``port`` is P1).
    ``analysis`` is None, 'sensitivity' or 'tolerance' (``find sensitivity of Q``).
    ``solve_for`` is the symbol of ``solve Q for X``; ``claim`` the expression of
    ``check Q equals EXPR``. ``text`` is the statement as written (whitespace collapsed),
    used as the request key in records.
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
