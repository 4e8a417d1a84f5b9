"""Small helpers shared by the tests (no derive logic here)."""
from __future__ import annotations

import sympy

import derive


def run(text: str, **kw):
    return derive.derive_text(text, "test.eqv", **kw)


def quantity(text: str, name: str, index: int = 0, **kw):
    """The QuantityResult ``name`` of request ``index``."""
    return run(text, **kw).results[index].quantities[name]


def closed(q) -> sympy.Expr:
    """A quantity's exact closed form, inlining a sequence if that is all there is."""
    if q.expr is not None:
        return q.expr
    from derive.forms.elimination import inline
    return inline(q.sequence, q.in_sequence)


def same(a, b) -> bool:
    return sympy.simplify(sympy.together(a - b)) == 0


def sym(names: str):
    return sympy.symbols(names)


# Reference circuits as (kind, name, node+, node-, value) tuples for the numpy nodal solves
# written in test_power.py and test_operating_point.py: a divider (vth = 8 V, common
# practice) and a bridge with a current source.
DIVIDER_PARTS = [("V", "V1", "a", "gnd", 10), ("R", "R1", "a", "b", 1000),
                 ("R", "R2", "b", "gnd", 4000)]
BRIDGE_PARTS = [("V", "V1", "a", "gnd", 12), ("R", "R1", "a", "b", 1000),
                ("R", "R2", "b", "gnd", 2200), ("R", "R3", "a", "c", 3300),
                ("R", "R4", "c", "gnd", 4700), ("R", "R5", "b", "c", 560),
                ("I", "I1", "gnd", "c", 0.002)]
