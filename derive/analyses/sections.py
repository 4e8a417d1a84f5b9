"""Section models and two-port parameters between two ports (``find model``, ``find twoport``).

Everything comes from six determinants of one stamped system (independent sources zeroed:
a voltage source is a short, a current source an open). With ``A`` the nodal matrix, ``u1``,
``u2`` the incidence vectors of the two ports (port currents enter the + terminals):

* ``D   = det A``                       (both ports open)
* ``D1  = det[[A, u1], [u1^T, 0]]``     ``D2`` likewise for port 2
* ``D12 = det[[A, u1], [u2^T, 0]]``     ``D21 = det[[A, u2], [u1^T, 0]]``
* ``DM  = det[[A, u1, u2], [u1^T, 0, 0], [u2^T, 0, 0]]``   (both ports driven)

The bordered-determinant identity ``det[[A, p], [q^T, 0]] = -q^T adj(A) p`` gives
``z_ij = -D_ji / D`` (``z11 = -D1/D``, ``z21 = -D12/D``); the Schur complement gives
``det Z = DM / D``; every other parameter set follows as a ratio of two of the six (the
Desnanot–Jacobi identity ``D·DM = D1·D2 - D12·D21`` is checked on every request). A set whose
denominator determinant is identically zero does not exist, and is said so.

A voltage source whose two nodes are the nodes of the input port is the signal source: it is
removed from the section (for ``twoport`` this holds for both ports).
"""
from __future__ import annotations

import dataclasses

import sympy

from derive.forms import results as analysis
from derive.solver import convert as edge
from derive.errors import SheetError
from derive.solver.stamping import System
from derive.solver.cramer import Ratio, Solver
from derive.derivation.steps import POINTS, Equation, Step

#: parameter -> (sign, numerator det, denominator det, unit)
PARAMS = {
    "z11": (-1, "D1", "D", "ohm"), "z12": (-1, "D21", "D", "ohm"),
    "z21": (-1, "D12", "D", "ohm"), "z22": (-1, "D2", "D", "ohm"),
    "y11": (-1, "D2", "DM", "S"), "y12": (1, "D21", "DM", "S"),
    "y21": (1, "D12", "DM", "S"), "y22": (-1, "D1", "DM", "S"),
    "h11": (-1, "DM", "D2", "ohm"), "h12": (1, "D21", "D2", "V/V"),
    "h21": (-1, "D12", "D2", "A/A"), "h22": (-1, "D", "D2", "S"),
    "g11": (-1, "D", "D1", "S"), "g12": (-1, "D21", "D1", "A/A"),
    "g21": (1, "D12", "D1", "V/V"), "g22": (-1, "DM", "D1", "ohm"),
    "a": (1, "D1", "D12", "V/V"), "b": (-1, "DM", "D12", "ohm"),
    "c": (-1, "D", "D12", "S"), "d": (1, "D2", "D12", "A/A"),
}
SETS = {"z": ("z11", "z12", "z21", "z22"), "y": ("y11", "y12", "y21", "y22"),
        "h": ("h11", "h12", "h21", "h22"), "g": ("g11", "g12", "g21", "g22"),
        "abcd": ("a", "b", "c", "d")}
WHY = {"D": "with both ports open the section's node voltages are not fixed (a series "
            "element between the ports, or a port that floats)",
       "DM": "with both ports shorted the section's currents are not fixed (the ports are "
             "joined by an ideal source or a wire)",
       "D1": "with port 1 driven and port 2 open the section is singular (port 1 is shorted "
             "inside the section)",
       "D2": "with port 2 driven and port 1 open the section is singular (port 2 is shorted "
             "inside the section)",
       "D12": "no signal passes from port 1 to port 2 (z21 = 0)"}

#: the voltage-amplifier model and the three other standard forms: name -> (sign, num, den, unit, meaning)
MODEL = {
    "rin": (-1, "D1", "D", "ohm", "input resistance, P2 open (z11)"),
    "gain": (1, "D12", "D1", "V/V", "open-circuit voltage of P2 per volt at P1 (g21)"),
    "rout": (-1, "DM", "D1", "ohm", "output resistance, P1's voltage held at zero (1/y22)"),
}
OTHER_FORMS = [
    ("transconductance", [
        ("rin_sc", -1, "DM", "D2", "ohm", "input resistance, P2 shorted (1/y11)"),
        ("gm", -1, "D12", "DM", "S", "current out of P2's + terminal into a short per volt at "
                                   "P1 (-y21)"),
        ("rout", -1, "DM", "D1", "ohm", "output resistance, P1 shorted (1/y22)")]),
    ("transresistance", [
        ("rin", -1, "D1", "D", "ohm", "input resistance, P2 open (z11)"),
        ("rm", -1, "D12", "D", "ohm", "open-circuit voltage of P2 per ampere into P1 (z21)"),
        ("rout_open", -1, "D2", "D", "ohm", "output resistance, P1 open (z22)")]),
    ("current amplifier", [
        ("rin_sc", -1, "DM", "D2", "ohm", "input resistance, P2 shorted (h11)"),
        ("ai", 1, "D12", "D2", "A/A", "current out of P2's + terminal into a short per ampere "
                                      "into P1 (-h21)"),
        ("rout_open", -1, "D2", "D", "ohm", "output resistance, P1 open (1/h22)")]),
]


def signal_sources(circuit, plus, minus) -> list:
    """Independent voltage sources connected directly across the node pair (plus, minus)."""
    return [e for e in circuit.elements
            if e.kind == "vsource" and e.independent_source and set(e.nodes) == {plus, minus}]


def section_circuit(ctx, req, ports):
    """The circuit with the signal sources across ``ports`` removed; (circuit, removed)."""
    c = ctx.circuit
    removed = []
    for p in ports:
        removed += [e for e in signal_sources(c, *ctx.port(p)) if e not in removed]
    gone = {e.name for e in removed}
    for e in c.elements:
        for _coef, ctl in e.controls:
            if ctl.kind == "through" and ctl.element in gone:
                raise SheetError(f"{e.name!r} is controlled by the current of signal source "
                                 f"{ctl.element!r}, which is not part of the section",
                                 req.loc.line, req.loc.col)
    return dataclasses.replace(c, elements=[e for e in c.elements if e.name not in gone]), removed


class Dets:
    """The six determinants of a section between two ports (see the module docstring)."""

    def __init__(self, ctx, req, circuit):
        self.system = System(circuit, ctx.numeric_subs())
        solver = Solver(self.system, ctx.options.max_terms, req.loc)   # a section's own
        s = self.system
        u1 = s.port_vector(*ctx.port(req.port))
        u2 = s.port_vector(*ctx.port(req.port2))
        A = s.A
        b11 = A.bordered(u1, u1)
        self.m = {"D": A, "D1": b11, "D2": A.bordered(u2, u2), "D12": A.bordered(u1, u2),
                  "D21": A.bordered(u2, u1), "DM": b11.bordered(u2, u2)}
        self.d = {k: solver.det(m) for k, m in self.m.items()}
        d = self.d
        if not (d["D"] * d["DM"] - d["D1"] * d["D2"] + d["D12"] * d["D21"]).is_zero():
            raise AssertionError("internal check failed: Desnanot-Jacobi identity of the "
                                 "section determinants")

    def ratio(self, sign, num, den):
        """The exact Ratio ``sign*num/den``, or None where ``den`` is identically zero."""
        if self.d[den].is_zero():
            return None
        n = self.d[num] if sign > 0 else -self.d[num]
        return Ratio(n, self.d[den], self.system).cancel()

    def numeric_check(self, expr, fn, extra=(), points=POINTS, seed=13):
        """(agrees, points used): ``expr`` (in the circuit's symbols and ``extra``) against
        ``fn(dets, point)``, where ``dets`` are the six determinants computed afresh by
        python-flint's ``fmpq_mat.det`` from the stamped matrices evaluated at random
        rational points (independent of the fraction-free kernel). Points where a needed
        determinant vanishes (``fn`` returns None) or ``expr`` is undefined are redrawn."""
        import random
        import flint
        from derive.derivation.steps import ATTEMPTS, Program, random_point
        try:
            sysm = self.system
            var_prog = Program([1 / v.expr if v.kind == "recip" else v.expr
                                for v in sysm.vars])
            e_prog = Program([expr])
            syms = var_prog.symbols() | e_prog.symbols() | set(extra)
            rnd = random.Random(seed)
            used = 0
            for _ in range(ATTEMPTS * points):
                pt = random_point(rnd, syms)
                try:
                    vals = var_prog.run(pt)
                    dets = {}
                    for k, m in self.m.items():
                        rows = [[m.get(i, j) for j in range(m.n)] for i in range(m.n)]
                        num = [p(*vals) if vals else p for row in rows for p in row]
                        dets[k] = flint.fmpq_mat(m.n, m.n, [_fq(x) for x in num]).det()
                    want = fn(dets, pt)
                    if want is None:
                        continue
                    got = e_prog.run(pt)[0]
                except ZeroDivisionError:
                    continue
                if got != want:
                    return False, None
                used += 1
                if used == points:
                    break
            return used > 0, used
        except Exception:
            return False, None

    def check_ratio(self, expr, sign, num, den):
        """``expr`` against ``sign·num/den`` of the freshly computed determinants."""
        return self.numeric_check(
            expr, lambda d, _pt: None if d[den] == 0 else sign * d[num] / d[den])

    @property
    def unilateral(self) -> bool:
        return self.d["D21"].is_zero()


def _fq(x):
    import flint
    if isinstance(x, flint.fmpq):
        return x
    if isinstance(x, (int, flint.fmpz)):
        return flint.fmpq(x)
    d = x.to_dict() if hasattr(x, "to_dict") else {}
    return flint.fmpq(d.get(tuple([0] * len(next(iter(d)))), 0)) if d else flint.fmpq(0)


def quantity(ctx, ratio, name, unit):
    q = analysis.QuantityResult(name, edge.to_sympy(ratio), None, unit, ratio=ratio)
    q.value = edge.value_at(ratio, ctx.nominal)
    return q


def _expr_json(ctx, ratio, unit):
    e = edge.to_sympy(ratio)
    return {"expr": e, "value": edge.finite_float(edge.value_at(ratio, ctx.nominal)),
            "unit": unit}


def _load_symbol(circuit) -> sympy.Symbol:
    name = "Zload"
    while name in circuit.symbols:
        name += "_"
    return sympy.Symbol(name)


def model_handler(ctx, req) -> analysis.RequestResult:
    out = analysis.RequestResult(req)
    circuit, removed = section_circuit(ctx, req, [req.port])
    dets = Dets(ctx, req, circuit)
    for name, (sign, num, den, unit, _m) in MODEL.items():
        r = dets.ratio(sign, num, den)
        if r is None and name == "rin" and not dets.d["D1"].is_zero():
            out.extra.setdefault("infinite", []).append("rin")
            out.steps.append(Step(f"With {req.port2} open no current flows into {req.port}: "
                                  "rin is infinite (an open circuit in the model).",
                                  kind="model"))
            continue
        if r is None:
            raise SheetError(f"the model from {req.port} to {req.port2} has no {name}: "
                             + WHY[den], req.loc.line, req.loc.col)
        out.quantities[name] = quantity(ctx, r, name, unit)
    q = out.quantities
    if removed:
        out.steps.append(_removal_step(ctx, req, removed, q["gain"]))
    forms_json = {}
    for form, parts in OTHER_FORMS:
        entry = {}
        for name, sign, num, den, unit, meaning in parts:
            r = dets.ratio(sign, num, den)
            entry[name] = _expr_json(ctx, r, unit) if r is not None else \
                {"exists": False, "why": WHY[den]}
            entry[name]["meaning"] = meaning
        forms_json[form] = entry
    out.extra["forms"] = forms_json
    out.extra["unilateral"] = dets.unilateral
    out.steps.append(_model_step(req, q, dets))
    if not dets.unilateral:
        zl = _load_symbol(ctx.circuit)
        sc = dets.ratio(-1, "DM", "D2")
        op = dets.ratio(-1, "D1", "D")      # None: rin is infinite with the output open
        loaded = _loaded_rin(dets, zl)
        out.extra["loaded_rin"] = {
            "load": str(zl), "expr": loaded,
            "shorted": _expr_json(ctx, sc, "ohm") if sc is not None else None,
            "open": _expr_json(ctx, op, "ohm") if op is not None else None}
        out.steps.append(Step(
            f"The section is not unilateral (z12 ≠ 0): its input resistance depends on the load "
            f"{zl} across {req.port2}. rin above is for {req.port2} open; with {req.port2} "
            "shorted it is rin_sc.", [_loaded_equation(dets, zl, loaded)],
            kind="model"))
    else:
        out.steps.append(Step(f"The section is unilateral (z12 = 0): rin does not depend on "
                              f"the load across {req.port2}.", kind="model"))
    out.extra["block"] = block_text(req)
    for st in out.steps:
        st.verify()
    return out


def _loaded_rin(dets, zl):
    """rin with load ``zl`` across port 2: (DM - zl*D1)/(zl*D - D2), in the symbols."""
    e = {k: _poly_sym(dets, k) for k in ("D", "D1", "D2", "DM")}
    return sympy.factor(sympy.cancel((e["DM"] - zl * e["D1"]) / (zl * e["D"] - e["D2"])))


def _loaded_equation(dets, zl, loaded) -> Equation:
    """rin with a load, checked against z11 - z12·z21/(z22 + zl) (two-port relation) from
    determinants computed afresh at random rational points (``verified_by`` "system")."""
    def z_form(d, pt):
        if d["D"] == 0:
            return None
        z11, z12, z21, z22 = (-d[k] / d["D"] for k in ("D1", "D21", "D12", "D2"))
        zv = pt[zl]
        if z22 + zv == 0:
            return None
        return z11 - z12 * z21 / (z22 + zv)
    eq = Equation(sympy.Symbol("rin_loaded"), loaded)
    if dets.d["D"].is_zero():
        return eq           # no z parameters to compare with: not verified
    eq.mark("system", *dets.numeric_check(loaded, z_form, extra=(zl,)))
    return eq


def _poly_sym(dets, key):
    """A determinant as a sympy expression in the circuit symbols (common factors kept)."""
    one = dets.system.ctx.constant(1)
    return edge.to_sympy(Ratio(dets.d[key], one, dets.system)) if not dets.d[key].is_zero() \
        else sympy.Integer(0)


def _model_step(req, q, dets):
    z = {n: edge.to_sympy(dets.ratio(*PARAMS[n][:3])) for n in SETS["z"]
         if dets.ratio(*PARAMS[n][:3]) is not None}
    if len(z) == 4:
        eqs = [Equation(sympy.Symbol("rin"), q["rin"].expr, z["z11"]),
               Equation(sympy.Symbol("gain"), q["gain"].expr, z["z21"] / z["z11"]),
               Equation(sympy.Symbol("rout"), q["rout"].expr,
                        z["z22"] - z["z12"] * z["z21"] / z["z11"])]
    else:       # no z parameters: each against determinants computed afresh
        eqs = []
        for n in ("rin", "gain", "rout"):
            if n in q:
                eq = Equation(sympy.Symbol(n), q[n].expr)
                eq.mark("system", *dets.check_ratio(q[n].expr, *MODEL[n][:3]))
                eqs.append(eq)
    return Step(f"Section from {req.port} to {req.port2}: rin is seen into {req.port} with "
                f"{req.port2} open, gain is the open-circuit voltage of {req.port2} per volt at "
                f"{req.port}, rout is seen into {req.port2} with {req.port} shorted (checked "
                "against the z parameters).", eqs, kind="model")


def _removal_step(ctx, req, removed, gain):
    names = ", ".join(e.name for e in removed)
    st = Step(f"{names} is connected directly across {req.port}: it is the signal source, "
              "not part of the section, and is replaced by the test drive.",
              elements=[e.name for e in removed], kind="model")
    src = removed[0]
    try:
        full = ctx.solver(req.loc)          # the circuit's own solver (shared)
        g = full.vth(ctx.port(req.port2), only=src.name)
        sign = 1 if src.nodes == ctx.port(req.port) else -1
        st.equations.append(Equation(sympy.Symbol("gain"), gain.expr,
                                     sign * edge.to_sympy(g)))
        st.text += f" The gain equals that from {src.name} to {req.port2} in the full circuit."
    except SheetError:
        pass
    return st


def block_text(req) -> str:
    """The model as sheet text: a block with its three elements, ready to ``use``."""
    name = f"{req.port}_to_{req.port2}"
    return "\n".join([
        f"block model_{name} (ip, im, op, om)",
        "  resistor rin between ip and im",
        "  voltage source E between x and om = gain*across(ip, im)",
        "  resistor rout between x and op",
        "end"])


def twoport_handler(ctx, req) -> analysis.RequestResult:
    out = analysis.RequestResult(req)
    circuit, removed = section_circuit(ctx, req, [req.port, req.port2])
    dets = Dets(ctx, req, circuit)
    missing = {}
    for set_name, names in SETS.items():
        dens = {PARAMS[n][2] for n in names}
        absent = [d for d in dens if dets.d[d].is_zero()]
        if absent:
            missing[set_name] = WHY[absent[0]]
            continue
        for n in names:
            sign, num, den, unit = PARAMS[n]
            out.quantities[n] = quantity(ctx, dets.ratio(sign, num, den), n, unit)
    out.extra["missing"] = missing
    out.extra["reciprocal"] = (dets.d["D12"] - dets.d["D21"]).is_zero()
    out.extra["unilateral"] = dets.unilateral
    if removed:
        out.steps.append(Step(", ".join(e.name for e in removed) + " sit(s) directly across "
                              "a port: terminations, not part of the two-port; removed.",
                              elements=[e.name for e in removed], kind="twoport"))
    for set_name, why in missing.items():
        out.steps.append(Step(f"The {set_name} parameters do not exist: {why}.", kind="twoport"))
    out.steps.append(_conversion_step(out.quantities))
    for st in out.steps:
        st.verify()
    return out


def _conversion_step(q):
    """Conversions between the sets that exist, each checked exactly."""
    e = {n: x.expr for n, x in q.items()}
    eqs = []
    if all(k in e for k in ("z11", "y11")):
        dz = e["z11"] * e["z22"] - e["z12"] * e["z21"]
        eqs += [Equation(sympy.Symbol("y11"), e["y11"], e["z22"] / dz),
                Equation(sympy.Symbol("y21"), e["y21"], -e["z21"] / dz)]
    if all(k in e for k in ("z11", "h11")):
        eqs += [Equation(sympy.Symbol("h21"), e["h21"], -e["z21"] / e["z22"])]
    if all(k in e for k in ("z11", "a")):
        eqs += [Equation(sympy.Symbol("a"), e["a"], e["z11"] / e["z21"])]
    return Step("Parameter sets converted into each other (standard two-port conversion "
                "relations), each conversion checked exactly.", eqs, kind="twoport")

