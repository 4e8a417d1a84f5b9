"""The JSON record (the interface of ``derive record --format json``)."""
from __future__ import annotations

import json
import math

from derive.export.printing import to_latex, to_text


def _num(v):
    if v is None:
        return None
    if isinstance(v, complex):
        if v.imag != 0:
            return None
        v = v.real
    v = float(v)
    return v if math.isfinite(v) else None


def quantity_json(q) -> dict:
    d = {}
    if q.expr is not None:
        d["expr"] = to_text(q.expr)
        d["latex"] = to_latex(q.expr)
    if q.sequence:
        d["sequence"] = [[str(s), to_text(e)] for s, e in q.sequence]
        d["in_sequence"] = to_text(q.in_sequence)
    d["value"] = _num(q.value)
    d["unit"] = q.unit
    d["form"] = q.form
    if q.notes:
        d["notes"] = list(q.notes)
    return d


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
            d[k] = v
    if r.steps:
        d["steps"] = [s if isinstance(s, dict) else s.to_json() for s in r.steps]
    return d


def record_dict(circuit, results) -> dict:
    sheet = circuit.sheet
    return {"title": sheet.title, "notes": list(sheet.notes),
            "symbols": symbols_json(circuit),
            "results": [result_json(r) for r in results]}


def record_json(circuit, results) -> str:
    return json.dumps(record_dict(circuit, results), indent=2, ensure_ascii=False) + "\n"
