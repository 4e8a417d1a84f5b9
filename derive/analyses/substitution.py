"""Reusing a section model: ``replace INSTANCE by model from P1 to P2 [compare]``.

The elements of a block instance (``use stage q1 (...)``: every element named ``q1.*``) are
taken alone, between the sheet's ports P1 and P2; their voltage-amplifier model (rin, gain,
rout; see :mod:`derive.analyses.sections`) is derived exactly and put in their place as three
elements ``q1.rin`` (across P1), ``q1.E`` (a voltage source ``gain·across(P1)`` referred to
P2's − node) and ``q1.rout`` (from the source to P2's + node). Every request is then answered
on the substituted circuit. :func:`derive.analyses.run.run` applies :func:`annotate` to
every result of a substituted circuit, whatever its request (``find``, ``check``, ``solve``,
``find sensitivity``, ``find tolerance``, ``find model``, ...): a note on the result that it
was computed on the model (shown in every record and by ``derive check``), the substitution
as the first step, and with ``compare`` the error against the full circuit at nominal values
(for ``check`` also the verdict on the full circuit).

The model is exact only for a unilateral section that loads nothing outside P1 and P2; the
comparison shows how far the approximation is from the full circuit.
"""
from __future__ import annotations

import dataclasses
from dataclasses import dataclass
from types import SimpleNamespace

import sympy

from derive.forms import results as analysis
from derive.solver import convert as edge
from derive.circuit.build import S, CElement, Control
from derive.errors import SheetError
from derive.sheet import quantities
from derive.sheet.model import Loc
from derive.analyses.sections import Dets
from derive.derivation.steps import Equation, Step
from derive.sheet.units import DEFAULT_DIGITS, format_value


@dataclass
class Replace:
    instance: str
    port: str
    port2: str
    compare: bool
    loc: Loc
    locs: tuple            # locations of instance, port, port2


def replacements_of(sheet) -> list:
    """The ``replace`` statements of a sheet (parsed into :class:`derive.sheet.model.Replacement`)."""
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


def _model_words(s) -> str:
    rep, e = s["rep"], s["exprs"]
    parts = (["rin"] if e["rin"] is not None else []) + ["gain", "rout"]
    return (f"{rep.instance} replaced by its section model from {rep.port} to {rep.port2} "
            f"({', '.join(parts)})" + ("" if s["unilateral"] else
                                       "; the section is not unilateral and the model "
                                       "neglects its reverse transmission"))


def _error_entry(q_value, f_value):
    if q_value is None or f_value is None:
        return {"model": _f(q_value), "full": _f(f_value), "error": None, "relative": None}
    d = complex(q_value) - complex(f_value)
    return {"model": _f(q_value), "full": _f(f_value), "error": _f(d),
            "relative": _f(d / complex(f_value)) if f_value != 0 else None}


def _compare(ctx, req, result, fn):
    """The model's error against the full circuit: every quantity of the result, and the
    port quantity the request is about (the Q of ``check``/``solve``/``find sensitivity``/
    ``find tolerance``), at nominal values; for ``check``, the verdict on the full circuit."""
    from derive.forms import select as forms
    full_ctx = analysis.Context(ctx.circuit.full_circuit, ctx.options)
    err = {}
    section = quantities.quantity(req.quantity).family == "section"
    if not section:
        full_q = {q.name: q for q in forms.port_quantities(full_ctx, req)}
        for q in forms.port_quantities(ctx, req):
            f = full_q.get(q.name)
            err[q.name] = _error_entry(q.value, f.value if f else None)
    full = None
    # a section model or two-port has no port quantity above: its own results are compared;
    # a check is answered on the full circuit too. (The root of ``solve`` at nominal values
    # is the symbol's nominal value on either circuit: its Q above is what differs.)
    if section or "holds" in result.extra:
        full = fn(full_ctx, req)
        for name, q in result.quantities.items():
            if name not in err:
                f = full.quantities.get(name)
                err[name] = _error_entry(q.value, f.value if f else None)
    return err, full


def _error_words(err, units=None, d: int = DEFAULT_DIGITS) -> str:
    out = []
    for name, v in err.items():
        u = (units or {}).get(name)
        if v["model"] is None or v["full"] is None or v["error"] is None:
            out.append(f"{name}: no error at nominal values (a symbol without a nominal "
                       "value, or a function of s)")
        elif v["relative"] is not None:
            out.append(f"{name} {format_value(v['model'], u, d)} with the model, "
                       f"{format_value(v['full'], u, d)} on the full circuit (relative error "
                       f"{format_value(v['relative'], None, d)})")
        else:
            out.append(f"{name} {format_value(v['model'], u, d)} with the model, "
                       f"{format_value(v['full'], u, d)} on the full circuit (error "
                       f"{format_value(v['error'], u, d)})")
    return "; ".join(out)


def annotate(ctx, req, result, fn):
    """Mark a result computed on a substituted circuit: a note (shown by every record and by
    ``derive check``), the substitution as the first step and in ``extra["substitution"]``,
    and with ``compare`` the model's error against the full circuit (``extra["model_error"]``,
    and for ``check`` the verdict on the full circuit in ``extra["full_circuit_holds"]``).
    Applied by :func:`derive.analyses.run.run` to every result of a substituted circuit."""
    subs = ctx.circuit.model_substitutions
    for s in reversed(subs):
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
         "unilateral": s["unilateral"], "compare": s["rep"].compare,
         **s["exprs"]}
        for s in subs]
    note = ("Computed on a substituted circuit, not on the full circuit: "
            + "; ".join(_model_words(s) for s in subs) + ".")
    if not any(s["rep"].compare for s in subs):
        note += " The model's error is not shown (add 'compare' to the replace line)."
        result.notes.append(note)
        return result
    err, full = _compare(ctx, req, result, fn)
    result.extra["model_error"] = err
    if err:
        units = {n: q.unit for n, q in result.quantities.items()}
        note += (" Model error at nominal values: " + _error_words(err, units, ctx.options.digits)
                 + ".")
    if full is not None and "holds" in result.extra:
        result.extra["full_circuit_holds"] = bool(full.extra.get("holds"))
        note += (" On the full circuit the claim " +
                 ("holds." if full.extra.get("holds") else "does not hold."))
    result.notes.append(note)
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
