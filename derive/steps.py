"""The derivation model: ordered, verified steps between the solver and the exporters.

A :class:`Step` says in one sentence what was done and why, the equations it establishes
(each an :class:`Equation`, ``lhs = rhs`` as sympy expressions), and the elements involved.
Every equation is verified before it is written (:func:`verify`): exact cancellation of the
difference, or, where that would be too costly, substitution of random rationals for every
symbol (and ``s``) at several points. Exporters only render steps.

>>> import sympy
>>> R1, R2 = sympy.symbols('R1 R2')
>>> st = Step("Combine R1 and R2 in parallel.",
...           [Equation(sympy.Symbol('Rp'), R1*R2/(R1 + R2), R1/(1 + R1/R2))], ["R1", "R2"])
>>> st.verify()
True
"""
from __future__ import annotations

import random
from dataclasses import dataclass, field
from typing import Callable, Optional

import sympy


@dataclass
class Equation:
    """``lhs = rhs``; ``check`` (optional) is an independent expression that must equal
    ``rhs`` (e.g. the same quantity from the full nodal solution). ``defs`` are named
    intermediates (Symbol -> expr) that ``rhs``/``check`` may use."""
    lhs: sympy.Expr
    rhs: sympy.Expr
    check: Optional[sympy.Expr] = None
    defs: dict = field(default_factory=dict)
    verified: Optional[bool] = None


@dataclass
class Figure:
    """A plot that an exporter may draw: ``draw(path)`` writes an image file."""
    name: str
    caption: str
    draw: Callable[[str], None]


@dataclass
class Step:
    text: str
    equations: list = field(default_factory=list)
    elements: list = field(default_factory=list)
    verified: Optional[bool] = None
    kind: str = "step"          # free label for templates: 'reduction', 'nodal', 'value', ...
    table: Optional[list] = None   # optional rows (list of lists of str) to show as a table

    def verify(self) -> bool:
        ok = True
        for eq in self.equations:
            if eq.verified is None:
                eq.verified = eq.check is None or equal(eq.rhs, eq.check, eq.defs)
            ok = ok and eq.verified
        self.verified = ok
        return ok

    def to_json(self) -> dict:
        from .printing import to_text
        out = {"text": self.text,
               "equations": [f"{to_text(e.lhs)} = {to_text(e.rhs)}" for e in self.equations],
               "elements": list(self.elements),
               "verified": bool(self.verified)}
        if self.table:
            out["table"] = [[str(c) for c in row] for row in self.table]
        return out


def _expand_defs(e, defs):
    for _ in range(len(defs) + 1):
        new = e.xreplace(defs)
        if new == e:
            break
        e = new
    return e


def equal(a, b, defs: dict | None = None, points: int = 3, seed: int = 20261202) -> bool:
    """Whether ``a`` and ``b`` are the same rational function.

    Exact cancellation for small expressions; otherwise evaluation at ``points`` random
    rational points in exact arithmetic (named intermediates in ``defs`` are evaluated in
    order). A wrong identity passes a random rational point only with negligible probability
    (Schwartz–Zippel lemma).
    """
    defs = defs or {}
    if not defs and sympy.count_ops(a) + sympy.count_ops(b) < 400:
        return sympy.cancel(sympy.together(a - b)) == 0
    syms = set(a.free_symbols) | set(b.free_symbols)
    for v in defs.values():
        syms |= v.free_symbols
    syms -= set(defs)
    rnd = random.Random(seed)
    for _ in range(points):
        pt = {x: sympy.Rational(rnd.randint(1, 10**6), rnd.randint(1, 10**3)) for x in syms}
        env = dict(pt)
        try:
            for k, v in defs.items():
                env[k] = sympy.nsimplify(v.xreplace(env)) if False else v.xreplace(env)
            va, vb = a.xreplace(env), b.xreplace(env)
        except ZeroDivisionError:
            continue
        if va.has(sympy.zoo, sympy.nan) or vb.has(sympy.zoo, sympy.nan):
            continue
        if sympy.simplify(va - vb) != 0:
            return False
    return True
