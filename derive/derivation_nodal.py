"""Nodal-analysis steps of a derivation: KCL per node, the matrix form, Cramer's rule.

The equations are written from the circuit's elements directly (one KCL equation per
non-ground node: current leaving through elements = current driven in by sources, plus one
voltage law per element that carries a branch current), in the circuit's own symbols. The
matrix read off these equations is compared entry by entry with the stamped system of
:mod:`derive.mna` (an independent construction), and every quotient of determinants is
compared with the exact result of the solver.

>>> import derive
>>> rec = derive.derive_text('''current source I1 from gnd to a = 1 mA
... resistor R1 between a and gnd
... voltage source Vb between b and gnd
... resistor R2 between a and b
... current source G1 from a to gnd = g*across(b, gnd)
... port p between a and gnd
... find vth at p''')
>>> [s.kind for s in rec.results[0].steps][:4]
['port', 'nodal', 'nodal', 'matrix']
"""
from __future__ import annotations

import sympy

from . import forms
from .sequence import _entry_expr
from .steps import Equation, Step

MAX_CRAMER = 4        # unknowns up to which determinants are written out (symbolic
                      # determinants of larger systems are slow and unreadable)


def _admittance(e, v):
    from .circuit import S
    return {"resistor": lambda: 1 / v, "conductance": lambda: v, "capacitor": lambda: S * v,
            "admittance": lambda: v}.get(e.kind, lambda: None)()


class Nodal:
    """The nodal equations of a circuit in sympy, built from its elements."""

    def __init__(self, ctx):
        self.ctx = ctx
        self.circuit = ctx.circuit
        self.subs = ctx.numeric_subs()
        self.system = forms.system_of(ctx)
        taken = set(self.circuit.symbols) | {"s"}

        def fresh(base):
            while base in taken:
                base = base + "x"
            taken.add(base)
            return sympy.Symbol(base)

        self.fresh = fresh
        self._base_taken = set(taken)
        self._taken = taken
        sysm = self.system
        self.unknowns = [None] * sysm.n
        for n, i in sysm.node_index.items():
            self.unknowns[i] = fresh(f"v_{n}")
        for name, j in sysm.branch_index.items():
            self.unknowns[j] = fresh(f"i_{name.replace('.', '_')}")
        self.node_names = {i: n for n, i in sysm.node_index.items()}
        self.branch_names = {j: n for n, j in sysm.branch_index.items()}
        self._build()

    # ------------------------------------------------------------ pieces
    def begin(self):
        """Start a request's steps: determinant names and det A are introduced afresh."""
        self._taken.clear()
        self._taken |= self._base_taken
        self.det_sym = None

    def value(self, e):
        return e.value.xreplace(self.subs) if self.subs else e.value

    def v(self, node):
        i = self.system.node(node)
        return sympy.Integer(0) if i is None else self.unknowns[i]

    def current(self, name, seen=()):
        """Current through element ``name`` (reference direction) in the unknowns."""
        e = self.circuit.element(name)
        if e.name in self.system.branch_index:
            return self.unknowns[self.system.branch_index[e.name]]
        if e.kind == "isource":
            return self.control(e, seen + (name,)) if e.controls else self.ph[e.name]
        a, b = e.nodes
        return _admittance(e, self.value(e)) * (self.v(a) - self.v(b))

    def control(self, e, seen=()):
        out = sympy.Integer(0)
        for coef, ctl in e.controls:
            k = coef.xreplace(self.subs) if self.subs else coef
            if ctl.kind == "across":
                out += k * (self.v(ctl.nodes[0]) - self.v(ctl.nodes[1]))
            else:
                out += k * self.current(ctl.element, seen)
        return out

    def _build(self):
        from .circuit import S
        c = self.circuit
        self.ph = {e.name: sympy.Dummy(f"src_{e.name}") for e in c.elements
                   if e.independent_source}
        self.src_values = {self.ph[e.name]: self.value(e) for e in c.elements
                           if e.independent_source}
        leaving = {n: sympy.Integer(0) for n in self.system.node_index}
        driven = {n: sympy.Integer(0) for n in self.system.node_index}
        touching = {n: [] for n in self.system.node_index}
        laws = []
        for e in c.elements:
            if e.kind == "nullor":
                inp, inn, out = e.nodes
                j = self.unknowns[self.system.branch_index[e.name]]
                if out in leaving:
                    leaving[out] += j
                    touching[out].append(e.name)
                laws.append((f"ideal op-amp {e.name}", self.v(inp) - self.v(inn),
                             sympy.Integer(0), e.name))
                continue
            a, b = e.nodes
            for n in (a, b):
                if n in touching:
                    touching[n].append(e.name)
            if e.kind == "isource":
                k = self.control(e) if e.controls else self.ph[e.name]
                if a in driven:
                    driven[a] -= k
                if b in driven:
                    driven[b] += k
                continue
            i = self.current(e.name)
            if a in leaving:
                leaving[a] += i
            if b in leaving:
                leaving[b] -= i
            if e.name in self.system.branch_index:
                j = self.unknowns[self.system.branch_index[e.name]]
                if e.kind == "inductor":
                    rhs = S * self.value(e) * j
                elif e.kind == "impedance":
                    rhs = self.value(e) * j
                else:
                    rhs = self.control(e) if e.controls else self.ph[e.name]
                laws.append((e.name, self.v(a) - self.v(b), rhs, e.name))
        back = self.src_values
        order = sorted(self.system.node_index, key=self.system.node_index.get)
        rows = [leaving[n] - driven[n] for n in order] + [l - r for _, l, r, _ in laws]
        A, b = sympy.linear_eq_to_matrix([sympy.expand(r) for r in rows], self.unknowns)
        self.A, self.b_src = A, b
        self.b = b.xreplace(back)
        self.kcl = [(n, leaving[n], driven[n].xreplace(back), touching[n]) for n in order]
        self.laws = [(w, l, r.xreplace(back), n) for w, l, r, n in laws]

    # ------------------------------------------------------------ checks
    def agrees_with_stamps(self) -> bool:
        """The matrix read off the equations equals the stamped MNA system."""
        sysm = self.system
        for i in range(sysm.n):
            for j in range(sysm.n):
                if sympy.cancel(self.A[i, j] - _entry_expr(sysm, sysm.A.get(i, j))) != 0:
                    return False
        rhs = sysm.rhs()
        for i in range(sysm.n):
            ref = _entry_expr(sysm, rhs[i]) if i in rhs else 0
            if sympy.cancel(self.b[i] - ref) != 0:
                return False
        return True

    def rhs_for(self, only=None, none=False):
        """The right-hand side with every independent source (``none``), or every source
        but ``only`` (which is set to 1), set to zero."""
        if none:
            return sympy.zeros(*self.b.shape)
        if only is None:
            return self.b
        return self.b_src.xreplace({p: int(n == only) for n, p in self.ph.items()})

    def test_vector(self, plus, minus):
        """A 1 A test current driven into ``plus`` and out of ``minus``."""
        u = sympy.zeros(len(self.unknowns), 1)
        for n, sgn in ((plus, 1), (minus, -1)):
            i = self.system.node(n)
            if i is not None:
                u[i] = sgn
        return u


def equation_steps(nodal: Nodal) -> list:
    """KCL per node and the element laws, then the matrix form (both verified)."""
    eqs = [Equation(l, r) for _, l, r, _ in nodal.kcl]
    text = ("Kirchhoff's current law at each node other than the reference node "
            f"{nodal.circuit.ground} (current leaving through elements = current driven in "
            "by sources), with node voltages " +
            ", ".join(str(u) for u in nodal.unknowns[:len(nodal.kcl)]) + ":")
    rows = [[n, ", ".join(t)] for n, _, _, t in nodal.kcl]
    out = [Step(text, eqs, sorted({x for *_, t in nodal.kcl for x in t}), kind="nodal",
                table=[["node", "elements at the node"]] + rows)]
    if nodal.laws:
        out.append(Step("The element laws of the elements that carry an unknown current:",
                        [Equation(l, r) for _, l, r, _ in nodal.laws],
                        [n for *_, n in nodal.laws], kind="nodal"))
    x = sympy.Matrix(nodal.unknowns)
    eq = Equation(sympy.MatMul(nodal.A, x, evaluate=False), nodal.b)
    eq.verified = nodal.agrees_with_stamps() and all(
        sympy.expand(a - b) == 0 for a, b in zip(list(nodal.A * x - nodal.b),
                                                 [l - r for _, l, r, _ in nodal.kcl] +
                                                 [l - r for _, l, r, _ in nodal.laws]))
    if not eq.verified:
        raise AssertionError("internal check failed: the nodal equations disagree with the "
                             "stamped system")
    out.append(Step("In matrix form, coefficient matrix times unknowns equals sources (checked entry "
                    "by entry against the stamped modified nodal system):", [eq], kind="matrix"))
    return out


def cramer_step(nodal: Nodal, name, form, b, expected, why: str, tag: str = "") -> Step:
    """``name = form(x)`` with each needed unknown by Cramer's rule; verified against
    ``expected`` (the solver's exact result)."""
    A = nodal.A
    need = [i for i, u in enumerate(nodal.unknowns) if form.has(u)]
    lhs = sympy.Symbol(name)
    if isinstance(expected, tuple):     # (sequence, result): only named intermediates exist
        seq, final = expected
        eq = Equation(lhs, final, defs=dict(seq))
        eq.verified = _random_solve_agrees(nodal, form, b, final, defs=dict(seq))
        return Step(f"{why} The result is the sequence of {len(seq)} named intermediate "
                    "quantities given with it (node elimination); it was compared with a "
                    "direct exact solve of the equations above at random rational points.",
                    [eq], kind="cramer")
    if A.shape[0] > MAX_CRAMER:
        eq = Equation(lhs, expected)
        eq.verified = _random_solve_agrees(nodal, form, b, expected)
        return Step(f"{why} The system has {A.shape[0]} unknowns; its determinants are too "
                    "large to write out. The exact result was compared with a direct exact "
                    "solve of the equations above at random rational points.", [eq],
                    kind="cramer")
    eqs = []
    if getattr(nodal, "det_sym", None) is None:
        nodal.det_sym = nodal.fresh("Delta")
        nodal.d0 = sympy.factor(A.det(method="berkowitz"))
        eqs.append(Equation(nodal.det_sym, nodal.d0, check=_kernel_det(nodal, A)))
    det_sym, d0 = nodal.det_sym, nodal.d0
    defs = {det_sym: d0}
    sub = {}
    for i in need:
        Ai = A.copy()
        Ai[:, i] = b
        node = str(nodal.unknowns[i]).split("_", 1)[1]
        sym = nodal.fresh(f"Delta_{node}" + (f"_{tag}" if tag else ""))
        di = sympy.factor(Ai.det(method="berkowitz"))
        defs[sym] = di
        sub[nodal.unknowns[i]] = sym / det_sym
        eqs.append(Equation(sym, di, check=Ai.det(method="berkowitz")))
    via = form.xreplace(sub)
    eqs.append(Equation(lhs, via, check=expected, defs=dict(defs)))
    eqs.append(Equation(lhs, expected, check=sympy.cancel(via.xreplace(defs))))
    return Step(f"{why} By Cramer's rule each unknown is a ratio of determinants: the "
                "coefficient matrix with that unknown's column replaced by the right-hand "
                "side, over the determinant of the coefficient matrix.", eqs,
                kind="cramer")


def _kernel_det(nodal, A):
    """det A by the stamped system's fraction-free determinant (an independent routine)."""
    from .kernel import det
    sysm = nodal.system
    if A.shape[0] != sysm.n:
        return None
    return _entry_expr(sysm, det(sysm.A))


def _exact_solve(A, b) -> list:
    """Solve a rational linear system exactly (python-flint's fmpq_mat)."""
    import flint
    q = lambda v: flint.fmpq(int(sympy.Rational(v).p), int(sympy.Rational(v).q))
    M = flint.fmpq_mat(A.shape[0], A.shape[1], [q(v) for v in A])
    rhs = flint.fmpq_mat(b.shape[0], 1, [q(v) for v in b])
    x = M.solve(rhs)
    return [sympy.Rational(int(x[i, 0].p), int(x[i, 0].q)) for i in range(A.shape[0])]


def _random_solve_agrees(nodal, form, b, expected, points=2, defs=None, tries=20) -> bool:
    """Exact solve of the nodal equations at random rational points against ``expected``
    (which may use the named intermediates ``defs``, evaluated in order).

    Both sides are evaluated in exact flint rationals (:mod:`derive.exact_eval`; sympy only
    for forms that are not rational functions). Points where the system is singular or a
    denominator of ``expected`` vanishes are redrawn; fewer than ``points`` usable points in
    ``tries`` draws is a refusal (False)."""
    import random
    from .exact_eval import value, values_in_order
    rnd = random.Random(11)
    defs = defs or {}
    syms = nodal.A.free_symbols | b.free_symbols | expected.free_symbols
    for v in defs.values():
        syms |= v.free_symbols
    syms -= set(nodal.unknowns) | set(defs)
    passed = 0
    for _ in range(tries):
        pt = {s: sympy.Rational(rnd.randint(1, 999), rnd.randint(1, 99)) for s in syms}
        try:
            x = _exact_solve(nodal.A.xreplace(pt), b.xreplace(pt))
        except (ZeroDivisionError, ValueError):
            continue            # singular at this point: draw another
        got = form.xreplace(dict(zip(nodal.unknowns, x))).xreplace(pt)
        try:
            env = values_in_order(defs, pt)
            want = value(expected, env) if env is not None else None
        except ZeroDivisionError:
            continue
        if want is not None:
            ok = value(got, {}) == want
        else:                   # not a rational function (roots): sympy
            env = dict(pt)
            for k, v in defs.items():
                env[k] = v.xreplace(env)
            w = expected.xreplace(env)
            if w.has(sympy.zoo, sympy.nan):
                continue
            ok = sympy.simplify(got - w) == 0
        if not ok:
            return False
        passed += 1
        if passed == points:
            return True
    return False
