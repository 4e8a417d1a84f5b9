"""Steps of ``find operating point``: node voltages, branch currents, absorbed powers and the
power balance, every equation verified.

* node voltages and branch currents: in a resistive circuit each closed form is checked
  against exact solves of the nodal equations at random rational points (``"system"``); in
  a reactive one against the limit s -> 0 of the solver's s-domain result, taken separately
  by sympy (``"exact"``/``"points"``);
* powers: ``p = v·i`` checked against the product of the voltage (difference of the node
  voltage closed forms) and the current closed form;
* balance: the sum of every absorbed power is zero (Tellegen's theorem), established by adding
  the solver's exact ratios over the ring -- the numerator cancels identically -- and by
  the exact sum of the values at nominal (``"exact"``; never a definition).
"""
from __future__ import annotations

import sympy

from derive.circuit.build import S
from derive.derivation.nodal_steps import Nodal, random_solve_check
from derive.derivation.steps import Equation, Step
from derive.sheet import kinds
from derive.sheet.units import format_value
from derive.solver import convert as edge


class OperatingPointFailed(AssertionError):
    """A displayed equation of the operating point did not verify (a bug in derive)."""


def _sym(prefix: str, name: str) -> sympy.Symbol:
    return sympy.Symbol(f"{prefix}_{name.replace('.', '_')}")


def _nodal(ctx) -> Nodal:
    if "nodal" not in ctx.cache:
        ctx.cache["nodal"] = Nodal(ctx)
    return ctx.cache["nodal"]


def _dc_limit(ratio) -> sympy.Expr:
    """The s-domain ratio in the circuit's symbols with s -> 0, by sympy (independent of the
    ring substitution that made the DC ratio)."""
    e = edge.to_sympy(ratio)
    if S not in e.free_symbols:
        return e
    num, den = sympy.fraction(sympy.cancel(sympy.together(e)))
    return num.subs(S, 0) / den.subs(S, 0)


def _eng(x, unit, digits: int = 4) -> str:
    return "n/a" if x is None else format_value(float(x), unit, digits)


def _what(x) -> str:
    if x is None:
        return ""
    return "absorbs" if x > 0 else ("delivers" if x < 0 else "none")


def steps(ctx, req, op) -> list:
    """The verified steps of an :class:`~derive.forms.operating_point.OperatingPoint`."""
    c = ctx.circuit
    D = ctx.options.digits
    solver = ctx.solver(req.loc)
    nodal = None if op.reactive else _nodal(ctx)
    out = []
    intro = ("DC operating point: every node voltage against the ground node "
             f"{c.ground}, every element current in its reference direction (from its first "
             "node to its second; a current source in its driven direction; an ideal op-amp: "
             "into its output, returning through ground) and every element's power, "
             "p = v·i with the passive sign convention (positive: the element absorbs power).")
    if op.reactive:
        intro += " At DC s = 0: capacitors are open and inductors are shorts."
    out.append(Step(intro, kind="operating point"))

    # node voltages
    eqs, rows = [], [["node", "voltage against " + c.ground]]
    for n, ent in op.nodes.items():
        eq = Equation(_sym("v", n), ent.expr)
        if nodal is not None:
            eq.mark("system", *random_solve_check(nodal, nodal.v(n), nodal.b, ent.expr))
        else:
            eq.check = _dc_limit(solver.voltage(n, c.ground))
        eqs.append(eq)
        rows.append([n, _eng(ent.exact, "V", D)])
    how = ("each compared with exact solves of the nodal equations at random rational points"
           if nodal is not None else
           "each compared with the limit s -> 0 of the s-domain solution")
    out.append(Step(f"Node voltages ({how}):", eqs, list(op.nodes), kind="operating point",
                    table=rows))

    # branch currents
    eqs = []
    for name, ent in op.currents.items():
        eq = Equation(_sym("i", name), ent.expr)
        if nodal is not None:
            form = nodal.current(name).xreplace(nodal.src_values)
            eq.mark("system", *random_solve_check(nodal, form, nodal.b, ent.expr))
        else:
            eq.check = _dc_limit(solver.current(name))
        eqs.append(eq)
    out.append(Step(f"Element currents in their reference directions ({how}):", eqs,
                    list(op.currents), kind="operating point"))

    # powers
    eqs, rows = [], [["element", "kind", "v (V)", "i (A)", "p (W)", "power"]]
    for name, ent in op.power.items():
        e = c.element(name)
        nodes = e.nodes if len(e.nodes) == 2 else (e.nodes[-1], c.ground)
        vn = [op.nodes[x].expr if x in op.nodes else sympy.Integer(0) for x in nodes]
        eq = Equation(_sym("P", name), ent.expr,
                      check=(vn[0] - vn[1]) * op.currents[name].expr)
        eqs.append(eq)
        rows.append([name, kinds.kind(e.kind).word, _eng(op.voltages[name].exact, "V", D),
                     _eng(op.currents[name].exact, "A", D), _eng(ent.exact, "W", D),
                     _what(ent.exact)])
    out.append(Step("Power absorbed by every element, p = v·i (each checked against the "
                    "product of its voltage, from the node voltages above, and its current):",
                    eqs, list(op.power), kind="operating point", table=rows))

    # the balance
    total = sympy.Add(*[_sym("P", n) for n in op.power], evaluate=False) \
        if len(op.power) > 1 else _sym("P", next(iter(op.power)))
    bal = Equation(total, sympy.Integer(0))
    nominal_ok = op.balance_at_nominal is None or op.balance_at_nominal == 0
    bal.mark("exact", bool(op.balance_zero) and nominal_ok)
    at_nom = ("" if op.balance_at_nominal is None else
              " The exact values at nominal add to "
              f"{op.balance_at_nominal} W as well.")
    supplied = sum(-x.exact for x in op.power.values() if x.exact is not None and x.exact < 0)
    out.append(Step("Power balance (Tellegen's theorem): the absorbed powers of all elements "
                    "add to zero. The sum of the exact ratios above, taken over a common "
                    "denominator, has a numerator that cancels identically." + at_nom +
                    (f" The sources deliver {_eng(supplied, 'W', D)} in all."
                     if op.balance_at_nominal is not None else ""),
                    [bal], list(op.power), kind="check"))
    failed = [st for st in out if not st.verify()]
    if failed:
        st = failed[0]
        bad = [x for x in st.equations if not x.verified]
        raise OperatingPointFailed(f"internal check failed in the operating point: {st.text} "
                                   f"({bad[0].lhs} = {bad[0].rhs})")
    return out
