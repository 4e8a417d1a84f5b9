"""Reusing a section model: ``replace INSTANCE by model from P1 to P2 [compare]``.

The elements of a block instance (``use stage q1 (...)``: every element named ``q1.*``) are
taken alone, between the sheet's ports P1 and P2; their voltage-amplifier model (rin, gain,
rout; see :mod:`derive.sections`) is derived exactly and put in their place as three
elements ``q1.rin`` (across P1), ``q1.E`` (a voltage source ``gain·across(P1)`` referred to
P2's − node) and ``q1.rout`` (from the source to P2's + node). Every request is then answered
on the substituted circuit; each result shows the substitution, and with ``compare`` the
error against the full circuit at nominal values.

The model is exact only for a unilateral section that loads nothing outside P1 and P2; the
comparison shows how far the approximation is from the full circuit.
"""
from __future__ import annotations

import dataclasses
from dataclasses import dataclass
from types import SimpleNamespace

import sympy

from . import analysis, edge
from .circuit import S, CElement, Control
from .errors import SheetError
from .model import Loc
from .sections import Dets
from .steps import Equation, Step


@dataclass
class Replace:
    instance: str
    port: str
    port2: str
    compare: bool
    loc: Loc
    locs: tuple            # locations of instance, port, port2


def replacements_of(sheet) -> list:
    """The ``replace`` statements of a sheet (parsed into :class:`derive.model.Replacement`)."""
    return [Replace(r.instance, r.port, r.port2, r.compare, r.loc, r.name_locs)
            for r in sheet.replacements]


def _model_of(circuit, rep, options):
    members = [e for e in circuit.elements if e.name.startswith(rep.instance + ".")]
    if not members:
        raise SheetError(f"replace: no instance {rep.instance!r} (an instance is named by "
                         "'use BLOCK NAME (...)')", rep.locs[0].line, rep.locs[0].col)
    for p, loc in zip((rep.port, rep.port2), rep.locs[1:]):
        if p not in circuit.ports:
            raise SheetError(f"replace: unknown port {p!r}", loc.line, loc.col)
    p1, p2 = circuit.ports[rep.port][:2], circuit.ports[rep.port2][:2]
    touched = {n for e in members for n in e.nodes} | set(p1) | set(p2)
    ground = circuit.ground if circuit.ground in touched else p1[1]
    sub = dataclasses.replace(circuit, ground=ground, elements=members, requests=[],
                              nodes=[ground] + [n for n in circuit.nodes
                                                if n in touched and n != ground])
    ctx = analysis.Context(sub, options)
    req = SimpleNamespace(port=rep.port, port2=rep.port2, loc=rep.loc)
    dets = Dets(ctx, req, sub)
    rin, gain, rout = (dets.ratio(*a) for a in ((-1, "D1", "D"), (1, "D12", "D1"),
                                                 (-1, "DM", "D1")))
    if gain is None or rout is None:
        raise SheetError(f"replace: {rep.instance} has no model from {rep.port} to "
                         f"{rep.port2} (its input is shorted inside the section)",
                         rep.loc.line, rep.loc.col)
    e = {"rin": edge.to_sympy(rin) if rin is not None else None,
         "gain": edge.to_sympy(gain), "rout": edge.to_sympy(rout)}
    # each model part against the section's determinants computed afresh (steps.Equation)
    checks = {k: dets.check_ratio(e[k], *a) for k, a in
              (("rin", (-1, "D1", "D")), ("gain", (1, "D12", "D1")), ("rout", (-1, "DM", "D1")))
              if e[k] is not None}
    return members, p1, p2, e, dets.unilateral, checks


def _kind(expr):
    return "impedance" if S in expr.free_symbols else "resistor"


def substitute(circuit, options):
    """The circuit with every ``replace``d instance put as its three-element model."""
    reps = replacements_of(circuit.sheet)
    if not reps:
        return circuit
    c, info = circuit, []
    for rep in reps:
        members, p1, p2, e, unilateral, checks = _model_of(c, rep, options)
        for r in c.requests:
            if r.element is not None and r.element.startswith(rep.instance + "."):
                raise SheetError(f"{r.element!r} is inside {rep.instance}, which is replaced by "
                                 "its model", r.loc.line, r.loc.col)
        inst, loc = rep.instance, rep.loc
        new = []
        if e["rin"] is not None:
            new.append(CElement(f"{inst}.rin", _kind(e["rin"]), p1, e["rin"], loc,
                                internal=True, part_of=inst))
        drive = p2[0] if e["rout"] == 0 else f"{inst}.x"
        new.append(CElement(f"{inst}.E", "vsource", (drive, p2[1]), None, loc,
                            [(e["gain"], Control("across", nodes=p1))], internal=True,
                            part_of=inst))
        if e["rout"] != 0:
            new.append(CElement(f"{inst}.rout", _kind(e["rout"]), (drive, p2[0]), e["rout"],
                                loc, internal=True, part_of=inst))
        gone = {m.name for m in members}
        elements = [x for x in c.elements if x.name not in gone] + new
        used = {n for x in elements for n in x.nodes}
        nodes = [n for n in c.nodes if n in used or n == c.ground]
        nodes += [n for n in (drive,) if n not in nodes]
        c = dataclasses.replace(c, elements=elements, nodes=nodes)
        info.append({"rep": rep, "exprs": e, "unilateral": unilateral, "checks": checks})
    c.model_substitutions = info
    c.full_circuit = circuit
    return c


def _innermost(fn):
    while hasattr(fn, "__wrapped__"):
        fn = fn.__wrapped__
    return fn


def _note(ctx, req, result, fn):
    from .printing import to_text
    subs = ctx.circuit.model_substitutions
    for s in subs:
        rep, e = s["rep"], s["exprs"]
        eqs = [Equation(sympy.Symbol(f"{rep.instance}_{k}"), v) for k, v in e.items()
               if v is not None]
        for eq, k in zip(eqs, [k for k, v in e.items() if v is not None]):
            eq.mark("system", *s.get("checks", {}).get(k, (False, None)))
        result.steps.insert(0, Step(
            f"{rep.instance} is replaced by its model from {rep.port} to {rep.port2}: "
            + ("rin across " + rep.port + ", " if e["rin"] is not None else "no rin (open), ")
            + f"a source gain·v({rep.port}) behind rout at {rep.port2}"
            + ("" if s["unilateral"] else " (the section is not unilateral: the model "
               "neglects its reverse transmission)") + ".", eqs, kind="substitution"))
        result.steps[0].verify()
    result.extra["substitution"] = [
        {"instance": s["rep"].instance, "from": s["rep"].port, "to": s["rep"].port2,
         "unilateral": s["unilateral"],
         **{k: (to_text(v) if v is not None else None) for k, v in s["exprs"].items()}}
        for s in subs]
    if any(s["rep"].compare for s in subs):
        full = _innermost(fn)(analysis.Context(ctx.circuit.full_circuit, ctx.options), req)
        err = {}
        for name, q in result.quantities.items():
            f = full.quantities.get(name)
            if f is None or q.value is None or f.value is None:
                err[name] = {"model": _f(q.value), "full": _f(f.value if f else None),
                             "error": None, "relative": None}
                continue
            d = complex(q.value) - complex(f.value)
            err[name] = {"model": _f(q.value), "full": _f(f.value), "error": _f(d),
                         "relative": _f(d / complex(f.value)) if f.value != 0 else None}
        result.extra["model_error"] = err
        rows = [[n, str(v["model"]), str(v["full"]), str(v["relative"])] for n, v in err.items()]
        result.steps.append(Step("Error of the section-model result against the full circuit "
                                 "at nominal values.", kind="substitution",
                                 table=[["quantity", "with model", "full circuit",
                                         "relative error"]] + rows))
        result.steps[-1].verify()
    return result


def _f(v):
    if v is None:
        return None
    v = complex(v)
    return v.real if v.imag == 0 else None


def install():
    """Wrap result handlers so that results on a substituted circuit say so."""
    for q in ("thevenin", "norton", "vth", "rth", "isc", "rn", "resistance", "impedance",
              "voltage", "gain", "current", "model", "twoport"):
        fn = analysis.HANDLERS.get(q)
        if fn is None or getattr(fn, "_reuse", False):
            continue

        def wrapped(ctx, req, _fn=fn):
            out = _fn(ctx, req)
            if getattr(ctx.circuit, "model_substitutions", None):
                _note(ctx, req, out, _fn)
            return out
        wrapped._reuse = True
        wrapped.__wrapped__ = fn
        analysis.HANDLERS[q] = wrapped
    analysis.HANDLERS["replace"] = substitute
