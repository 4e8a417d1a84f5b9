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

from dataclasses import dataclass

from derive.errors import SheetError, TooLarge
from derive.solver.determinant import det, estimate_det_terms
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
    """Determinants of one system, cached, with a guard on their expected size."""

    def __init__(self, system: System, max_terms: float = 2e6, where=None):
        self.system = system
        self.max_terms = max_terms
        self.where = where
        self._d0 = None

    def _det(self, m):
        est = estimate_det_terms(m)
        if est > self.max_terms:
            line, col = (self.where.line, self.where.col) if self.where else (0, 0)
            raise TooLarge(
                f"the expanded result would have about {est:.3g} terms (limit "
                f"{self.max_terms:.3g}): keep fewer symbols symbolic ('numeric R1, R2' in the "
                "sheet or --symbolic on the command line) or raise --max-terms", line, col)
        return det(m)

    def d0(self):
        if self._d0 is None:
            self._d0 = self._det(self.system.A)
            if self._d0.is_zero():
                line, col = (self.where.line, self.where.col) if self.where else (0, 0)
                raise SheetError("the circuit is singular: its node voltages are not fixed "
                                 "(an op-amp without a feedback path, a floating section, or "
                                 "sources that contradict each other)", line, col)
        return self._d0

    def bordered(self, col, row, corner=0):
        return self._det(self.system.A.bordered(col, row, corner))

    # ------------------------------------------------------------ quantities
    def vth(self, port, only=None):
        u = self.system.port_vector(*port)
        b = self.system.rhs(only=only)
        return Ratio(-self.bordered(b, u), self.d0(), self.system).cancel()

    def rth(self, port):
        u = self.system.port_vector(*port)
        return Ratio(-self.bordered(u, u), self.d0(), self.system).cancel()

    def isc(self, port):
        u = self.system.port_vector(*port)
        b = self.system.rhs()
        dz = self.bordered(u, u)
        if dz.is_zero():
            return None          # port across an ideal voltage: no finite short-circuit current
        return Ratio(self.bordered(b, u), dz, self.system).cancel()

    def current(self, element):
        f = self.system.through(element)
        b = self.system.rhs()
        d0 = self.d0()
        num = f.const * d0 - self.bordered(b, f.coef) if f.coef else f.const * d0
        return Ratio(num, d0, self.system).cancel()
