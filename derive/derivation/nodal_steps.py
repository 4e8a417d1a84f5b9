"""Nodal-analysis steps of a derivation: KCL per node, the matrix form, Cramer's rule.

The equations are written from the circuit's elements directly (one KCL equation per
non-ground node: current leaving through elements = current driven in by sources, plus one
voltage law per element that carries a branch current), in the circuit's own symbols. The
matrix read off these equations is compared entry by entry with the stamped system of
:mod:`derive.solver.stamping` (an independent construction), and every quotient of determinants is
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

import random

import flint
import sympy

from derive.clock import timed
from derive.forms import select as forms
from derive.sheet import kinds
from derive.forms.elimination import entry_expr
from derive.derivation.steps import (ATTEMPTS, POINTS, Equation, Program, Step, draws,
                                     square_roots_away)

MAX_CRAMER = 4        # unknowns up to which determinants are written out (symbolic
                      # determinants of larger systems are slow and unreadable)


def _admittance(e, v):
    """The admittance of an element stamped as one (``1/R``, ``G``, ``s·C``, ``Y``)."""
    from derive.circuit.build import S
    if kinds.kind(e.kind).stamp != "admittance":
        raise ValueError(f"element {e.name!r} is not stamped as an admittance")
    return kinds.admittance(e.kind, v, S)


class Nodal:
    """The nodal equations of a circuit in sympy, built from its elements."""

    def __init__(self, ctx):
        self.ctx = ctx
        self.circuit = ctx.circuit
        self.subs = ctx.numeric_subs()
        self.system = forms.system_of(ctx)
        self.solver = ctx.solver()      # shares det A with every request on the circuit
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
        if kinds.kind(e.kind).stamp == "current":
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
        from derive.circuit.build import S
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
            k = kinds.kind(e.kind)
            if k.stamp == "nullor":
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
            if k.stamp == "current":
                drive = self.control(e) if e.controls else self.ph[e.name]
                if a in driven:
                    driven[a] -= drive
                if b in driven:
                    driven[b] += drive
                continue
            i = self.current(e.name)
            if a in leaving:
                leaving[a] += i
            if b in leaving:
                leaving[b] -= i
            if e.name in self.system.branch_index:
                j = self.unknowns[self.system.branch_index[e.name]]
                if k.immittance == "impedance":          # v = Z·i: s·L·i, Z·i
                    rhs = kinds.impedance(e.kind, self.value(e), S) * j
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
    @timed("verification")
    def agrees_with_stamps(self) -> bool:
        """The matrix read off the equations equals the stamped MNA system."""
        sysm = self.system
        for i in range(sysm.n):
            for j in range(sysm.n):
                a, p = self.A[i, j], sysm.A.get(i, j)
                if a == 0 and p.is_zero():           # both empty: nothing to compare
                    continue
                if sympy.cancel(a - entry_expr(sysm, p)) != 0:
                    return False
        rhs = sysm.rhs()
        for i in range(sysm.n):
            ref = entry_expr(sysm, rhs[i]) if i in rhs else 0
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


def _is_zero(d) -> bool:
    d = sympy.expand(d)
    return d == 0 or sympy.cancel(sympy.together(d)) == 0


def stamped_rows(nodal) -> list:
    """Row ``i`` of the stamped system, ``sum_j A_ij x_j - b_i``, in the circuit symbols."""
    sysm = nodal.system
    rhs = sysm.rhs()
    out = []
    for i in range(sysm.n):
        row = sympy.Add(*[entry_expr(sysm, p) * nodal.unknowns[j]
                          for j, p in sysm.A.rows[i].items()])
        out.append(row - (entry_expr(sysm, rhs[i]) if i in rhs else 0))
    return out


@timed("verification")
def check_rows(nodal, items, offset) -> list:
    """``lhs = rhs`` per KCL row / element law, each checked exactly against the
    corresponding row of the stamped system (``verified_by`` "system")."""
    rows = stamped_rows(nodal)
    eqs = []
    for k, (_, l, r, _n) in enumerate(items):
        eq = Equation(l, r)
        try:
            ok = _is_zero(l - r - rows[offset + k])
        except Exception:
            ok = False
        eq.mark("system", ok)
        eqs.append(eq)
    return eqs


def equation_steps(nodal: Nodal) -> list:
    """KCL per node and the element laws, then the matrix form, every equation checked
    against the stamped system."""
    eqs = check_rows(nodal, nodal.kcl, 0)
    text = ("Kirchhoff's current law at each node other than the reference node "
            f"{nodal.circuit.ground} (current leaving through elements = current driven in "
            "by sources), with node voltages " +
            ", ".join(str(u) for u in nodal.unknowns[:len(nodal.kcl)]) + ":")
    rows = [[n, ", ".join(t)] for n, _, _, t in nodal.kcl]
    out = [Step(text, eqs, sorted({x for *_, t in nodal.kcl for x in t}), kind="nodal",
                table=[["node", "elements at the node"]] + rows)]
    if nodal.laws:
        out.append(Step("The element laws of the elements that carry an unknown current:",
                        check_rows(nodal, nodal.laws, len(nodal.kcl)),
                        [n for *_, n in nodal.laws], kind="nodal"))
    x = sympy.Matrix(nodal.unknowns)
    eq = Equation(sympy.MatMul(nodal.A, x, evaluate=False), nodal.b)
    try:
        ok = nodal.agrees_with_stamps() and all(
            sympy.expand(a - b) == 0 for a, b in zip(list(nodal.A * x - nodal.b),
                                                     [l - r for _, l, r, _ in nodal.kcl] +
                                                     [l - r for _, l, r, _ in nodal.laws]))
    except Exception:
        ok = False
    eq.mark("system", ok)
    out.append(Step("In matrix form, coefficient matrix times unknowns equals sources (checked entry "
                    "by entry against the stamped modified nodal system):", [eq], kind="matrix"))
    return out


def cramer_step(nodal: Nodal, name, form, b, expected, why: str, tag: str = "") -> Step:
    """``name = form(x)`` with each needed unknown by Cramer's rule; verified against
    ``expected`` (the solver's exact result) and exact solves of the system at random
    rational points."""
    A = nodal.A
    need = [i for i, u in enumerate(nodal.unknowns) if form.has(u)]
    lhs = sympy.Symbol(name)
    if isinstance(expected, tuple):     # (sequence, result): only named intermediates exist
        seq, final = expected
        eq = Equation(lhs, final, defs=dict(seq))
        eq.mark("system", *random_solve_check(nodal, form, b, final, defs=dict(seq)))
        return Step(f"{why} The result is the sequence of {len(seq)} named intermediate "
                    "quantities given with it (node elimination); it was compared with a "
                    "direct exact solve of the equations above at random rational points.",
                    [eq], kind="cramer")
    if A.shape[0] > MAX_CRAMER:
        eq = Equation(lhs, expected)
        eq.mark("system", *random_solve_check(nodal, form, b, expected))
        return Step(f"{why} The system has {A.shape[0]} unknowns; its determinants are too "
                    "large to write out. The exact result was compared with a direct exact "
                    "solve of the equations above at random rational points.", [eq],
                    kind="cramer")
    eqs = []
    if getattr(nodal, "det_sym", None) is None:
        nodal.det_sym = nodal.fresh("Delta")
        nodal.d0 = symbolic_det(A)
        kd = _kernel_det(nodal, A)
        eq = Equation(nodal.det_sym, nodal.d0, check=kd)
        if kd is None:
            ok, n = det_check(A, nodal.d0)
            eq.mark("points" if n is not None else "exact", ok, n)
        eqs.append(eq)
    det_sym, d0 = nodal.det_sym, nodal.d0
    defs = {det_sym: d0}
    sub = {}
    for i in need:
        Ai = A.copy()
        Ai[:, i] = b
        node = str(nodal.unknowns[i]).split("_", 1)[1]
        sym = nodal.fresh(f"Delta_{node}" + (f"_{tag}" if tag else ""))
        di = symbolic_det(Ai)
        defs[sym] = di
        sub[nodal.unknowns[i]] = sym / det_sym
        eq = Equation(sym, di)          # against det(Ai) of exact rational matrices
        ok, n = det_check(Ai, di)
        eq.mark("points" if n is not None else "exact", ok, n)
        eqs.append(eq)
    via = form.xreplace(sub)
    eqs.append(Equation(lhs, via, check=expected, defs=dict(defs)))
    eqs.append(Equation(lhs, expected, check=sympy.cancel(via.xreplace(defs))))
    return Step(f"{why} By Cramer's rule each unknown is a ratio of determinants: the "
                "coefficient matrix with that unknown's column replaced by the right-hand "
                "side, over the determinant of the coefficient matrix.", eqs,
                kind="cramer")


def symbolic_det(M):
    """The determinant shown in a Cramer step (sympy's Berkowitz algorithm, factored); it
    is checked against independent determinants, never trusted."""
    return sympy.factor(M.det(method="berkowitz"))


def _kernel_det(nodal, A):
    """det A by the stamped system's fraction-free determinant (an independent routine; the
    solver's cached ``det A``, the one every result of the circuit was divided by)."""
    sysm = nodal.system
    if A.shape[0] != sysm.n:
        return None
    return entry_expr(sysm, nodal.solver.det_a())


def _draws(syms, seed, points):
    """Random rational points (bounded number of draws, see :mod:`derive.derivation.steps`)."""
    seq = draws(seed, syms)
    for _ in range(ATTEMPTS * points):
        yield next(seq)


def _sampled(syms, seed: int, points: int, agrees) -> tuple:
    """(agrees, points used) of ``agrees(point)`` at random rational points: a point where
    it divides by zero is redrawn (a bounded number of times), one disagreement fails, and
    with no usable point the check fails; without symbols one evaluation decides."""
    used = 0
    for pt in _draws(syms, seed, points):
        try:
            ok = agrees(pt)
        except ZeroDivisionError:
            continue
        if not ok:
            return False, None
        used += 1
        if used == points or not syms:
            break
    return used > 0, (used if syms else None)


@timed("verification")
def det_check(M, d, points=POINTS) -> tuple:
    """(agrees, points used): ``d`` against python-flint's determinant of ``M`` evaluated
    at random rational points (exact ``fmpq`` arithmetic)."""
    try:
        n = M.shape[0]
        entries = list(M) + [d]
        roots = square_roots_away(entries)      # sqrt(x): checked where x is a square
        prog = Program([e.xreplace(roots) for e in entries] if roots else entries)
        syms = prog.symbols()

        def agrees(pt):
            vals = prog.run(pt)
            return flint.fmpq_mat(n, n, vals[:-1]).det() == vals[-1]
        return _sampled(syms, 3, points, agrees)
    except Exception:
        return False, None


def _exact_solve(A, b) -> list:
    """Solve a rational linear system exactly (python-flint's fmpq_mat)."""
    q = lambda v: flint.fmpq(int(sympy.Rational(v).p), int(sympy.Rational(v).q))
    M = flint.fmpq_mat(A.shape[0], A.shape[1], [q(v) for v in A])
    rhs = flint.fmpq_mat(b.shape[0], 1, [q(v) for v in b])
    x = M.solve(rhs)
    return [sympy.Rational(int(x[i, 0].p), int(x[i, 0].q)) for i in range(A.shape[0])]


@timed("verification")
def random_solve_check(nodal, form, b, expected, points=2, defs=None, over=None) -> tuple:
    """(agrees, points used): exact solves of the nodal equations at random rational points
    (python-flint ``fmpq_mat``) against ``expected`` (which may use the named intermediates
    ``defs``). With ``over = (form2, b2)`` the solved value is the ratio of ``form`` solved
    with ``b`` to ``form2`` solved with ``b2`` (isc = vth/rth). Points where the system is
    singular, the ratio's denominator zero or ``expected`` undefined are redrawn (a bounded
    number of times); with no usable point the check fails."""
    try:
        A = nodal.A
        n = A.shape[0]
        rhs = [b] if over is None else [b, over[1]]
        forms = [form] if over is None else [form, over[0]]
        entries = list(A) + [x for r in rhs for x in r]
        defs = dict(defs or {})
        # a value under a square root (sqrt(x)): checked where x is a perfect square
        roots = square_roots_away(entries + forms + [expected] + list(defs.values()))
        if roots:
            entries, forms = [e.xreplace(roots) for e in entries], \
                [e.xreplace(roots) for e in forms]
            expected = expected.xreplace(roots)
            defs = {k: v.xreplace(roots) for k, v in defs.items()}
        sys_prog = Program(entries)
        form_prog = Program(forms)
        exp_prog = Program([expected], defs)
        syms = (sys_prog.symbols() | form_prog.symbols() | exp_prog.symbols()) - \
            set(nodal.unknowns)
        def agrees(pt):
            vals = sys_prog.run(pt)
            M = flint.fmpq_mat(n, n, vals[:n * n])
            got = []
            for k in range(len(rhs)):
                col = vals[n * n + k * n: n * n + (k + 1) * n]
                x = M.solve(flint.fmpq_mat(n, 1, col))
                env = dict(pt)
                env.update({u: x[i, 0] for i, u in enumerate(nodal.unknowns)})
                got.append(form_prog.run(env)[k])
            got = got[0] if over is None else got[0] / got[1]
            return got == exp_prog.run(pt)[0]
        return _sampled(syms, 11, points, agrees)
    except Exception:
        return False, None




def _random_solve_agrees(nodal, form, b, expected, points=2, defs=None) -> bool:
    return random_solve_check(nodal, form, b, expected, points, defs)[0]
