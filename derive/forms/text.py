"""The plain-text form of a closed form: the ``expr`` syntax of the record (SHEET.md §4).

The string uses names, numbers, ``+ - * /``, ``**``, parentheses and ``sqrt(...)`` only, so
any reader can parse it back with a small expression grammar. It is the text form of a
result of the form stage, used where a sentence of a step or a diagnosis names an
expression; the exporters reuse it (LaTeX stays in :mod:`derive.export.printing`).

>>> import sympy
>>> a, b = sympy.symbols('div1_Rt R_load')
>>> to_text(a*b/(a + b))
'R_load*div1_Rt/(R_load + div1_Rt)'
>>> to_text(sympy.I*a)
'sqrt(-1)*div1_Rt'
"""
from __future__ import annotations

from sympy.printing.str import StrPrinter


class TextPrinter(StrPrinter):
    """sympy's string printer restricted to the ``expr`` syntax: the imaginary unit is
    written ``sqrt(-1)``; an infinite value raises :class:`ValueError`."""

    def _print_ImaginaryUnit(self, expr):
        return "sqrt(-1)"

    def _print_Infinity(self, expr):
        raise ValueError("infinite result")

    _print_ComplexInfinity = _print_Infinity
    _print_NegativeInfinity = _print_Infinity


def to_text(expr) -> str:
    """The record's ``expr`` string of a sympy expression."""
    return TextPrinter().doprint(expr)
