"""Steps of a hand derivation for port, gain and current requests, every one verified.

Where the network seen from the port reduces by series and parallel combination and source
transformations, the reduction is shown one move at a time (:mod:`derive.reduce` records the
moves); otherwise the nodal equations, their matrix form and Cramer's rule
(:mod:`derive.derivation_nodal`). Then the Thévenin/Norton cross-check and the values at
nominal values. Every equation is checked against the solver's exact result before the
steps are returned; a failed check is a bug and raises.

>>> import derive
>>> rec = derive.derive_text('''voltage source V between a and gnd = 10 V
... resistor R1 between a and b = 1 kohm
... resistor R2 between b and gnd = 4 kohm
... port out between b and gnd
... find thevenin at out''')
>>> steps = rec.results[0].steps
>>> [s.kind for s in steps]
['port', 'reduction', 'reduction', 'result', 'check', 'value', 'value']
>>> all(s.verified for s in steps)
True
"""
from __future__ import annotations

import sympy

from . import edge, forms, reduce
from .derivation_nodal import Nodal, cramer_step, equation_steps
from .steps import Equation, Step, equal
from .units import format_eng

TWIN = {"rn": "rth", "resistance": "rth", "impedance": "rth", "voltage": "vth"}


class StepFailed(AssertionError):
    """A displayed equation did not verify: a bug in derive, never the user's sheet."""


def port_steps(ctx, req, out) -> list:
    """The verified steps of a ``_basic`` request result ``out``."""
    refs = _Refs(out.quantities)
    steps = []
    if req.quantity == "current":
        steps += _current_steps(ctx, req, out, refs)
    else:
        red = _reduction_steps(ctx, req, out, refs)
        steps += red if red is not None else _nodal_port_steps(ctx, req, out, refs)
        if req.quantity in ("thevenin", "norton"):
            steps += _cross_check(ctx, req)
    for q in out.quantities.values():
        steps.append(_value_step(ctx, q, refs.ratio(q.name)))
    for st in steps:
        if not st.verify():
            bad = [e for e in st.equations if not e.verified]
            raise StepFailed(f"internal check failed in the derivation of {req.text!r}: "
                             f"{st.text} ({bad[0].lhs} = {bad[0].rhs})")
    return steps


class _Refs(dict):
    """The solver's exact results of a request: ``refs[name]`` is the sympy form (built
    once, on first use: only the nodal route displays it), ``refs.ratio(name)`` the exact
    Ratio itself (None where the result was not expanded)."""

    def __init__(self, quantities):
        super().__init__()
        self._q = quantities

    def ratio(self, name):
        q = self._q.get(name)
        return q.ratio if q is not None else None

    def get(self, name, default=None):
        if name not in self._q:
            return default
        return self[name]

    def __missing__(self, name):
        q = self._q[name]
        e = None
        if q.ratio is not None:
            e = q.expr if (q.form == "expanded" and q.expr is not None) else edge.to_sympy(q.ratio)
        self[name] = e
        return e


def _agrees_with_ratio(expr, defs, ratio, points: int = 3, tries: int = 20):
    """Whether ``expr`` (with named intermediates ``defs``) equals the exact ``ratio``,
    by exact evaluation at random rational points: the ratio's numerator and denominator in
    flint at the ring variables' values, ``expr`` by :mod:`derive.exact_eval` (Schwartz-
    Zippel, as in :func:`derive.forms.product_identity_holds`). Points where a denominator
    vanishes are redrawn; too few usable points is False. None where ``expr`` is not a
    rational function or a value is not rational (the caller falls back to sympy)."""
    import random
    import flint
    from .exact_eval import value, values_in_order
    system = ratio.system
    syms = set(expr.free_symbols)
    for v in defs.values():
        syms |= v.free_symbols
    for v in system.vars:
        syms |= v.expr.free_symbols
    syms -= set(defs)
    syms = sorted(syms, key=str)
    # a symbol behind a reciprocal ring variable (a resistance R, ring variable 1/R) takes
    # values 1/k: the ring variables are then integers and the large determinants are
    # evaluated in integer arithmetic (any point serves Schwartz-Zippel equally)
    recip = {v.expr for v in system.vars if v.kind == "recip" and v.expr.is_Symbol}
    rnd = random.Random(17)
    passed = 0
    for _ in range(tries):
        pt = {x: (sympy.Rational(1, rnd.randint(1, 10 ** 9)) if x in recip
                  else sympy.Integer(rnd.randint(1, 10 ** 9))) for x in syms}
        if system.vars:
            vals = edge.var_values(system, pt)
            if vals is None or not isinstance(vals, list):
                return None
        else:
            vals = [flint.fmpq(0)] * ratio.num.context().nvars()
        den = ratio.den(*vals)
        if den == 0:
            continue
        want = ratio.num(*vals) / den
        try:
            env = values_in_order(defs, pt)
            got = value(expr, env) if env is not None else None
        except ZeroDivisionError:
            continue
        if got is None:
            return None
        if got != want:
            return False
        passed += 1
        if passed == points:
            return True
    return False


def _check(ctx, req, eq: Equation, ref, nodal_form=None, ratio=None):
    """Verify ``eq.rhs`` against the solver's exact result: its Ratio ``ratio`` evaluated
    exactly at random rational points, else its sympy form ``ref``, or, where the result was
    not expanded, an exact solve of the nodal equations at random rational points."""
    if ratio is not None:
        ok = _agrees_with_ratio(eq.rhs, eq.defs, ratio)
        if ok is not None:
            eq.verified = ok
            return eq
        ref = edge.to_sympy(ratio)
    if ref is not None:
        eq.check = ref
        return eq
    from .derivation_nodal import _random_solve_agrees
    nodal = _nodal(ctx)
    form, b = nodal_form
    eq.verified = _random_solve_agrees(nodal, form, b, eq.rhs, defs=eq.defs)
    return eq


def _inline(e, defs):
    for s, x in reversed(list(defs.items())):
        e = e.xreplace({s: x})
    return e


def _nodal(ctx, begin=False) -> Nodal:
    if "nodal" not in ctx.cache:
        ctx.cache["nodal"] = Nodal(ctx)
    if begin:
        ctx.cache["nodal"].begin()
    return ctx.cache["nodal"]


def _nodal_forms(ctx, req, base):
    """(linear form in the unknowns, right-hand side) of a port quantity."""
    nodal = _nodal(ctx)
    plus, minus = ctx.port(req.port)
    form = nodal.v(plus) - nodal.v(minus)
    if base == "rth":
        return form, nodal.test_vector(plus, minus)
    if base == "gain":
        return form, nodal.rhs_for(only=req.source)
    return form, nodal.b


# ------------------------------------------------------------------ reduction
def _label(b) -> str:
    if b.members == [b.name]:
        return b.name
    return "the equivalent of " + ", ".join(b.members[:-1]) + " and " + b.members[-1]


def _reduction_steps(ctx, req, out, refs):
    bases = {n: TWIN.get(n, n) for n in out.quantities}
    need_src = any(b in ("vth", "isc", "gain") for b in bases.values())
    res = reduce.reduction(ctx, req.port, zero=not need_src)
    if res is None or res[0] is None or res[0].ideal_current:
        return None
    final, moves, defs = res
    if "isc" in bases.values() and final.Z == 0:
        return None
    c = ctx.circuit
    subs = ctx.numeric_subs()
    srcs = [e.name for e in c.elements if e.independent_source]
    if req.quantity == "gain":
        env = reduce.source_values(c, subs, only=req.source)
    else:
        env = reduce.source_values(c, subs, none=not need_src)
    defs = {s: e.xreplace(env) for s, e in defs}
    plus, minus = ctx.port(req.port)
    steps = [Step(_intro(c, req, plus, minus, need_src, srcs), [], [], kind="port")]
    for m in moves:
        steps.append(_move_step(m, env, defs))
    E, Z = final.E.xreplace(env), final.Z
    eqs = []
    for n, q in out.quantities.items():
        base = bases[n]
        rhs = {"vth": E, "gain": E, "rth": Z}.get(base, E / Z if Z != 0 else None)
        eq = Equation(sympy.Symbol(n), rhs, defs=dict(defs))
        ratio = refs.ratio(n)
        eqs.append(_check(ctx, req, eq, None, (None if ratio is not None
                                               else _nodal_forms(ctx, req, base)), ratio))
        if q.expr is not None and (q.expr != rhs):
            e2 = Equation(sympy.Symbol(n), q.expr)
            eqs.append(_check(ctx, req, e2, None, (None if ratio is not None
                                                   else _nodal_forms(ctx, req, base)), ratio))
    what = (f"The port {req.port} now sees a single branch from {plus} to {minus}: its "
            "open-circuit voltage and its impedance are the results" if need_src else
            f"The port {req.port} now sees a single impedance between {plus} and {minus}")
    if any(b == "isc" for b in bases.values()):
        what += "; the short-circuit current is the branch's voltage over its impedance"
    steps.append(Step(what + ". Substituted back and compared with the exact nodal "
                      "solution:", eqs, [], kind="result"))
    return steps


def _intro(c, req, plus, minus, need_src, srcs):
    head = f"Port {req.port}: + at node {plus}, - at node {minus}."
    if req.quantity == "gain":
        others = [s for s in srcs if s != req.source]
        return (head + f" The gain is the open-circuit voltage per unit of {req.source}: "
                f"{req.source} is set to 1" + (", and " + ", ".join(others) +
                                               " to zero" if others else "") +
                ". The network reduces by series and parallel combination:")
    if not need_src:
        return head + " " + _zeroed_text(c) + " The rest reduces by series and parallel " \
            "combination:"
    return head + " The network seen from the port reduces by series and parallel " \
        "combination and source transformations, one move at a time:"


def _zeroed_text(c) -> str:
    vs = [e.name for e in c.elements if e.independent_source and e.kind == "vsource"]
    cs = [e.name for e in c.elements if e.independent_source and e.kind == "isource"]
    parts = []
    if vs:
        parts.append("voltage source" + ("s " if len(vs) > 1 else " ") + ", ".join(vs) +
                     (" become short circuits" if len(vs) > 1 else " becomes a short circuit"))
    if cs:
        parts.append("current source" + ("s " if len(cs) > 1 else " ") + ", ".join(cs) +
                     (" become open circuits" if len(cs) > 1 else " becomes an open circuit"))
    if not parts:
        return "The circuit has no independent sources to set to zero."
    return "Independent sources set to zero: " + "; ".join(parts) + "."


def _zname(r, defs):
    return r.Z if r.Z in defs else sympy.Symbol(f"Zeq{r.name}")


def _vname(r, el, defs):
    return el if el in defs else sympy.Symbol(f"Veq{r.name}")


def _move_step(m, env, defs) -> Step:
    kind, parts, r = m["move"], m["parts"], m["result"]
    if kind == "drop":
        b = parts[0]
        return Step(f"Nothing else connects at node {m['node']}, so {_label(b)} carries no "
                    "current and does not affect the port; it is removed.", [], b.members,
                    kind="reduction")
    x, y = parts
    members = x.members + y.members
    if kind == "series":
        if x.b != m["node"]:
            x = x.flipped()
        if y.a != m["node"]:
            y = y.flipped()
        if x.ideal_current or y.ideal_current:
            i, t = (x, y) if x.ideal_current else (y, x)
            return Step(f"{_label(i)} is a current source in series with {_label(t)} through "
                        f"node {m['node']}: the branch current stays {i.K.xreplace(env)}, "
                        f"whatever {_label(t)} is; {_label(t)} is absorbed.", [], members,
                        kind="reduction")
        zl = _zname(r, defs)
        eqs = [Equation(zl, x.Z + y.Z, check=r.Z, defs=_with(defs, zl, r.Z))] \
            if r.Z in defs else []
        ex, ey = x.E.xreplace(env), y.E.xreplace(env)
        el = r.E.xreplace(env)
        if ex != 0 and ey != 0 and el in defs:
            eqs.append(Equation(_vname(r, el, defs), ex + ey, check=el, defs=defs))
        if not eqs:
            return Step(f"{_label(x)} and {_label(y)} are in series: nothing else connects at "
                        f"node {m['node']}, so they form one branch, a source {el} behind "
                        f"{r.Z}.", [], members, kind="reduction")
        return Step(f"{_label(x)} and {_label(y)} are in series: nothing else connects at node "
                    f"{m['node']}, so they carry the same current; impedances (and source "
                    "voltages) add.", eqs, members, kind="reduction")
    if y.a != x.a:
        y = y.flipped()
    between = f"between nodes {x.a} and {x.b}"
    if x.ideal_current and y.ideal_current:
        return Step(f"{_label(x)} and {_label(y)} are current sources in parallel {between}: "
                    "their currents add.", [], members, kind="reduction")
    if x.ideal_current or y.ideal_current:
        i, t = (x, y) if x.ideal_current else (y, x)
        k = i.K.xreplace(env)
        el = r.E.xreplace(env)
        lhs = _vname(r, el, defs)
        return Step(f"Source transformation: the current source {_label(i)} ({k}) in parallel "
                    f"with {_label(t)} {between} becomes a voltage source in series with "
                    f"{_label(t)}.", [Equation(lhs, t.E.xreplace(env) - k * t.Z,
                                               check=el, defs=defs)], members,
                    kind="reduction")
    if x.Z == 0 or y.Z == 0:
        v, o = (x, y) if x.Z == 0 else (y, x)
        return Step(f"{_label(v)} is an ideal voltage source directly across {_label(o)} "
                    f"{between}: the voltage there is fixed whatever {_label(o)} draws, so "
                    f"{_label(o)} does not affect the port and is removed.", [], members,
                    kind="reduction")
    zl = _zname(r, defs)
    d = _with(defs, zl, r.Z)
    eqs = [Equation(zl, x.Z * y.Z / (x.Z + y.Z), check=r.Z, defs=d)]
    ex, ey = x.E.xreplace(env), y.E.xreplace(env)
    text = f"{_label(x)} and {_label(y)} are in parallel {between}"
    if ex != 0 or ey != 0:
        srcs = [f"{_label(b)} (voltage {e} behind {b.Z}) becomes a current source {e}/{b.Z} "
                f"in parallel with {b.Z}" for b, e in ((x, ex), (y, ey)) if e != 0]
        text = ("Source transformation: " + "; ".join(srcs) + ". " + text +
                ": the currents add, the impedances combine in parallel, and the result "
                "transforms back into a voltage source behind the parallel impedance")
        el = r.E.xreplace(env)
        lhs = _vname(r, el, defs)
        eqs.append(Equation(lhs, zl * (ex / x.Z + ey / y.Z), check=el, defs=d))
    return Step(text + ".", eqs, members, kind="reduction")


def _with(defs, sym, value):
    d = dict(defs)
    if sym not in d:
        d[sym] = value
    return d


# ------------------------------------------------------------------ nodal
def _nodal_port_steps(ctx, req, out, refs):
    nodal = _nodal(ctx, begin=True)
    plus, minus = ctx.port(req.port)
    why = ("The network does not reduce by series and parallel combination alone "
           "(dependent sources, op-amps or a bridge), so it is solved by nodal analysis.")
    if any(e.dependent or e.kind == "nullor" for e in ctx.circuit.elements):
        why = ("The circuit has dependent sources or op-amps, so it is solved by (modified) "
               "nodal analysis.")
    steps = [Step(f"Port {req.port}: + at node {plus}, - at node {minus}. " + why, [],
                  kind="port")]
    steps += equation_steps(nodal)
    names = list(out.quantities)
    if "isc" in names:          # isc = vth/rth: both first
        names = ["vth"] + [n for n in names if n != "isc"] + ["isc"]
    for n in names:
        base = TWIN.get(n, n)
        q = out.quantities.get(n)
        ref = (refs.get(n) if refs.get(n) is not None else _ref(q)) if q is not None \
            else _exact(ctx, req, n)
        if base in ("vth", "gain", "rth"):
            form, b = _nodal_forms(ctx, req, base)
            why = {"vth": f"Open-circuit voltage of port {req.port}: the difference of its node "
                          "voltages.",
                   "gain": f"Gain from {req.source}: {req.source} set to 1, the other "
                           "independent sources to zero; the port's open-circuit voltage.",
                   "rth": f"Resistance seen into port {req.port}: {_zeroed_text(ctx.circuit)} "
                          "Dependent sources stay. A 1 A test current is driven into node "
                          f"{plus} and out of node {minus}; the port voltage is then the "
                          "resistance."}[base]
            steps.append(cramer_step(nodal, n, form, b, ref, why,
                                     tag={"vth": "", "gain": "g", "rth": "t"}[base]))
        elif base == "isc":
            v, r = _exact(ctx, req, "vth"), _exact(ctx, req, "rth")
            rname = next(m for m in names if TWIN.get(m, m) == "rth")
            syms = {sympy.Symbol("vth"): v, sympy.Symbol(rname): r}
            eq = Equation(sympy.Symbol(n), sympy.Symbol("vth") / sympy.Symbol(rname),
                          check=ref, defs=syms)
            steps.append(Step("Short-circuit current: the open-circuit voltage over the "
                              "resistance seen into the port (both found above), compared with "
                              "the solver's short-circuit solution.", [eq, Equation(sympy.Symbol(n), ref)],
                              kind="result"))
    return steps


def _ref(q):
    """The closed form of a result, or (sequence, result) where only a sequence exists."""
    return q.expr if q.expr is not None else (list(q.sequence), q.in_sequence)


def _exact(ctx, req, name):
    return edge.to_sympy(forms.exact_ratio(ctx, req, name))


def _current_steps(ctx, req, out, refs):
    nodal = _nodal(ctx, begin=True)
    e = ctx.circuit.element(req.element)
    q = out.quantities["current"]
    ref = refs["current"] if refs["current"] is not None else _ref(q)
    form = nodal.current(e.name).xreplace(nodal.src_values)
    ends = f"from {e.nodes[0]} to {e.nodes[1]}" if e.kind != "nullor" else ""
    steps = [Step(f"Current through {e.name} in its reference direction ({ends}), in terms "
                  "of the nodal unknowns:", [Equation(sympy.Symbol("current"), form)],
                  [e.name], kind="port")]
    steps += equation_steps(nodal)
    steps.append(cramer_step(nodal, "current", form, nodal.b, ref,
                             f"Solving for the unknowns that the current of {e.name} needs."))
    return steps


# ------------------------------------------------------------------ checks, values
def _cross_check(ctx, req):
    if not forms.expandable(ctx):
        return []
    r = forms.exact_ratio(ctx, req, "rth")
    if r.is_zero:
        return []
    V, I, R = (sympy.Symbol(n) for n in ("vth", "isc", "rth"))
    eq = Equation(V, I * R)
    # the solver's three exact ratios compared at random rational points (never converted
    # to sympy, never multiplied out): forms.cross_check raises when the identity fails
    eq.verified = forms.cross_check(ctx, req)
    return [Step("Cross-check: the open-circuit voltage equals the short-circuit current "
                 "times the resistance seen into the port (each found independently).",
                 [eq], kind="check")]


def _value_step(ctx, q, ratio) -> Step:
    nominal = ctx.nominal
    used = set(q.expr.free_symbols) if q.expr is not None else set()
    for _, e in q.sequence:
        used |= e.free_symbols
    used -= {s for s, _ in q.sequence}
    info = ctx.circuit.symbols
    rows = [["symbol", "nominal value"]]
    for s in sorted(used, key=str):
        si = info.get(str(s))
        val = nominal.get(s)
        rows.append([si.display if si else str(s),
                     format_eng(float(val), si.unit if si else None) if val is not None
                     else "none (kept symbolic)"])
    if q.value is None:
        return Step(f"{q.name} has no single value: some symbols have no nominal value (or the "
                    "result depends on s).", [], kind="value", table=rows)
    if isinstance(q.value, complex):
        shown = str(q.value)
    else:
        shown = format_eng(q.value, q.unit)
    eqs = []
    exact = q.expr.xreplace(nominal) if q.expr is not None else None
    if exact is not None and exact.is_Rational:
        if abs(float(exact) - float(q.value)) > 1e-9 * max(abs(float(q.value)), 1e-300):
            raise StepFailed(f"value of {q.name} disagrees with its exact form")
        if len(str(exact)) <= 24:
            eqs.append(Equation(sympy.Symbol(q.name), exact,
                                check=_exact_value(ratio, nominal)))
    return Step(f"At nominal values: {q.name} = {shown}.", eqs, kind="value", table=rows)


def _exact_value(ratio, nominal):
    """The solver's exact ratio at nominal values as a sympy Rational (None if it has no
    rational value there)."""
    if ratio is None:
        return None
    vals = edge.var_values(ratio.system, nominal)
    if not isinstance(vals, list):
        return None if vals is None else edge.to_sympy(ratio).xreplace(nominal)
    if not ratio.system.vars:
        import flint
        vals = [flint.fmpq(0)] * ratio.num.context().nvars()
    den = ratio.den(*vals)
    if den == 0:
        return None
    v = ratio.num(*vals) / den
    return sympy.Rational(int(v.p), int(v.q))
