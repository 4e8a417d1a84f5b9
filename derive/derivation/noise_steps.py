"""Steps of ``find noise at P from F1 to F2``, every equation verified.

* the sources and their densities (the model: definitions);
* the nodal equations (:func:`derive.derivation.nodal_steps.equation_steps`);
* per source its transfer ``H_k(s)`` to the port, checked by exact solves of the nodal
  equations (built from the elements, not the stamped matrix) at random rational points with
  the source's own right-hand side (:func:`~derive.derivation.nodal_steps.random_solve_check`),
  and ``|H_k(j 2 pi f)|^2``, checked by exact solves of the nodal equations at ``s = j w``
  (the complex system split into its real and imaginary parts, python-flint ``fmpq_mat``)
  at random rational ``w`` and symbol values;
* the output density, the sum of the contributions, checked the same way;
* the mean square over the band and the ranked table (built by the handler).
"""
from __future__ import annotations

import random

import flint
import sympy

from derive.circuit.build import S
from derive.derivation.nodal_steps import Nodal, equation_steps, random_solve_check
from derive.derivation.steps import ATTEMPTS, Equation, Program, Step, random_point
from derive.forms.noise import F
from derive.sheet.units import format_value

W = sympy.Symbol("omega_chk")


def nodal_of(ctx) -> Nodal:
    """The circuit's nodal equations (shared with the other requests' steps)."""
    if "nodal" not in ctx.cache:
        ctx.cache["nodal"] = Nodal(ctx)
    nodal = ctx.cache["nodal"]
    nodal.begin()
    return nodal


def source_vector(nodal, ctx, src):
    """The right-hand side of one unit of ``src`` in the nodal equations (sympy), written from
    the source's place in the circuit: a unit current into ``a`` and out of ``b``; for an
    op-amp's ``en`` the shift of its input law (and of the current of its ``rin``)."""
    if src.named is not None:
        return nodal.test_vector(src.named[1], src.named[2])
    b = sympy.zeros(len(nodal.unknowns), 1)
    c = ctx.circuit
    core = c.element(src.core)
    j = nodal.system.branch_index[core.name]
    inp, inn = src.nodes
    if core.kind == "nullor":
        b[j] = -1                                     # v(inp) + en - v(inn) = 0
    else:
        coef = core.controls[0][0]
        b[j] = coef.xreplace(nodal.subs) if nodal.subs else coef
    rin = f"{src.opamp}.rin"
    if any(e.name == rin for e in c.elements):
        g = 1 / nodal.value(c.element(rin))
        for node, sg in ((inp, -1), (inn, 1)):
            i = nodal.system.node(node)
            if i is not None:
                b[i] += sg * g
    return b


def _expr(x):
    """A number or sympy expression as a sympy expression (no text is read)."""
    return sympy.Integer(x) if isinstance(x, int) else x


def _complex_parts(v):
    v = sympy.expand(v)
    return sympy.re(v), sympy.im(v)


def jw_check(nodal, form, vectors, expected, points=2, seed=5) -> list:
    """(agrees, points) per entry of ``expected``: each a density (or |H|^2) in ``f`` that
    must equal ``sum_i weight_i |form(x_i)|^2`` with ``x_i`` the exact solution of the nodal
    equations at ``s = j w`` for right-hand side ``vectors[k][i]`` (``vectors[k]`` a list of
    (weight, vector)), at random rational points (w and the symbols)."""
    try:
        A = nodal.A
        n = A.shape[0]
        exp_w = [e.xreplace({F: W / (2 * sympy.pi)}) for e in expected]
        if any(e.has(sympy.pi) for e in exp_w):
            return [(False, None)] * len(expected)
        progs = [Program([e]) for e in exp_w]
        form_prog = Program([form])
        flat = [v for vs in vectors for _, v in vs]
        syms = set()
        for x in list(A) + [y for v in flat for y in v]:
            syms |= _expr(x).free_symbols
        syms |= {s for e in exp_w for s in e.free_symbols}
        syms |= {s for vs in vectors for w, _ in vs for s in _expr(w).free_symbols}
        syms -= set(nodal.unknowns) | {S}
        syms.add(W)
        rnd = random.Random(seed)
        state = [[True, 0] for _ in expected]
        done = 0
        q = lambda v: flint.fmpq(int(v.p), int(v.q))
        for _ in range(ATTEMPTS * points):
            if done == points:
                break
            pt = random_point(rnd, syms)
            w = pt[W]
            at = dict(pt)
            at[S] = sympy.I * w
            try:
                M = flint.fmpq_mat(2 * n, 2 * n)
                for i in range(n):
                    for jj in range(n):
                        if A[i, jj] == 0:
                            continue
                        re, im = _complex_parts(A[i, jj].xreplace(at))
                        M[i, jj] = M[n + i, n + jj] = q(re)
                        M[i, n + jj] = -q(im)
                        M[n + i, jj] = q(im)
                cols = []
                for v in flat:
                    for i in range(n):
                        cols.append(v[i].xreplace(at) if v[i] != 0 else sympy.Integer(0))
                B = flint.fmpq_mat(2 * n, len(flat))
                for k in range(len(flat)):
                    for i in range(n):
                        re, im = _complex_parts(cols[k * n + i])
                        B[i, k], B[n + i, k] = q(re), q(im)
                X = M.solve(B)
            except (ZeroDivisionError, TypeError, ValueError, AttributeError):
                continue
            got_all = []
            k = 0
            for vs in vectors:
                total = flint.fmpq(0)
                for weight, _ in vs:
                    env_r = dict(pt)
                    env_i = dict(pt)
                    env_r.update({u: X[i, k] for i, u in enumerate(nodal.unknowns)})
                    env_i.update({u: X[n + i, k] for i, u in enumerate(nodal.unknowns)})
                    re = form_prog.run(env_r)[0]
                    im = form_prog.run(env_i)[0]
                    wv = Program([_expr(weight)]).run(pt)[0]
                    total += wv * (re * re + im * im)
                    k += 1
                got_all.append(total)
            try:
                wants = [p.run(pt)[0] for p in progs]
            except ZeroDivisionError:
                continue
            for st, got, want in zip(state, got_all, wants):
                if got != want:
                    st[0] = False
                st[1] += 1
            done += 1
        return [(ok and used > 0, used if ok and used else None) for ok, used in state]
    except Exception:
        return [(False, None)] * len(expected)


def _sym(name: str) -> str:
    return name.replace(".", "_").replace("+", "p").replace("-", "n")


def source_steps(ctx, req, model) -> list:
    """The source table, the nodal equations and the verified transfer of every source."""
    nodal = nodal_of(ctx)
    plus, minus = ctx.port(req.port)
    form = nodal.v(plus) - nodal.v(minus)
    k_T = model.kT4
    rows = [["source", "what", "at", "density at nominal values"]]
    eqs = []
    nominal = ctx.nominal
    for src in model.sources:
        what = {"thermal": "thermal noise current", "en": "op-amp input voltage noise",
                "in": "op-amp input current noise"}[src.role]
        at = " – ".join(src.named[1:]) if src.named else \
            f"in series with the + input of {src.opamp}"
        v = src.density.xreplace(nominal)
        unit = "A/√Hz" if src.unit.startswith("A") else "V/√Hz"
        shown = format_value(float(sympy.sqrt(v)), unit, ctx.options.digits) if v.is_number else "—"
        rows.append([src.name, what, at, shown])
        if src.shown is not None:
            eqs.append(Equation(sympy.Symbol(f"S_{_sym(src.name)}"), src.shown,
                                definition=True))
    noted = "; ".join(f"{n} ({why})" for n, why in model.noiseless)
    t_k = model.temperature_c + sympy.Rational(27315, 100)
    steps = [Step(f"Noise sources (uncorrelated, white; densities one-sided, per hertz): each "
                  f"resistor and conductance a thermal noise current beside it of density "
                  f"4kT/R (Johnson–Nyquist), with Boltzmann's constant "
                  f"k = 1.380649e-23 J/K (exact in the SI) and T = {float(t_k):g} K "
                  f"({float(model.temperature_c):g} °C), so 4kT = {format_value(float(k_T), None, ctx.options.digits)} J; "
                  "op-amps: the voltage noise E (density E²) in series with the non-inverting "
                  "input and a current noise I (density I²) from each input to the reference "
                  "node, with E and I as given on the sheet (table). Capacitors, "
                  "inductors and the sources themselves are noiseless; independent sources "
                  "are zeroed." + (f" Taken as noiseless: {noted}." if noted else ""),
                  eqs, [s.owner for s in model.sources], kind="noise", table=rows)]
    steps += equation_steps(nodal)
    vectors = [source_vector(nodal, ctx, c.source) for c in model.contributions]
    reactive = [S in c.H.free_symbols for c in model.contributions]
    need = [i for i, r in enumerate(reactive) if r]
    checks = {}
    if need:
        res = jw_check(nodal, form, [[(1, vectors[i])] for i in need],
                       [model.contributions[i].mag2 for i in need])
        checks = dict(zip(need, res))
    for i, con in enumerate(model.contributions):
        src = con.source
        name = _sym(src.name)
        h = Equation(sympy.Symbol(f"H_{name}"), con.H)
        h.mark("system", *random_solve_check(nodal, form, vectors[i], con.H))
        eqs = [h]
        if reactive[i]:
            m = Equation(sympy.Abs(sympy.Symbol(f"H_{name}")) ** 2, con.mag2)
            m.mark("system", *checks[i])
            eqs.append(m)
        unit = "V/A" if src.unit.startswith("A") else "V/V"
        unit = "Ω" if unit == "V/A" else unit
        if src.role == "thermal":
            how = f"a 1 A current driven into {src.named[1]} and out of {src.named[2]}"
        elif src.role == "en":
            how = f"1 V in series with the non-inverting input of {src.opamp}"
        else:
            how = f"a 1 A current into node {src.named[1]}"
        steps.append(Step(f"Transfer from {src.name} to port {req.port} ({unit}): {how}, every "
                          "other source zeroed; a ratio of bordered determinants of the nodal "
                          "system, compared with exact solves of the equations above with "
                          "this right-hand side" + (" (and, for |H|², at s = jω)"
                                                    if reactive[i] else "") + ".",
                          eqs, [src.owner], kind="noise"))
    return steps, nodal, form, vectors


def density_step(ctx, req, model, total, nodal, form, vectors) -> Step:
    """S_out(f) = sum_k S_k |H_k|^2 (``total`` as displayed, with k and T where the model
    shows them), checked by exact solves at s = j w."""
    weighted = [(c.source.density, v) for c, v in zip(model.contributions, vectors)]
    eq = Equation(sympy.Symbol("S_out"), total)
    if weighted:
        want = total.xreplace(model.shown_values) if model.shown_values else total
        eq.mark("system", *jw_check(nodal, form, [weighted], [want])[0])
    else:
        eq.mark("exact", total == 0)
    return Step(f"Output noise density at port {req.port} (V²/Hz): the sources are "
                "uncorrelated, so their contributions S·|H(j2πf)|² add; compared with "
                "exact solves of the nodal equations at s = j2πf for every source at random "
                "rational points.", [eq], kind="noise")
