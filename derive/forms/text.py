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

import sympy
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


# the values TextPrinter prints differently from sympy's string printer
_SPECIAL = (sympy.I, sympy.oo, -sympy.oo, sympy.zoo)


_PRINTED: dict = {}          # expression -> str(expression), see printed()
_PRINTED_MAX = 200_000


def printed(expr) -> str:
    """``str(expr)``, remembered: the form stage measures the named intermediates of a large
    network by their printed length and the exporters print the same expressions again."""
    try:
        got = _PRINTED.get(expr)
    except TypeError:                       # unhashable (a mutable matrix): not remembered
        return str(expr)
    if got is None:
        got = str(expr)
        if len(_PRINTED) >= _PRINTED_MAX:
            _PRINTED.clear()
        _PRINTED[expr] = got
    return got


def to_text(expr) -> str:
    """The record's ``expr`` string of a sympy expression."""
    if isinstance(expr, sympy.Basic) and not expr.has(*_SPECIAL):
        return printed(expr)        # no special value: sympy's own string printer's text
    return TextPrinter().doprint(expr)
