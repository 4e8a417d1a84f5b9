"""Cheap size estimates of exact forms, read off the solver's sparse polynomials.

Deciding between the expanded form of a quantity and a compact one (series-parallel
nesting, an elimination sequence) needs the size of the expanded form. Factoring the
polynomials or printing them costs more than the rest of a small derivation; the bounds
here read only the term count of each polynomial and, per symbol, the number of terms it
occurs in (one pass over the exponent vectors), and are proven lower bounds of what
factoring and printing would give.

The argument (multilinear polynomials). A polynomial ``p`` of degree at most 1 in every
symbol factors into irreducible factors whose symbol sets are disjoint (a symbol in two
factors would have degree 2 in the product). The product of polynomials in disjoint
symbols has no two equal monomials, so with ``N`` terms in ``p`` and ``t_i`` in its
factors, ``N = prod t_i``, and a symbol ``x`` of factor ``i`` that occurs in ``c`` terms of
``p`` occurs in ``c t_i / N`` terms of the factor. That is an integer, so ``N/gcd(N, c)``
divides ``t_i``: the factor holding ``x`` has at least ``d = N/gcd(N, c)`` terms and ``x``
occurs in at least ``c/gcd(N, c)`` of them. Summed over the symbols this bounds the names
printed in the factored form; ``3 (d - 1)`` for the largest ``d`` bounds the separators
(" + " or " - ") of its sums. A monomial content is the case ``c = N`` (the factor ``x``).

Every ratio passed here must be in lowest terms over the ring (every ``Solver`` ratio is:
:meth:`derive.solver.cramer.Ratio.cancel`). Converted to the circuit's symbols (each
conductance ``1/R`` multiplied through by ``R``) it can then share only a monomial with
itself, which :func:`derive.solver.convert.to_symbols` cancels and the counts below
account for. Where a bound does not apply (a symbol of higher degree, ``s`` with more
than one reactive element, a ring variable for a compound expression) the functions return
None and the caller factors.
"""
from __future__ import annotations

from math import gcd


def symbol_counts(ratio):
    """Per polynomial (numerator, denominator) of ``ratio`` in the circuit's symbols, as
    :func:`derive.solver.convert.to_symbols` gives them (cancelled): ``(N, {symbol: c})``
    with ``N`` terms and ``c`` the number of terms in which the symbol occurs; None where
    the conversion is not a plain renaming of multilinear polynomials (see the module
    docstring). Computed from the ring polynomials without converting them."""
    vs = ratio.system.vars
    syms = [v.expr for v in vs]
    if not all(getattr(x, "is_Symbol", False) for x in syms) or len(set(syms)) != len(syms):
        return None
    polys = [ratio.num, ratio.den]
    if not vs:
        return [(len(p), {}) for p in polys]
    degs = [p.degrees() if not p.is_zero() else (0,) * len(vs) for p in polys]
    if any(d > 1 for ds in degs for d in ds):
        return None
    out = []
    for p, ds in zip(polys, degs):
        n = len(p)
        if n == 0:
            out.append((0, {}))
            continue
        ring = [sum(col) for col in zip(*p.monoms())]     # terms with each ring variable
        counts = {}
        for k, v in enumerate(vs):
            if v.kind == "recip":
                shift = max(degs[0][k], degs[1][k])     # R**shift multiplied through
                c = n - ring[k] if shift else 0
            else:
                c = ring[k]
            if c:
                counts[syms[k]] = c
        out.append((n, counts))
    (nn, cn), (nd, cd) = out
    if nn and nd:
        for x in [x for x in cn if cn[x] == nn and cd.get(x) == nd]:
            del cn[x], cd[x]        # a symbol dividing both: cancelled by to_symbols
    return out


def printed_length_bound(ratio):
    """A lower bound of ``len(str(convert.to_sympy(ratio)))`` (no larger than
    :func:`derive.solver.convert.printed_length_at_least`, which factors), or None where
    :func:`symbol_counts` does not apply."""
    stats = symbol_counts(ratio)
    if stats is None:
        return None
    if stats[0][0] == 0:
        return 0
    total = 0
    for n, counts in stats:
        largest = 1
        for x, c in counts.items():
            g = gcd(n, c)
            total += len(str(x)) * (c // g)
            largest = max(largest, n // g)
        total += 3 * (largest - 1)
    return total


def factor_terms_bound(ratio):
    """A lower bound of ``sum(len(f) - 1)`` over the irreducible factors ``f`` of the
    numerator and denominator in the circuit's symbols (the additions their sums print:
    what :meth:`derive.derivation.steps.RatioCheck.ops_at_least` bounds), or None where
    :func:`symbol_counts` does not apply."""
    stats = symbol_counts(ratio)
    if stats is None:
        return None
    if stats[0][0] == 0:
        return 0
    return sum(max((n // gcd(n, c) for c in counts.values()), default=1) - 1
               for n, counts in stats)


def printed_length_at_least(e) -> int:
    """A lower bound of ``len(str(e))`` for a sympy expression, without printing it: every
    occurrence of a symbol prints its name, and the terms of every sum are separated by
    " + " or " - " (sympy's string printer); one walk over the expression tree, no sorting
    of terms (what makes printing a large sum slow).

    >>> import sympy
    >>> a, bb = sympy.symbols('a bb')
    >>> e = (a + bb) ** 2 / (a - 3 * bb) + a
    >>> printed_length_at_least(e) <= len(str(e))
    True
    """
    total = 0
    stack = [e]
    while stack:
        x = stack.pop()
        if x.is_Symbol:
            total += len(x.name)
            continue
        args = x.args
        if not args:
            continue
        if x.is_Add:
            total += 3 * (len(args) - 1)
        stack.extend(args)
    return total
