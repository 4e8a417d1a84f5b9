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
