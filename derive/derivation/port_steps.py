"""Steps of a hand derivation for port, gain and current requests, every one verified.

Where the network seen from the port reduces by series and parallel combination and source
transformations, the reduction is shown one move at a time (:mod:`derive.forms.series_parallel` records the
moves); otherwise the nodal equations, their matrix form and Cramer's rule
(:mod:`derive.derivation.nodal_steps`). Then the Thévenin/Norton cross-check and the values at
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

import flint
import sympy

from derive.circuit.build import S
from derive.solver import convert as edge
from derive.solver import sparse
from derive.forms import select as forms
from derive.forms import series_parallel as reduce
from derive.derivation.nodal_steps import Nodal, cramer_step, equation_steps
from derive.derivation.steps import (Equation, NotRational, Program, RatioCheck, Step,
                                     exact_value, to_float, to_rational)
from derive.sheet.quantities import twin
from derive.sheet.units import format_exact, format_value



class StepFailed(AssertionError):
    """A displayed equation did not verify: a bug in derive, never the user's sheet.
    ``steps`` holds the steps as verified (the failing ones with ``verified`` false)."""

    def __init__(self, message, steps=None):
        super().__init__(message)
        self.steps = list(steps or [])


def require_verified(steps: list, req) -> None:
    """Verify every step; the first one that fails stops the request with its equation
    (an internal error: a derived result disagreed with its independent check)."""
    failed = [st for st in steps if not st.verify()]
    if failed:
        st = failed[0]
        bad = [e for e in st.equations if not e.verified]
        where = f" ({bad[0].lhs} = {bad[0].rhs})" if bad else ""
        raise StepFailed(f"internal check failed in the derivation of {req.text!r}: "
                         f"{st.text}{where}", steps)


def port_steps(ctx, req, out) -> list:
    """The verified steps of a ``_basic`` request result ``out``."""
    # the solver's exact results, the independent side of the checks: evaluated in their
    # own ring at the check's points; their sympy form is built only where it is shown
    # (nodal steps) or a small check cancels it exactly
    refs = {n: (_reference(q.ratio) if q.ratio is not None else None)
            for n, q in out.quantities.items()}
    steps = []
    if req.quantity == "current":
        steps += _current_steps(ctx, req, out, refs)
    else:
        red = _reduction_steps(ctx, req, out, refs)
        steps += red if red is not None else _nodal_port_steps(ctx, req, out, refs)
        if req.quantity in ("thevenin", "norton"):
            steps += cross_check_step(ctx, req)
    for q in out.quantities.values():
        steps.append(_value_step(ctx, req, q))
    require_verified(steps, req)
    return steps


def check_result(ctx, req, eq: Equation, ref, nodal_form=None):
    """Verify ``eq.rhs`` against the solver's exact result ``ref`` (or, where the result was
    not expanded, an exact solve of the nodal equations at random rational points)."""
    if ref is not None:
        eq.check = ref
        return eq
    if nodal_form == "sparse":
        eq.mark("system", *_sparse_check(ctx, req, eq))
        return eq
    from derive.derivation.nodal_steps import random_solve_check
    nodal = _nodal(ctx)
    if len(nodal_form) == 4:        # isc: open-circuit voltage over resistance seen
        f1, b1, f2, b2 = nodal_form
        eq.mark("system", *random_solve_check(nodal, f1, b1, eq.rhs, defs=eq.defs,
                                               over=(f2, b2)))
        return eq
    form, b = nodal_form
    eq.mark("system", *random_solve_check(nodal, form, b, eq.rhs, defs=eq.defs))
    return eq


SPARSE_ELEMENTS = 200   # larger networks of two-terminal elements: sparse exact solves


def _sparse(ctx) -> bool:
    """Whether the checks of a port quantity use exact sparse nodal solves written from the
    elements (:func:`derive.solver.sparse.nodal_solve`, linear on chains) instead of the
    dense nodal matrix (O(n^2) memory)."""
    if "sparse" not in ctx.cache:
        c = ctx.circuit
        ctx.cache["sparse"] = len(c.elements) > SPARSE_ELEMENTS and sparse.two_terminal(c)
    return ctx.cache["sparse"]


def _sparse_value(ctx, req, name, point, subs):
    """The port quantity ``name`` at one point (Symbol -> exact value) by sparse exact
    nodal solves: ``vth``/``gain`` the open-circuit voltage (every source, or the gain's
    source at 1), ``rth`` the voltage of a 1 A test current with the sources zeroed,
    ``isc`` their ratio."""
    c = ctx.circuit
    plus, minus = ctx.port(req.port)
    sv = point.get(S)
    base = twin(name)
    if base == "isc":
        v = _sparse_value(ctx, req, "vth", point, subs)
        r = _sparse_value(ctx, req, "rth", point, subs)
        if r == 0:
            raise ZeroDivisionError("the resistance seen is 0 here")
        return v / r
    if base == "rth":
        x = sparse.nodal_solve(c, point, subs, sv, sources="none", inject=(plus, minus))
    else:
        x = sparse.nodal_solve(c, point, subs, sv,
                               sources=req.source if base == "gain" else "all")
    return x[plus] - x[minus]


def _sparse_check(ctx, req, eq) -> tuple:
    """(agrees, points): ``eq.rhs`` (through its named intermediates, in exact rational
    arithmetic) against exact sparse nodal solves of the circuit at random rational points
    (undefined points redrawn a bounded number of times)."""
    from derive.derivation.steps import ATTEMPTS, POINTS, draws
    subs = ctx.numeric_subs()
    prog = Program([eq.rhs], eq.defs)
    syms = set(prog.symbols())
    for e in ctx.circuit.elements:
        if e.value is not None:
            syms |= (e.value.xreplace(subs) if subs else e.value).free_symbols
    syms -= set(eq.defs)
    name = str(eq.lhs)
    used = 0
    seq = draws(20261203, syms)
    for _ in range(ATTEMPTS * POINTS):
        pt = next(seq)
        try:
            got = prog.run(pt)[0]
            want = _sparse_value(ctx, req, name, pt, subs)
        except ZeroDivisionError:
            continue
        if got != want:
            return False, None
        used += 1
        if used == POINTS:
            break
    return used > 0, used


def _forms_for(ctx, req, base, ref):
    """What :func:`check_result` checks against where the solver's ratio ``ref`` is
    missing: ``"sparse"`` (sparse exact solves) or the nodal forms of the quantity."""
    if ref is not None:
        return None
    return "sparse" if _sparse(ctx) else _nodal_forms(ctx, req, base)


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
    if base == "isc":           # vth/rth: both linear forms with their right-hand sides
        return form, nodal.b, form, nodal.test_vector(plus, minus)
    return form, nodal.b


# ------------------------------------------------------------------ reduction
LISTED = 12        # an equivalent of more elements is named by its first and last ones


def _label(b) -> str:
    m = b.members
    if len(m) == 1 and m.last == b.name:
        return b.name
    if len(m) > LISTED:             # bounded text per step: a long chain stays linear
        return (f"the equivalent of {len(m)} elements ({m.head[0]}, {m.head[1]}, …, {m.last}, "
                "in the order of the moves above)")
    names = list(m)
    return "the equivalent of " + ", ".join(names[:-1]) + " and " + names[-1]


def _involved(*parts) -> list:
    """The elements a move involves: every member of its parts, or, beyond ``LISTED`` in
    all, the members of its shorter part when that has at most ``LISTED`` (the element
    joined to a long chain): each step lists at most ``LISTED`` elements."""
    if sum(len(p.members) for p in parts) <= LISTED:
        return [n for p in parts for n in p.members]
    short = min(parts, key=lambda p: len(p.members))
    return list(short.members) if len(short.members) <= LISTED else []


def _move_equation(lhs, rhs, check, defs, also=()) -> Equation:
    """An equation of one move, checked in O(1): against the reducer's own definitions of
    the move's new intermediates (``check`` and ``also``), one level deep, in the names of
    the two parts (an identity in those names, so it holds whatever they stand for); only
    where that fails, against the whole chain of definitions (which then decides)."""
    local = {x: defs[x] for x in (check, *also) if isinstance(x, sympy.Symbol) and x in defs}
    eq = Equation(lhs, rhs, check=check, defs=local)
    if eq.run_check():
        return eq
    return Equation(lhs, rhs, check=check, defs=defs)


def _reduction_steps(ctx, req, out, refs):
    bases = {n: twin(n) for n in out.quantities}
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
        st = _move_step(m, env, defs)
        if st.text.startswith("the equivalent of "):    # a sentence starts with a capital
            st.text = "T" + st.text[1:]
        steps.append(st)
    E, Z = final.E.xreplace(env), final.Z
    eqs = []
    for n, q in out.quantities.items():
        base = bases[n]
        rhs = {"vth": E, "gain": E, "rth": Z}.get(base, E / Z if Z != 0 else None)
        eq = Equation(sympy.Symbol(n), rhs, defs=dict(defs))
        eqs.append(check_result(ctx, req, eq, refs[n], _forms_for(ctx, req, base, refs[n])))
        if q.expr is not None and (q.expr != rhs):
            e2 = Equation(sympy.Symbol(n), q.expr)
            eqs.append(check_result(ctx, req, e2, refs[n], _forms_for(ctx, req, base,
                                                                      refs[n])))
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
                    "current and does not affect the port; it is removed.", [], _involved(b),
                    kind="reduction")
    x, y = parts
    members = _involved(x, y)
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
        eqs = [_move_equation(zl, x.Z + y.Z, r.Z, defs)] if r.Z in defs else []
        ex, ey = x.E.xreplace(env), y.E.xreplace(env)
        el = r.E.xreplace(env)
        if ex != 0 and ey != 0 and el in defs:
            eqs.append(_move_equation(_vname(r, el, defs), ex + ey, el, defs, also=(zl,)))
        if not eqs:
            e, a, b = _oriented(el, r.a, r.b)
            return Step(f"{_label(x)} and {_label(y)} are in series: nothing else connects at "
                        f"node {m['node']}, so they form one branch: open-circuit voltage "
                        f"{e} (node {a} relative to node {b}) behind {r.Z}.", [],
                        members, kind="reduction")
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
                    f"{_label(t)}.", [_move_equation(lhs, t.E.xreplace(env) - k * t.Z,
                                                     el, defs)], members,
                    kind="reduction")
    if reduce.is_open(x) or reduce.is_open(y):
        o, k = (x, y) if reduce.is_open(x) else (y, x)
        return Step(f"{_label(o)} has infinite impedance (an open circuit) {between}: it "
                    f"carries no current in parallel with {_label(k)} and is removed.", [],
                    members, kind="reduction")
    if x.Z == 0 or y.Z == 0:
        v, o = (x, y) if x.Z == 0 else (y, x)
        return Step(f"{_label(v)} is an ideal voltage source directly across {_label(o)} "
                    f"{between}: the voltage there is fixed whatever {_label(o)} draws, so "
                    f"{_label(o)} does not affect the port and is removed.", [], members,
                    kind="reduction")
    zl = _zname(r, defs)
    d = defs if zl in defs else _with(defs, zl, r.Z)
    eqs = [_move_equation(zl, x.Z * y.Z / (x.Z + y.Z), r.Z, d)]
    ex, ey = x.E.xreplace(env), y.E.xreplace(env)
    text = f"{_label(x)} and {_label(y)} are in parallel {between}"
    if ex != 0 or ey != 0:
        srcs = []
        for b, e in ((x, ex), (y, ey)):
            if e != 0:
                shown, hi, lo = _oriented(e, b.a, b.b)
                srcs.append(f"{_label(b)} (open-circuit voltage {shown}, node {hi} relative to "
                            f"node {lo}, behind {b.Z}) becomes a current source "
                            f"{_quot(shown, b.Z)} in parallel with {b.Z}, driving current "
                            f"from node {lo} to node {hi}")
        text = ("Source transformation: " + "; ".join(srcs) + ". " + text +
                ": the currents add, the impedances combine in parallel, and the result "
                "transforms back into a voltage source behind the parallel impedance")
        el = r.E.xreplace(env)
        lhs = _vname(r, el, defs)
        eqs.append(_move_equation(lhs, zl * (ex / x.Z + ey / y.Z), el, d, also=(zl,)))
    return Step(text + ".", eqs, members, kind="reduction")


def _oriented(e, a, b) -> tuple:
    """(voltage, node, node): a branch's open-circuit voltage said the way it is positive
    where that is evident (``-Vpack`` of node gnd relative to tap is ``Vpack`` of node tap
    relative to gnd), so one source reads the same in every step."""
    if isinstance(e, sympy.Basic) and e.could_extract_minus_sign():
        return -e, b, a
    return e, a, b


def _quot(a, b) -> str:
    """``a/b`` in step text, never ambiguous: a side that is not a lone symbol or a natural
    number is parenthesised (``(V/2)/(3*x/2)``, not ``V/2/3*x/2``)."""
    def part(x):
        atom = isinstance(x, sympy.Basic) and (x.is_Symbol or (x.is_Integer and x >= 0))
        return str(x) if atom else f"({x})"
    return f"{part(a)}/{part(b)}"


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
    if "isc" in names:          # isc = vth/rth: both first (rth too when not requested)
        names = ["vth"] + [n for n in names if n not in ("isc", "vth")] + ["isc"]
        if not any(twin(m) == "rth" for m in names):
            names.insert(1, "rth")
    for n in names:
        base = twin(n)
        q = out.quantities.get(n)
        ref = (_sym(refs.get(n)) if refs.get(n) is not None else _ref(q)) if q is not None \
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
            rname = next(m for m in names if twin(m) == "rth")
            syms = {sympy.Symbol("vth"): v, sympy.Symbol(rname): r}
            eq = Equation(sympy.Symbol(n), sympy.Symbol("vth") / sympy.Symbol(rname),
                          check=ref, defs=syms)
            # the solver's short-circuit solution (port shorted) against the quotient of its
            # open-circuit and test-source solutions
            sc = Equation(sympy.Symbol(n), ref, check=v / r)
            steps.append(Step("Short-circuit current: the open-circuit voltage over the "
                              "resistance seen into the port (both found above), compared with "
                              "the solver's short-circuit solution.", [eq, sc],
                              kind="result"))
    return steps


def _reference(ratio):
    """The solver's ratio as a check reference: evaluated in its ring, or (where a ring
    variable stands for an expression that is not rational, a root) its sympy form."""
    try:
        return RatioCheck(ratio)
    except NotRational:
        return edge.to_sympy(ratio)


def _sym(ref):
    """A check reference as the sympy expression that a nodal step shows."""
    return ref.expr() if isinstance(ref, RatioCheck) else ref


def _ref(q):
    """The closed form of a result, or (sequence, result) where only a sequence exists."""
    return q.expr if q.expr is not None else (list(q.sequence), q.in_sequence)


def _exact(ctx, req, name):
    return edge.to_sympy(forms.exact_ratio(ctx, req, name))


def _current_steps(ctx, req, out, refs):
    nodal = _nodal(ctx, begin=True)
    e = ctx.circuit.element(req.element)
    q = out.quantities["current"]
    ref = _sym(refs["current"]) if refs["current"] is not None else _ref(q)
    form = nodal.current(e.name).xreplace(nodal.src_values)
    ends = f"from {e.nodes[0]} to {e.nodes[1]}" if e.kind != "nullor" else ""
    cur = Equation(sympy.Symbol("current"), form)
    cur.mark("system", through_agrees(nodal, e.name, form))
    steps = [Step(f"Current through {e.name} in its reference direction ({ends}), in terms "
                  "of the nodal unknowns:", [cur], [e.name], kind="port")]
    steps += equation_steps(nodal)
    steps.append(cramer_step(nodal, "current", form, nodal.b, ref,
                             f"Solving for the unknowns that the current of {e.name} needs."))
    return steps


def through_agrees(nodal, name, form) -> bool:
    """The element's current in the unknowns equals the stamped system's own linear form
    of that current (:meth:`derive.solver.stamping.System.through`)."""
    from derive.forms.elimination import entry_expr
    try:
        sysm = nodal.system
        lf = sysm.through(name)
        ref = sympy.Add(*[entry_expr(sysm, p) * nodal.unknowns[i]
                          for i, p in lf.coef.items() if not _zero_poly(p)])
        if not _zero_poly(lf.const):
            ref += entry_expr(sysm, lf.const)
        d = sympy.expand(form - ref)
        return d == 0 or sympy.cancel(sympy.together(d)) == 0
    except Exception:
        return False


def _zero_poly(p) -> bool:
    return p == 0 if isinstance(p, int) else p.is_zero()


# ------------------------------------------------------------------ checks, values
def cross_check_step(ctx, req):
    """The step ``vth = isc·rth``: the solver's three exact ratios (vth and rth as reported,
    isc from its own bordered determinants) evaluated exactly at random points
    (:func:`derive.forms.select.product_identity_holds`, never multiplied out; the outcome
    of :func:`derive.forms.select.cross_check` on the same ratios where it ran)."""
    if forms.long_reducible(ctx, req, "rth") or not forms.expandable(ctx):
        return []
    r = forms.exact_ratio(ctx, req, "rth")
    if r.is_zero:
        return []
    v, i = (forms.exact_ratio(ctx, req, n) for n in ("vth", "isc"))
    V, I, R = (sympy.Symbol(n) for n in ("vth", "isc", "rth"))
    eq = Equation(V, I * R)
    # the same identity of the same three ratios was decided by forms.cross_check when
    # the results were computed (it raises when it fails); its outcome is reused
    n = ctx.cache.get(("vth = isc*rth holds", req.port))
    if n is None:
        try:
            ok, n = forms.product_identity_holds(v, [i, r]), forms.CHECK_POINTS
        except Exception:           # no usable point, or an error: not verified
            ok = False
    else:
        ok = True
    eq.mark("points", ok, n)
    return [Step("Cross-check: the open-circuit voltage equals the short-circuit current "
                 "times the resistance seen into the port (each found independently).",
                 [eq], kind="check")]


def _ratio_value(ratio, nominal):
    """The solver's exact ratio at nominal values (sympy Rational), from its own ring
    polynomials in python-flint ``fmpq``; None where some value is missing or irrational."""
    if ratio is None:
        return None
    vals = []
    for v in ratio.system.vars:
        x = edge.var_value(v, nominal)
        if x is None or x is edge.NOT_EXACT:
            return None
        vals.append(x)
    if vals:
        num, den = ratio.num(*vals), ratio.den(*vals)
    else:
        n, d = ratio.num.to_dict(), ratio.den.to_dict()
        num = flint.fmpq(n.get((0,), 0)) if n else flint.fmpq(0)
        den = flint.fmpq(d.get((0,), 1)) if d else flint.fmpq(1)
    if den == 0:
        return None
    return to_rational(num / den)


def _nodal_value(ctx, req, name, nominal):
    """The quantity at nominal values from an exact solve of the nodal equations there."""
    if _sparse(ctx) and req.quantity != "current" and twin(name) in ("vth", "rth", "gain",
                                                                     "isc"):
        try:
            return to_rational(_sparse_value(ctx, req, name, nominal, ctx.numeric_subs()))
        except (ZeroDivisionError, KeyError):
            return None
    nodal = _nodal(ctx)
    base = twin(name)
    if base == "isc":
        v, r = (_nodal_value(ctx, req, n, nominal) for n in ("vth", "rth"))
        return None if v is None or not r else v / r
    if req.quantity == "current":
        form = nodal.current(req.element).xreplace(nodal.src_values)
        b = nodal.b
    elif base in ("vth", "gain", "rth"):
        form, b = _nodal_forms(ctx, req, base)
    else:
        return None
    n = nodal.A.shape[0]
    try:
        prog = Program(list(nodal.A) + list(b))
        fprog = Program([form])
        vals = prog.run(nominal)
        x = flint.fmpq_mat(n, n, vals[:n * n]).solve(flint.fmpq_mat(n, 1, vals[n * n:]))
        env = dict(nominal)
        env.update({u: x[i, 0] for i, u in enumerate(nodal.unknowns)})
        return to_rational(fprog.run(env)[0])
    except (KeyError, ZeroDivisionError, NotRational):
        return None


def independent_value(ctx, req, q, nominal):
    """(value, method): ``q`` at nominal values independently of its displayed form -- the
    solver's ratio there (``"exact"``), else an exact nodal solve there (``"system"``)."""
    indep = _ratio_value(q.ratio, nominal)
    if indep is not None:
        return indep, "exact"
    return _nodal_value(ctx, req, q.name, nominal), "system"


def _short(v, chars: int = 24) -> bool:
    """Whether the exact value ``v`` prints in at most ``chars`` characters (its size read
    off the bit lengths first: a value of thousands of digits is never printed here)."""
    if v.is_Rational and abs(int(v.p)).bit_length() + int(v.q).bit_length() > 4 * chars:
        return False
    return len(str(v)) <= chars


def _nominal_text(val, unit, digits) -> str:
    """A symbol's nominal value: as entered where it is a rational number, else computed."""
    if isinstance(val, sympy.Rational):
        from fractions import Fraction
        return format_exact(Fraction(int(val.p), int(val.q)), unit)
    return format_value(to_float(val), unit, digits)


def _value_step(ctx, req, q) -> Step:
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
                     _nominal_text(val, si.unit if si else None, ctx.options.digits)
                     if val is not None else "none (kept symbolic)"])
    if q.value is None and getattr(q, "undefined", None):
        return Step(q.undefined[0].upper() + q.undefined[1:] + ".", [], kind="value",
                    table=rows)
    if q.value is None:
        return Step(f"{q.name} has no single value: some symbols have no nominal value (or the "
                    "result depends on s).", [], kind="value", table=rows)
    # one exact path: the displayed closed form (or sequence) at nominal, in fmpq
    exact = exact_value(q.expr, nominal) if q.expr is not None else \
        exact_value(q.in_sequence, nominal, dict(q.sequence))
    if exact is None:       # not a rational value (complex, roots): shown, nothing claimed
        shown = format_value(q.value, q.unit, ctx.options.digits)
        return Step(f"At nominal values: {q.name} = {shown}.", [], kind="value", table=rows)
    q.value = to_float(exact)
    shown = format_value(q.value, q.unit, ctx.options.digits)
    # an independent exact value: the solver's ratio, else an exact nodal solve at nominal
    indep, method = independent_value(ctx, req, q, nominal)
    if indep is not None and indep != exact:
        raise StepFailed(f"value of {q.name} at nominal values disagrees with an independent "
                         f"exact computation ({exact} against {indep})")
    eqs = []        # no independent value (e.g. a resistance of nominal 0): shown, not claimed
    if indep is not None and _short(exact):
        eq = Equation(sympy.Symbol(q.name), exact)
        eq.mark(method, indep == exact)
        eqs.append(eq)
    return Step(f"At nominal values: {q.name} = {shown}.", eqs, kind="value", table=rows)


# ------------------------------------------------------------------ power in X
def power_steps(ctx, req, out) -> list:
    """The verified steps of ``power in X``: ``p = v·i`` in the nodal unknowns (passive sign
    convention), the nodal equations, then the closed form checked against exact solves of
    those equations at random rational points; for a reactive circuit the DC value (s = 0)
    checked against the s-domain product; the value at nominal values."""
    from derive.circuit.build import S
    from derive.derivation.nodal_steps import random_solve_check
    from derive.forms.power import reactive
    nodal = _nodal(ctx, begin=True)
    e = ctx.circuit.element(req.element)
    q = out.quantities["power"]
    a, b = e.nodes
    v_form = nodal.v(a) - nodal.v(b)
    i_form = nodal.current(e.name).xreplace(nodal.src_values)
    cur = Equation(sympy.Symbol(f"i_{e.name}"), i_form)
    cur.mark("system", through_agrees(nodal, e.name, i_form))
    volt = Equation(sympy.Symbol(f"v_{e.name}"), v_form, definition=True)
    p = sympy.Symbol("power")
    steps = [Step(f"Power absorbed by {e.name} (passive sign convention: positive when "
                  f"{e.name} absorbs power): p = v·i, with v the voltage of {a} against {b} "
                  f"and i the current through {e.name} from {a} to {b} (its reference "
                  "direction), in terms of the nodal unknowns:",
                  [volt, cur, Equation(p, v_form * i_form, definition=True)], [e.name],
                  kind="power")]
    steps += equation_steps(nodal)
    solver = ctx.solver(req.loc)
    s_form = edge.to_sympy(solver.voltage(a, b) * solver.current(e.name))
    dc = S in s_form.free_symbols
    whole = Equation(p, s_form if dc else q.expr)
    whole.mark("system", *random_solve_check(nodal, v_form * i_form, nodal.b, whole.rhs))
    steps.append(Step(f"Solving the equations above for v and i of {e.name}: the product, "
                      "compared with exact solves of the nodal equations at random rational "
                      "points.", [whole], [e.name], kind="power"))
    if dc:
        num, den = sympy.fraction(sympy.cancel(sympy.together(s_form)))
        limit = Equation(p, q.expr, check=num.subs(S, 0) / den.subs(S, 0))
        steps.append(Step("At DC (s = 0: capacitors open, inductors shorted), the power of "
                          "the circuit's DC solution: the product above at s = 0. (The "
                          "s-domain product is no power: power is asked at DC.)", [limit],
                          [e.name], kind="power"))
    elif reactive(ctx.circuit):
        steps.append(Step("The circuit is reactive; its result does not depend on s, so it "
                          "holds at DC (s = 0: capacitors open, inductors shorted).",
                          kind="power"))
    steps.append(_value_step(ctx, req, q))
    require_verified(steps, req)
    return steps

