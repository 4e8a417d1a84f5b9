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


LARGE_NODES = 1000   # an expression of more nodes is printed with its terms in stored order


def print_order(expr) -> dict:
    """The printer settings of ``expr``: sympy's default ordering of the terms of each sum
    (by degree, lexicographic) for an expression a reader takes in at once, and the terms in
    sympy's own stored (canonical, deterministic) order for one of more than
    ``LARGE_NODES`` nodes, where sorting every sum costs most of the printing (a nested
    ladder form of 4000 nodes: 80 ms sorted, 16 ms stored) and no reader follows the order.
    The text is the same expression either way.

    >>> import sympy
    >>> a, b = sympy.symbols('a b')
    >>> print_order(a + b)
    {}
    >>> print_order(sum(sympy.symbols('x0:1200')))
    {'order': 'none'}
    """
    if not isinstance(expr, sympy.Basic):
        return {}
    n = 0
    for _ in sympy.preorder_traversal(expr):
        n += 1
        if n > LARGE_NODES:
            return {"order": "none"}
    return {}


_PRINTED: dict = {}          # expression -> str(expression), see printed()
_PRINTED_MAX = 200_000


def printed(expr) -> str:
    """``str(expr)`` (terms ordered by :func:`print_order`), remembered: the form stage
    measures the named intermediates of a large network by their printed length and the
    exporters print the same expressions again."""
    try:
        got = _PRINTED.get(expr)
    except TypeError:                       # unhashable (a mutable matrix): not remembered
        return str(expr)
    if got is None:
        got = StrPrinter(print_order(expr)).doprint(expr)
        if len(_PRINTED) >= _PRINTED_MAX:
            _PRINTED.clear()
        _PRINTED[expr] = got
    return got


def to_text(expr) -> str:
    """The record's ``expr`` string of a sympy expression."""
    if isinstance(expr, sympy.Basic) and not expr.has(*_SPECIAL):
        return printed(expr)        # no special value: sympy's own string printer's text
    return TextPrinter(print_order(expr)).doprint(expr)
