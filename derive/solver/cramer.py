"""Port and branch quantities of a stamped system, exactly, by Cramer's rule.

With ``A x = b`` the modified nodal system, ``u`` the port's incidence vector (+1 at the
port's + node, -1 at its - node) and ``c`` the linear form of an element's current:

* open-circuit voltage  ``vth = u^T A^-1 b = -det[[A, b], [u^T, 0]] / det A``
* resistance seen       ``rth = u^T A^-1 u = -det[[A, u], [u^T, 0]] / det A``
  (a 1 A test source between the port's nodes, independent sources zeroed; dependent sources
  stay, so this is the test-source method)
* short-circuit current ``isc = det[[A, b], [u^T, 0]] / det[[A, u], [u^T, 0]]``
  (the current, + to -, through a 0 V source across the port)
* element current       ``i = (c0 det A - det[[A, b], [c^T, 0]]) / det A``

(bordered-determinant identity: ``det[[A, p], [q^T, 0]] = -q^T adj(A) p``).
All determinants are taken by :func:`derive.solver.determinant.det` on exact polynomials.
"""
from __future__ import annotations

import copy
from dataclasses import dataclass

from derive.clock import phase
from derive.errors import SheetError, TooLarge
from derive.solver import determinant
from derive.solver.determinant import estimate_det_terms
from derive.solver.stamping import System


@dataclass
class Ratio:
    """An exact rational function ``num/den`` over a system's ring variables."""
    num: object
    den: object
    system: System

    @property
    def is_zero(self) -> bool:
        return self.num.is_zero()

    def terms(self) -> int:
        return len(self.num) + len(self.den)

    def __mul__(self, other: "Ratio") -> "Ratio":
        return Ratio(self.num * other.num, self.den * other.den, self.system).cancel()

    def cancel(self) -> "Ratio":
        if self.den.is_zero():
            return self
        g = self.num.gcd(self.den)
        num, den = self.num, self.den
        if not g.is_one() and not g.is_zero():
            num, den = num / g, den / g
        lc = den.leading_coefficient() if hasattr(den, "leading_coefficient") else 1
        if lc != 0:
            num, den = num / lc, den / lc
        return Ratio(num, den, self.system)

    def equals(self, other: "Ratio") -> bool:
        return (self.num * other.den - other.num * self.den).is_zero()


class Solver:
    """Determinants of one system, cached by what they are, with a guard on their size.

    The cache is keyed by name: ``"A"`` for ``det A`` and ``("bordered", col, row)`` for a
    bordered determinant whose column and row are named vectors (``("port", plus, minus)``,
    ``("rhs", only)``, ``("through", element)``). :meth:`at` gives a view with another error
    location that shares the cache, so one solver serves every request on a circuit."""

    def __init__(self, system: System, max_terms: float = 2e6, where=None):
        self.system = system
        self.max_terms = max_terms
        self.where = where
        self._dets = {}

    def at(self, where) -> "Solver":
        """This solver (same system and determinant cache) with errors located at ``where``."""
        if where is self.where:
            return self
        view = copy.copy(self)
        view.where = where
        return view

    def det(self, m, key=None):
        """``det m`` after the size guard; cached under ``key`` when one is given."""
        if key is not None and key in self._dets:
            return self._dets[key]
        est = estimate_det_terms(m)
        if est > self.max_terms:
            line, col = (self.where.line, self.where.col) if self.where else (0, 0)
            raise TooLarge(
                f"the expanded result would have about {est:.3g} terms (limit "
                f"{self.max_terms:.3g}): keep fewer symbols symbolic ('numeric R1, R2' in the "
                "sheet or --symbolic on the command line) or raise --max-terms", line, col)
        with phase("solve"):
            d = determinant.det(m)
        if key is not None:
            self._dets[key] = d
        return d

    def det_a(self):
        """``det A`` (cached), whether or not it vanishes."""
        return self.det(self.system.A, "A")

    def d0(self):
        """``det A``, which must not vanish: a located error says why otherwise."""
        d = self.det_a()
        if d.is_zero():
            line, col = (self.where.line, self.where.col) if self.where else (0, 0)
            raise SheetError("the circuit is singular: its node voltages are not fixed "
                             "(an op-amp without a feedback path, a floating section, or "
                             "sources that contradict each other)", line, col)
        return d

    def vector(self, name):
        """The vector a name stands for: ``("port", plus, minus)``, ``("rhs", only)`` or
        ``("through", element)`` (the coefficients of the element's current)."""
        kind = name[0]
        if kind == "port":
            return self.system.port_vector(name[1], name[2])
        if kind == "rhs":
            return self.system.rhs(only=name[1])
        if kind == "through":
            return self.system.through(name[1]).coef
        raise KeyError(name)

    def bordered(self, col, row):
        """``det[[A, col], [row^T, 0]]`` of two named vectors (see :meth:`vector`), cached."""
        return self.det(self.system.A.bordered(self.vector(col), self.vector(row)),
                        ("bordered", col, row))

    # ------------------------------------------------------------ quantities
    def vth(self, port, only=None):
        u, b = ("port", *port), ("rhs", only)
        return Ratio(-self.bordered(b, u), self.d0(), self.system).cancel()

    def rth(self, port):
        u = ("port", *port)
        return Ratio(-self.bordered(u, u), self.d0(), self.system).cancel()

    def isc(self, port):
        u, b = ("port", *port), ("rhs", None)
        dz = self.bordered(u, u)
        if dz.is_zero():
            return None          # port across an ideal voltage: no finite short-circuit current
        return Ratio(self.bordered(b, u), dz, self.system).cancel()

    def current(self, element):
        f = self.system.through(element)
        d0 = self.d0()
        num = f.const * d0 - self.bordered(("rhs", None), ("through", element)) if f.coef \
            else f.const * d0
        return Ratio(num, d0, self.system).cancel()

    def voltage(self, plus, minus):
        """The voltage of node ``plus`` against node ``minus`` with every source acting."""
        return self.vth((plus, minus))
