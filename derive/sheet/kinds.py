"""The element-kind table: every fact about an element kind, in one entry per kind.

Each later stage reads a kind's facts here instead of keeping its own list: the parser (the
unit of a value, the ratings, ``noiseless``, resistor codes, the noun of a message), the
circuit stage (units and dimensions of symbols, sources, the op-amp's nullor), the solver
(what a kind stamps: an admittance, a branch current with its voltage law, a driven current),
the reductions and nodal derivations (the element's impedance or admittance in ``s``) and the
record (words, assumptions for reactive kinds).

A kind not in the table is an error *here*: :func:`kind` raises :class:`UnknownKind` (a
:class:`~derive.errors.DeriveError` that is also a ``KeyError``, naming the kind), so no
consumer can take an unknown kind for an admittance, drop it or pass it on.

Why the table lives in ``derive.sheet`` (stage 1) and not in ``derive.circuit``: the parser
needs the unit of each kind's value, its rating units and its noun to check a sheet, and a
stage imports only itself and earlier stages (``tests/test_layers.py``). Keeping the table in
``circuit`` would leave the parser with a second copy of these facts; putting the whole table
in the earliest stage that reads it keeps one copy. The entries are plain data (no sympy, no
circuit objects): :func:`impedance` and :func:`admittance` take the Laplace variable as an
argument. Kinds that no sheet line writes (the ideal op-amp's ``nullor``, made by the circuit
stage) are in the table too, marked ``sheet=False``.

>>> kind("capacitor").unit, kind("capacitor").stamp, kind("capacitor").reactive
('F', 'admittance', True)
>>> kind("transistor")
Traceback (most recent call last):
...
derive.sheet.kinds.UnknownKind: unknown element kind 'transistor' (known: resistor, conductance, capacitor, inductor, impedance, admittance, vsource, isource, nullor)
"""
from __future__ import annotations

from dataclasses import dataclass

from derive.errors import DeriveError


class UnknownKind(DeriveError, KeyError):
    """An element kind that is not in :data:`KINDS` (a bug in the caller, not in a sheet)."""

    def __str__(self):      # the message itself, not KeyError's quoted repr of it
        return str(self.args[0]) if self.args else ""


@dataclass(frozen=True)
class Kind:
    """Every fact about one element kind.

    ``immittance`` says what the value is: ``"impedance"`` (resistor, inductor, impedance) or
    ``"admittance"`` (conductance, capacitor, admittance), multiplied by ``s**s_power``
    (``Z = s·L``, ``Y = s·C``); ``None`` for sources and the nullor.

    ``stamp`` says how modified nodal analysis takes it: ``"admittance"`` (entries of the
    nodal matrix), ``"branch"`` (a branch-current unknown and its voltage law: voltage
    sources, inductors, impedances), ``"current"`` (a driven current: current sources) or
    ``"nullor"`` (a branch current at the output, a voltage law between the inputs).
    """
    name: str                 # the model's kind string
    word: str                 # the noun in messages and records
    unit: str | None          # unit word of the value (SHEET.md section 2); None: no value
    terminals: int = 2
    immittance: str | None = None
    s_power: int = 0
    stamp: str = "admittance"
    source: str | None = None         # 'voltage' / 'current' for sources (dependent or not)
    gain_unit: str | None = None      # unit of 'gain from S to P' per unit of this source
    reactive: bool = False            # makes results functions of s
    rating_units: tuple = ()          # SHEET.md section 5: 'rated ...' units it takes
    noise: str | None = None          # 'thermal' (4kTR, 4kTG) unless 'noiseless'; 'unknown':
                                      # no noise model (find noise refuses it unless 'noiseless')
    resistor_code: bool = False       # R47 / 47R read as IEC 60062 resistor codes
    sheet: bool = True                # written on a sheet line (False: made by the circuit stage)

    @property
    def branch_current(self) -> bool:
        """Whether the solver gives it a branch-current unknown."""
        return self.stamp in ("branch", "nullor")

    @property
    def passive(self) -> bool:
        return self.immittance is not None


_TABLE = (
    Kind("resistor", "resistor", "ohm", immittance="impedance", rating_units=("W", "V"),
         noise="thermal", resistor_code=True),
    Kind("conductance", "conductance", "S", immittance="admittance", noise="thermal"),
    Kind("capacitor", "capacitor", "F", immittance="admittance", s_power=1, reactive=True,
         rating_units=("V",)),
    Kind("inductor", "inductor", "H", immittance="impedance", s_power=1, stamp="branch",
         reactive=True, rating_units=("V",)),
    Kind("impedance", "impedance", "ohm", immittance="impedance", stamp="branch",
         reactive=True, resistor_code=True, noise="unknown"),
    Kind("admittance", "admittance", "S", immittance="admittance", reactive=True,
         noise="unknown"),
    Kind("vsource", "voltage source", "V", stamp="branch", source="voltage", gain_unit="V/V"),
    Kind("isource", "current source", "A", stamp="current", source="current", gain_unit="ohm"),
    Kind("nullor", "ideal op-amp", None, terminals=3, stamp="nullor", sheet=False),
)

#: kind name -> :class:`Kind`, in the order of SHEET.md section 2
KINDS = {k.name: k for k in _TABLE}
#: the kinds a sheet line writes (``derive.sheet.model.Element.kind``)
SHEET_KINDS = tuple(k.name for k in _TABLE if k.sheet)


def kind(name: str) -> Kind:
    """The entry of kind ``name``; :class:`UnknownKind` for any other name."""
    try:
        return KINDS[name]
    except (KeyError, TypeError):
        raise UnknownKind(f"unknown element kind {name!r} (known: {', '.join(KINDS)})") from None


def impedance(name: str, value, s):
    """The impedance in ``s`` of an element of kind ``name`` with value ``value``; None for
    sources and the nullor (no impedance of their own)."""
    k = kind(name)
    if k.immittance is None:
        return None
    x = value if k.s_power == 0 else s ** k.s_power * value
    return x if k.immittance == "impedance" else 1 / x


def admittance(name: str, value, s):
    """The admittance in ``s`` of an element of kind ``name`` (``1/R``, ``G``, ``s·C``,
    ``1/(s·L)``, ``1/Z``, ``Y``); None for sources and the nullor."""
    k = kind(name)
    if k.immittance is None:
        return None
    x = value if k.s_power == 0 else s ** k.s_power * value
    return x if k.immittance == "admittance" else 1 / x
