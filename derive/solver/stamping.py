"""Modified nodal analysis: a circuit stamped into an exact sparse polynomial matrix.

Unknowns are the voltages of the non-ground nodes, then one branch current for every element
whose current is not a function of node voltages (voltage sources, inductors, impedances,
op-amp outputs). Matrix entries are exact polynomials (python-flint ``fmpq_mpoly``) in ring
variables; each ring variable stands for a value of the circuit:

* ``('recip', R)`` is ``1/R`` for a resistance ``R`` (conductance entries keep nodal
  determinants small: a resistor network's determinant is a sum over spanning forests);
* ``('expr', X)`` is ``X`` itself (capacitance, inductance, a dependent-source coefficient,
  ``s``, a symbol that occurs in an expression);
* ``('src', name)`` is the value of independent source ``name`` (so sources can be switched
  on and off by substitution).

Row ``i < len(nodes)`` is Kirchhoff's current law at node ``i`` (currents leaving the node
through elements = currents driven into it by sources); branch rows are the element's
voltage law.
"""
from __future__ import annotations

from dataclasses import dataclass, field

import flint
import sympy
from derive.sheet import kinds
from derive.sheet.expressions import as_expr

from derive.circuit.build import S, Circuit
from derive.errors import SheetError
from derive.solver.determinant import SparseMatrix


@dataclass
class RingVar:
    name: str
    kind: str            # 'recip', 'expr' or 'src'
    expr: sympy.Expr     # what it stands for (for 'src': the source's value)
    source: str = ""     # element name for 'src'


class _Vars:
    def __init__(self):
        self.vars: list[RingVar] = []
        self.index: dict = {}

    def get(self, kind, expr, source=""):
        k = (kind, source) if kind == "src" else (kind, expr)
        if k not in self.index:
            self.index[k] = len(self.vars)
            self.vars.append(RingVar(f"x{len(self.vars)}", kind, expr, source))
        return self.index[k]


@dataclass
class LinForm:
    """A linear form over the unknowns plus a part that depends on sources only.

    Polynomials are kept as sympy-free *recipes* until the ring exists: ``terms`` maps
    unknown index -> list of factor lists, see :meth:`System.poly`.
    """
    coef: dict = field(default_factory=dict)     # unknown -> poly
    const: object = 0                            # poly (linear in source variables)


class System:
    """The stamped system ``A x = b`` of one circuit.

    >>> from derive.sheet.parser import parse_sheet
    >>> from derive.circuit.build import build_circuit
    >>> c = build_circuit(parse_sheet('''voltage source V between a and gnd
    ... resistor R1 between a and b
    ... resistor R2 between b and gnd
    ... port out between b and gnd'''))
    >>> sys = System(c)
    >>> sys.n, [v.kind for v in sys.vars]
    (3, ['src', 'recip', 'recip'])
    """

    def __init__(self, circuit: Circuit, subs: dict | None = None):
        self.circuit = circuit
        self.subs = subs or {}
        ground = circuit.ground
        self.node_index = {n: i for i, n in enumerate(x for x in circuit.nodes if x != ground)}
        nb = len(self.node_index)
        self.branch_index = {}
        for e in circuit.elements:
            if kinds.kind(e.kind).branch_current:
                self.branch_index[e.name] = nb + len(self.branch_index)
        self.n = nb + len(self.branch_index)
        self._v = _Vars()
        self._collect_vars()
        names = [v.name for v in self._v.vars] or ["x0"]
        self.ctx = flint.fmpq_mpoly_ctx.get(tuple(names), "lex")
        self.gens = self.ctx.gens() if self._v.vars else ()
        self.vars = self._v.vars
        self.A = SparseMatrix(self.ctx, self.n)
        self._b = {}
        self._stamp()

    # ---------------------------------------------------------------- values to polys
    def _value(self, e):
        return e.value.xreplace(self.subs) if self.subs else e.value

    def _scan(self, expr, recip):
        """Register the ring variables ``expr`` needs (see :meth:`poly`)."""
        self._plan(expr, recip, register=True)

    def _plan(self, expr, recip, register=False):
        expr = as_expr(expr)
        if recip:
            if expr == 0:
                raise ZeroDivisionError
            if expr.is_number:
                return ("num", 1 / expr)
            c, rest = expr.as_coeff_Mul()
            pw = rest.as_powers_dict()
            if all(b.is_Symbol and b != S and getattr(x, "is_Integer", False) and x > 0
                   for b, x in pw.items()):
                idx = [(self._v.get("recip", b) if register else self._v.index[("recip", b)], int(x))
                       for b, x in pw.items()]
                return ("mono", 1 / c, idx)
            i = self._v.get("recip", expr) if register else self._v.index[("recip", expr)]
            return ("mono", sympy.Integer(1), [(i, 1)])
        if expr.is_number:
            return ("num", expr)
        syms = sorted(expr.free_symbols, key=str)
        try:
            p = sympy.Poly(expr, *syms)
            if not p.domain.is_QQ and not p.domain.is_ZZ:
                raise sympy.PolynomialError
        except sympy.PolynomialError:
            split = self._rational_plan(expr, register)
            if split is not None:
                return split
            i = self._v.get("expr", expr) if register else self._v.index[("expr", expr)]
            return ("mono", sympy.Integer(1), [(i, 1)])
        idx = [self._v.get("expr", x) if register else self._v.index[("expr", x)] for x in syms]
        return ("poly", [(coef, list(zip(idx, mon))) for mon, coef in p.terms()])

    def _rational_plan(self, expr, register):
        """A value that divides by symbols (``1/(R*w0)``, ``X/R``, ``s*sqrt(X)/R``) as a
        polynomial in ring variables: numerator factors that are polynomials in symbols give
        ``expr`` variables of those symbols, other numerator factors one ``expr`` variable
        each; every factor of the denominator a ``recip`` variable (``1/w0``, ``1/(R1+R2)``).
        None where the expression has no such split (an irrational coefficient)."""
        def var(kind, x):
            return self._v.get(kind, x) if register else self._v.index[(kind, x)]

        def times(terms, other):
            out = {}
            for c1, m1 in terms:
                for c2, m2 in other:
                    m = dict(m1)
                    for i, k in m2.items():
                        m[i] = m.get(i, 0) + k
                    key = tuple(sorted(m.items()))
                    out[key] = out.get(key, 0) + c1 * c2
            return [(c, dict(k)) for k, c in out.items() if c != 0]

        num, den = sympy.fraction(sympy.together(expr))
        cn, nfac = num.as_coeff_mul()
        cd, dfac = den.as_coeff_mul()
        if not (cn.is_Rational and cd.is_Rational) or cd == 0 or (not dfac and not nfac):
            return None
        terms = [(cn / cd, {})]
        for f in nfac:
            syms = sorted(f.free_symbols, key=str)
            try:
                p = sympy.Poly(f, *syms)
                if not p.domain.is_QQ and not p.domain.is_ZZ:
                    raise sympy.PolynomialError
                idx = [var("expr", x) for x in syms]
                t = [(c, {i: k for i, k in zip(idx, mon) if k}) for mon, c in p.terms()]
            except sympy.PolynomialError:
                t = [(sympy.Integer(1), {var("expr", f): 1})]
            terms = times(terms, t)
        for f in dfac:
            base, k = f.as_base_exp()
            if not (k.is_Integer and k > 0) or base.is_number:
                base, k = f, 1
            if base.is_number:
                return None
            terms = times(terms, [(sympy.Integer(1), {var("recip", base): int(k)})])
        return ("poly", [(c, list(m.items())) for c, m in terms])

    def poly(self, expr, recip=False):
        """The ring polynomial of ``expr`` (or of ``1/expr`` with ``recip``)."""
        plan = self._plan(expr, recip)
        if plan[0] == "num":
            return self.ctx.constant(_q(plan[1]))
        if plan[0] == "mono":
            return self._mono(plan[1], plan[2])
        out = self.ctx.constant(0)
        for coef, mon in plan[1]:
            out += self._mono(coef, mon)
        return out

    def _mono(self, coef, idx):
        p = self.ctx.constant(_q(coef))
        for i, x in idx:
            if x:
                p = p * self.gens[i] ** x
        return p

    def _collect_vars(self):
        for e in self.circuit.elements:
            k = kinds.kind(e.kind)
            if _recip(k):
                self._scan(self._check_nonzero(e), True)
            elif k.passive and k.s_power == 0:
                self._scan(self._value(e), False)
            elif k.passive:
                self._scan(self._value(e), False)
                self._v.get("expr", S)
                self._scan(_times_s(k, self._value(e)), False)   # what is stamped: s*C, s*L
            elif k.source is not None and not e.controls:
                self._v.get("src", self._value(e), e.name)
            for coef, _ctl in e.controls:
                self._scan(coef.xreplace(self.subs) if self.subs else coef, False)

    def _check_nonzero(self, e):
        v = self._value(e)
        if v == 0:
            raise SheetError(f"resistor {e.name!r} has the value 0: use a wire (join the nodes) "
                             "or a 0 V voltage source", e.loc.line, e.loc.col)
        return v

    # ---------------------------------------------------------------- stamping
    def node(self, n):
        return self.node_index.get(n)     # None for ground

    def _add(self, i, j, v):
        if i is not None and j is not None:
            self.A.add(i, j, v)

    def _admittance(self, e):
        """The nodal entry of an admittance-stamped element: ``1/R`` (a ``recip`` ring
        variable), ``G``, ``s·C``, ``Y``."""
        k = kinds.kind(e.kind)
        if k.stamp != "admittance":
            raise ValueError(f"{k.word} {e.name!r} is not stamped as an admittance")
        v = self._value(e)
        if _recip(k):
            return self.poly(v, recip=True)
        return self.poly(_times_s(k, v))

    def through(self, name, _seen=()) -> LinForm:
        """Current through element ``name`` in its reference direction, as a linear form."""
        e = self.circuit.element(name)
        if name in _seen:
            raise SheetError(f"dependent source {name!r} is controlled by its own current",
                             e.loc.line, e.loc.col)
        if e.name in self.branch_index:
            return LinForm({self.branch_index[e.name]: self.ctx.constant(1)},
                           self.ctx.constant(0))
        if kinds.kind(e.kind).stamp == "current":
            if not e.controls:
                return LinForm({}, self.src_poly(e))
            return self.control_sum(e, _seen + (name,))
        y = self._admittance(e)
        a, b = (self.node(n) for n in e.nodes)
        f = LinForm({}, self.ctx.constant(0))
        if a is not None:
            f.coef[a] = y
        if b is not None:
            f.coef[b] = f.coef.get(b, 0) - y
        return f

    def src_poly(self, e):
        return self.gens[self._v.index[("src", e.name)]]

    def control_sum(self, e, seen=()) -> LinForm:
        out = LinForm({}, self.ctx.constant(0))
        for coef, ctl in e.controls:
            k = self.poly(coef.xreplace(self.subs) if self.subs else coef)
            if ctl.kind == "across":
                f = LinForm({}, self.ctx.constant(0))
                p, q = (self.node(n) for n in ctl.nodes)
                if p is not None:
                    f.coef[p] = self.ctx.constant(1)
                if q is not None:
                    f.coef[q] = f.coef.get(q, 0) - 1
            else:
                f = self.through(ctl.element, seen)
            for i, v in f.coef.items():
                out.coef[i] = out.coef.get(i, 0) + k * v
            out.const = out.const + k * f.const
        return out

    def _stamp(self):
        for e in self.circuit.elements:
            k = kinds.kind(e.kind)
            if k.stamp == "nullor":
                inp, inn, out = (self.node(n) for n in e.nodes)
                j = self.branch_index[e.name]
                self._add(out, j, 1)
                self._add(j, inp, 1)
                self._add(j, inn, -1)
                continue
            a, b = (self.node(n) for n in e.nodes)
            if e.name in self.branch_index:
                j = self.branch_index[e.name]
                self._add(a, j, 1)
                self._add(b, j, -1)
                self._add(j, a, 1)
                self._add(j, b, -1)
                if k.immittance == "impedance":              # v = Z·i: s·L, Z
                    self._add(j, j, -self.poly(_times_s(k, self._value(e))))
                elif e.controls:
                    f = self.control_sum(e)
                    for i, v in f.coef.items():
                        self._add(j, i, -v)
                    self._rhs(j, f.const)
                else:
                    self._rhs(j, self.src_poly(e))
            elif k.stamp == "current":
                if e.controls:
                    f = self.control_sum(e)
                    for i, v in f.coef.items():
                        self._add(a, i, v)
                        self._add(b, i, -v)
                    self._rhs(a, -f.const)
                    self._rhs(b, f.const)
                else:
                    v = self.src_poly(e)
                    self._rhs(a, -v)
                    self._rhs(b, v)
            else:
                y = self._admittance(e)
                self._add(a, a, y)
                self._add(b, b, y)
                self._add(a, b, -y)
                self._add(b, a, -y)

    def _rhs(self, i, v):
        if i is None:
            return
        if not isinstance(v, (int,)) and v.is_zero():
            return
        self._b[i] = self._b.get(i, self.ctx.constant(0)) + v

    # ---------------------------------------------------------------- well-posedness
    def regular(self, points: int = 3, seed: int = 20240611, max_terms: float = 2e6) -> bool:
        """Whether ``det A`` is not the zero polynomial, decided exactly.

        ``A`` is evaluated at random rational points and its determinant taken in exact
        rational arithmetic (python-flint ``fmpq_mat``): a nonzero value proves regularity.
        Where every point gives 0, the symbolic determinant (:func:`derive.solver.determinant.det`)
        decides, when its estimated size allows; beyond that the matrix counts as singular
        (a nonzero polynomial vanishing at all the points is vanishingly unlikely,
        Schwartz-Zippel lemma).
        """
        import random
        from derive.solver.determinant import det, estimate_det_terms
        if self.n == 0:
            return True
        rnd = random.Random(seed)
        nv = self.ctx.nvars()
        for _ in range(points):
            pt = [flint.fmpq(rnd.randint(1, 10 ** 9), rnd.randint(1, 10 ** 6)) for _ in range(nv)]
            m = flint.fmpq_mat(self.n, self.n)
            for i, row in enumerate(self.A.rows):
                for j, p in row.items():
                    m[i, j] = p(*pt)
            if m.det() != 0:
                return True
        if estimate_det_terms(self.A) <= max_terms:
            return not det(self.A).is_zero()
        return False

    # ---------------------------------------------------------------- right-hand sides
    def source_vars(self):
        return [v for v in self.vars if v.kind == "src"]

    def select(self, p, only: str | None = None, none: bool = False):
        """Substitute source variables: all kept (default), all zero (``none``), or only
        source ``only`` kept at value 1."""
        if not self.vars:
            return p
        values = {}
        for v in self.vars:
            if v.kind != "src":
                continue
            if none:
                values[v.name] = 0
            elif only is not None:
                values[v.name] = 1 if v.source == only else 0
        if not values:
            return p
        return p.subs(values)

    def rhs(self, only: str | None = None, none: bool = False) -> dict:
        out = {}
        for i, v in self._b.items():
            w = self.select(v, only, none)
            if not w.is_zero():
                out[i] = w
        return out

    def port_vector(self, plus, minus) -> dict:
        u = {}
        p, m = self.node(plus), self.node(minus)
        if p is not None:
            u[p] = self.ctx.constant(1)
        if m is not None:
            u[m] = self.ctx.constant(-1)
        return u


def _recip(k) -> bool:
    """Whether an element's nodal entry is the reciprocal of its value (a resistor: ``1/R``)."""
    return k.stamp == "admittance" and k.immittance == "impedance"


def _times_s(k, v):
    """The value times ``s`` to the kind's power: ``v``, ``s·C``, ``s·L``."""
    return v if k.s_power == 0 else S ** k.s_power * v


def _q(x):
    x = sympy.nsimplify(x) if not isinstance(x, sympy.Rational) else x
    if not isinstance(x, sympy.Rational):
        raise SheetError(f"the value {x} is not a rational number", 0, 0)
    return flint.fmpq(int(x.p), int(x.q))
