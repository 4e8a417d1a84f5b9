"""The memory a sheet will need, estimated before any work, and the refusal of a runaway.

:func:`estimate` adds up, from the circuit's size alone (and, where that is small enough
to build, the solver's term estimate of ``det A``), what the run will hold:

* every sheet: the interpreter and libraries (``BASE``) and a share per element
  (``PER_ELEMENT``: the parse tree, the circuit, one reduction move and its step, its
  records) -- the whole cost of a long network that reduces by series and parallel moves
  (:func:`derive.forms.select.long_reducible`: linear in the network);
* any other request: the stamped system (a ring of V variables stores each of its ~4E
  monomials with V exponents: ``SYSTEM_BYTES·E·V``), the dense nodal equations of the
  derivation steps (``DENSE_BYTES·n²`` for n unknowns: node voltages and branch currents),
  and, where the determinants are expanded (estimated at most
  :attr:`~derive.forms.results.Options.expand_limit` terms), the expansion
  (``EXPAND_BYTES·T·V`` for T terms).

The constants were measured on this implementation (RSS of ``derive record`` on chains of
series resistors and on square resistor grids; ``benchmarks/bench_runaway.py``) and
rounded up. :func:`refuse_runaway` refuses a sheet whose estimate passes ``LIMIT`` (about
1 GB) with a located message that says what dominates and how to shrink it.
"""
from __future__ import annotations

from derive.errors import TooLarge
from derive.sheet import kinds, quantities

LIMIT = 1 << 30                 # bytes: "about 1 GB"
BASE = 120 << 20                # interpreter, sympy, flint, numpy, scipy, lark
PER_ELEMENT = 24 << 10          # measured ~12 KB per element on a 10 000-resistor chain
SYSTEM_BYTES = 16               # per monomial entry and ring variable (4 entries/element)
DENSE_BYTES = 320               # per entry of the dense nodal matrix (sympy + fmpq solves)
EXPAND_BYTES = 48               # per term and ring variable of the expanded determinants


def _gib(b: float) -> str:
    return f"{b / (1 << 30):.2g} GB" if b >= (1 << 29) else f"{b / (1 << 20):.0f} MB"


def _linear(ctx, req) -> bool:
    """Whether ``req`` is answered on the linear path: a port quantity of a long network
    that reduces by series and parallel moves."""
    from derive.forms import select
    if req.statement != "find" or req.analysis is not None or req.within is not None:
        return False
    if not req.quantity or req.quantity == "current":
        return False
    try:
        q = quantities.quantity(req.quantity)
    except KeyError:
        return False
    if q.family != "basic" or req.port is None:
        return False
    return all(select.long_reducible(ctx, req, n) for n in q.members)


def ring_variables(ctx) -> int:
    """The number of ring variables the stamped system will have (without stamping it):
    the symbols left in element values after the numeric substitutions, every independent
    source, and ``s`` where a part is reactive."""
    subs = ctx.numeric_subs()
    syms, reactive, sources = set(), False, 0
    for e in ctx.circuit.elements:
        k = kinds.kind(e.kind)
        reactive = reactive or k.reactive
        sources += bool(e.independent_source)
        if e.value is not None:
            syms |= (e.value.xreplace(subs) if subs else e.value).free_symbols
    return len(syms) + sources + int(reactive)


def estimate(ctx) -> dict:
    """Bytes the run will need: ``{"total", "parts": [(words, bytes)], "at": request}``
    (``at`` the first request off the linear path, or None)."""
    c = ctx.circuit
    n_el = len(c.elements)
    parts = [("the interpreter and libraries", BASE),
             (f"{n_el} elements", PER_ELEMENT * n_el)]
    heavy = next((r for r in c.requests if not _linear(ctx, r)), None)
    if heavy is not None:
        V = max(1, ring_variables(ctx))
        branches = sum(1 for e in c.elements if kinds.kind(e.kind).stamp in ("branch",
                                                                              "nullor"))
        n = max(0, len(c.nodes) - 1) + branches
        parts.append((f"the stamped system ({n_el} elements in {V} ring variables)",
                      SYSTEM_BYTES * 4 * n_el * V))
        parts.append((f"the dense nodal equations ({n} unknowns)", DENSE_BYTES * n * n))
        if sum(b for _w, b in parts) <= LIMIT:      # only then is the system built
            from derive.solver.determinant import estimate_det_terms
            T = estimate_det_terms(ctx.system().A)
            if T <= ctx.options.expand_limit:
                parts.append((f"the expanded determinants (about {T:.3g} terms in {V} "
                              "variables)", EXPAND_BYTES * T * V))
    return {"total": sum(b for _w, b in parts), "parts": parts, "at": heavy}


def refuse_runaway(ctx) -> None:
    """Refuse, before any work, a sheet estimated to need more than ``LIMIT``: a located
    :class:`~derive.errors.TooLarge` (exit 2) naming what dominates and the remedies."""
    est = estimate(ctx)
    if est["total"] <= LIMIT:
        return
    at = est["at"] or (ctx.circuit.requests[0] if ctx.circuit.requests else None)
    loc = at.loc if at is not None else None
    shown = "; ".join(f"{w}: {_gib(b)}" for w, b in
                      sorted(est["parts"], key=lambda p: -p[1]) if b >= (16 << 20))
    raise TooLarge(
        f"this sheet would need about {_gib(est['total'])} of memory (limit about "
        f"{_gib(LIMIT)}), refused before any work: {shown}",
        loc.line if loc else 0, loc.col if loc else 0,
        hint="give the parts numeric values (values on the element lines and a "
             "'numeric R1, R2, ...' line, or '--symbolic' naming only the symbols to keep), "
             "keep fewer symbols, or ask for fewer quantities of a large network (a network "
             "that reduces by series and parallel moves is answered in linear memory by "
             "'find rth/vth/thevenin ... at P')")
