"""The JSON record (the interface of ``derive record --format json``)."""
from __future__ import annotations

import json

import sympy

from derive.export.printing import to_latex, to_text
from derive.solver.convert import finite_float


def printed(v, key=None):
    """``v`` with every sympy object printed: under the key ``"latex"`` as LaTeX, anywhere
    else as the ``expr`` text; dicts, lists and tuples are walked (tuples become lists).
    The analyses keep sympy expressions in ``RequestResult.extra``; this renders them.

    >>> import sympy
    >>> printed({"expr": sympy.Symbol('R1')/2, "latex": sympy.Symbol('R1')/2, "n": [1, None]})
    {'expr': 'R1/2', 'latex': '\\\\frac{R_{1}}{2}', 'n': [1, None]}
    """
    if isinstance(v, sympy.Basic):
        return to_latex(v) if key == "latex" else to_text(v)
    if isinstance(v, dict):
        return {k: printed(x, k) for k, x in v.items()}
    if isinstance(v, (list, tuple)):
        return [printed(x, key) for x in v]
    return v


def quantity_json(q) -> dict:
    d = {}
    if q.expr is not None:
        d["expr"] = to_text(q.expr)
        d["latex"] = to_latex(q.expr)
    if q.sequence:
        d["sequence"] = [[str(s), to_text(e)] for s, e in q.sequence]
        d["in_sequence"] = to_text(q.in_sequence)
    d["value"] = finite_float(q.value)
    d["unit"] = q.unit
    d["form"] = q.form
    if q.notes:
        d["notes"] = list(q.notes)
    if getattr(q, "approximation", None):
        d["approximation"] = printed(q.approximation)
    return d


def method_json(eq) -> dict:
    """How an :class:`~derive.derivation.steps.Equation` was verified, as JSON:
    ``{"method": ...}`` plus ``"points"`` where random points were used."""
    d = {"method": eq.verified_by if eq.verified else None}
    if eq.verified and eq.points is not None:
        d["points"] = int(eq.points)
    return d


def step_json(step) -> dict:
    """A :class:`~derive.derivation.steps.Step` as JSON: its sentence, its equations as
    ``lhs = rhs`` strings, the elements involved and how it was verified."""
    out = {"text": step.text,
           "equations": [f"{to_text(e.lhs)} = {to_text(e.rhs)}" for e in step.equations],
           "elements": list(step.elements),
           "verified": bool(step.verified) and all(e.verified for e in step.equations),
           "verified_by": [method_json(e) for e in step.equations]}
    if step.table:
        out["table"] = [[str(c) for c in row] for row in step.table]
    return out


def symbols_json(circuit) -> dict:
    out = {}
    for k, s in circuit.symbols.items():
        out[k] = {"nominal": float(s.nominal) if s.nominal is not None else None,
                  "unit": s.unit,
                  "tolerance": float(s.tolerance) if s.tolerance is not None else None}
        if s.display != k:
            out[k]["name"] = s.display
    return out


def result_json(r) -> dict:
    d = {"request": r.request.text}
    if r.notes:
        d["notes"] = list(r.notes)
    if r.quantities:
        d["quantities"] = {n: quantity_json(q) for n, q in r.quantities.items()}
    for k, v in r.extra.items():
        if k != "figures":          # Figure objects are for the renderers, not JSON
            d[k] = printed(v, k)
    if r.steps:
        d["steps"] = [s if isinstance(s, dict) else step_json(s) for s in r.steps]
    return d


def record_dict(circuit, results) -> dict:
    sheet = circuit.sheet
    return {"title": sheet.title, "notes": list(sheet.notes),
            "symbols": symbols_json(circuit),
            "results": [result_json(r) for r in results]}


def record_json(circuit, results) -> str:
    return json.dumps(record_dict(circuit, results), indent=2, ensure_ascii=False) + "\n"
