"""Noise of a circuit at a port: its sources, their transfers and the output density.

Sources (SHEET.md section 5):

* every resistor and conductance (unless ``noiseless``): thermal noise as a current source
  beside it, density ``4kT/R`` (``4kTG``) in A^2/Hz (Johnson-Nyquist); ``k`` the Boltzmann
  constant, exact in the SI (1.380649e-23 J/K), ``T`` the sheet's nominal temperature in
  kelvin (degrees Celsius + 273.15, exactly);
* every op-amp with ``noise EN nV/rtHz and IN pA/rtHz``: a voltage source ``en`` in series with
  its non-inverting input and a current source ``in`` from each input to the reference node
  (uncorrelated), white densities ``en^2`` (V^2/Hz) and ``in^2`` (A^2/Hz).

Capacitors, inductors, sources and the op-amp model's own ``rin``/``rout`` are noiseless
(the op-amp's noise is what its densities say). A general impedance or admittance has no
noise model here (its real part is unknown): the request is refused at the element's line
unless the element is marked ``noiseless``.

Each transfer ``H_k`` is a ratio of the circuit's one solver: the port voltage per unit of the
source, ``-det[[A, v_k], [u^T, 0]] / det A`` with ``u`` the port's incidence vector and ``v_k``
the source's right-hand-side vector (a unit current between the resistor's nodes; for ``en``
the op-amp's input law shifted by one volt). The output density is
``S(f) = sum_k S_k |H_k(j 2 pi f)|^2`` (sources uncorrelated), kept per contribution.
"""
from __future__ import annotations

from dataclasses import dataclass, field
from fractions import Fraction
from typing import Optional

import flint
import sympy
from flint import fmpq, fmpq_poly

from derive.circuit.build import S
from derive.errors import SheetError
from derive.forms.results import Context
from derive.sheet import kinds
from derive.sheet.model import OpAmp
from derive.solver import convert as edge
from derive.solver.cramer import Ratio

BOLTZMANN = Fraction(1380649, 10 ** 29)      # J/K, exact (SI 2019 definition)
KELVIN_OFFSET = Fraction(27315, 100)         # 0 deg C in kelvin, exact
F = sympy.Symbol("f")                        # frequency in Hz in the density
W = sympy.Symbol("omega")                    # angular frequency (internal)


@dataclass
class Source:
    """One noise source: ``name`` (the contributions key: ``R1``, ``U1.en``, ``U1.in+``),
    ``role`` ('thermal', 'en', 'in'), the element or op-amp it belongs to, its one-sided
    density ``density`` (sympy, in the circuit symbols: ``4kT/R``; A^2/Hz or V^2/Hz), the
    right-hand-side vector ``vector`` (ring polynomials by unknown index) or ``named`` (a
    solver vector name), and ``where`` (the nodes or the input it acts at)."""
    name: str
    role: str
    owner: str
    density: sympy.Expr
    unit: str
    named: Optional[tuple] = None
    vector: Optional[dict] = None
    nodes: tuple = ()
    opamp: Optional[str] = None
    core: Optional[str] = None       # en: the element whose law the source shifts
    shown: Optional[sympy.Expr] = None   # the density as displayed (``4kT/R`` with k, T)


@dataclass
class Contribution:
    source: Source
    transfer: Ratio                  # exact ratio over the ring variables (with s)
    H: sympy.Expr                    # transfer in the circuit symbols (and s)
    mag2: sympy.Expr                 # |H(j 2 pi f)|^2 in the circuit symbols and f
    density: sympy.Expr              # S_k |H|^2 (V^2/Hz)
    P: Optional[fmpq_poly] = None    # |H(j w)|^2 = P(w)/Q(w) at nominal values (None: no value)
    Q: Optional[fmpq_poly] = None
    S_value: Optional[Fraction] = None   # S_k at nominal values


@dataclass
class NoiseModel:
    temperature_c: Fraction
    kT4: Fraction                     # 4kT in J
    sources: list = field(default_factory=list)
    contributions: list = field(default_factory=list)
    noiseless: list = field(default_factory=list)     # (name, why) of parts taken noiseless
    port: tuple = ()
    shown_values: dict = field(default_factory=dict)  # display symbols k, T -> exact values


def temperature_kelvin(sheet) -> Fraction:
    return sheet.nominal_temperature + KELVIN_OFFSET


def _q(x: Fraction) -> sympy.Rational:
    return sympy.Rational(x.numerator, x.denominator)


def sources(ctx: Context, req) -> NoiseModel:
    """The noise sources of the circuit (see the module doc); a located error for a general
    impedance or admittance that is not marked ``noiseless``."""
    c = ctx.circuit
    t0 = c.sheet.nominal_temperature
    kT4 = 4 * BOLTZMANN * (t0 + KELVIN_OFFSET)
    model = NoiseModel(t0, kT4, port=ctx.port(req.port))
    k_sym, t_sym = sympy.Symbol("k"), sympy.Symbol("T")
    if not ({"k", "T"} & set(c.symbols)):
        model.shown_values = {k_sym: _q(BOLTZMANN), t_sym: _q(t0 + KELVIN_OFFSET)}
    subs = ctx.numeric_subs()
    system = ctx.system()
    seen_opamps = set()
    for e in c.elements:
        k = kinds.kind(e.kind)
        origin = e.origin
        if isinstance(origin, OpAmp):
            op = e.part_of or e.name
            if e.internal and e.kind == "resistor":
                model.noiseless.append((e.name, "part of the op-amp model: its noise is the "
                                        "op-amp's own densities"))
                continue
            if op in seen_opamps or not (e.kind == "nullor" or e.dependent):
                continue
            seen_opamps.add(op)
            model.sources += _opamp_sources(ctx, system, op, origin, e, subs, model)
            continue
        if k.noise is None:
            continue
        noiseless = bool(getattr(origin, "noiseless", False))
        if k.noise == "unknown":
            if noiseless:
                model.noiseless.append((e.name, f"{k.word} marked noiseless"))
                continue
            raise SheetError(f"find noise: {k.word} {e.name!r} has no noise model (its "
                             "resistive part is not known here)", e.loc.line, e.loc.col,
                             hint="write its resistive part as a resistor, or mark the element "
                                  "'noiseless' if it makes no noise")
        if noiseless:
            model.noiseless.append((e.name, f"{k.word} marked noiseless"))
            continue
        value = e.value.xreplace(subs) if subs else e.value
        g = kinds.admittance(e.kind, value, S)          # 1/R or G
        shown = 4 * k_sym * t_sym * g if model.shown_values else _q(kT4) * g
        model.sources.append(Source(e.name, "thermal", e.name, _q(kT4) * g, "A^2/Hz",
                                    named=("port", *e.nodes), nodes=tuple(e.nodes),
                                    shown=shown))
    return model


def _opamp_sources(ctx, system, op, origin: OpAmp, core, subs, model) -> list:
    """en in series with the non-inverting input, in from each input to the reference."""
    out = []
    c = ctx.circuit
    en, inn_ = origin.voltage_noise, origin.current_noise
    if core.kind == "nullor":
        inp, inn, _drive = core.nodes
    else:
        inp, inn = core.controls[0][1].nodes
    if en is None and inn_ is None:
        model.noiseless.append((op, "op-amp with no noise densities given"))
        return out
    if en:
        vec = {}
        j = system.branch_index[core.name]
        if core.kind == "nullor":
            vec[j] = system.ctx.constant(-1)            # v(inp) + en - v(inn) = 0
        else:                                            # v(drive) = A (v(inp) + en - v(inn))
            coef = core.controls[0][0]
            vec[j] = system.poly(coef.xreplace(subs) if subs else coef)
        rin = f"{op}.rin"
        if any(x.name == rin for x in c.elements):       # rin carries (v(inp) + en - v(inn))/Ri
            lf = system.through(rin).coef
            a, b = system.node(inp), system.node(inn)
            y = lf[a] if a is not None else -lf[b]
            for idx, sg in ((a, -1), (b, 1)):
                if idx is not None:
                    vec[idx] = vec.get(idx, system.ctx.constant(0)) + sg * y
        out.append(Source(f"{op}.en", "en", op, _q(en) ** 2, "V^2/Hz", vector=vec,
                          nodes=(inp, inn), opamp=op, core=core.name,
                          shown=_shown(model, f"E_{op}", en, c)))
    if inn_:
        for label, node in (("in+", inp), ("in-", inn)):
            if node == c.ground:
                model.noiseless.append((f"{op}.{label}", f"the input is the reference node "
                                        f"{c.ground}: its current noise flows in a short"))
                continue
            out.append(Source(f"{op}.{label}", "in", op, _q(inn_) ** 2, "A^2/Hz",
                              named=("port", node, c.ground), nodes=(node, c.ground), opamp=op,
                              shown=_shown(model, f"I_{op}", inn_, c)))
    return out


def _shown(model, name, value: Fraction, circuit):
    """The displayed density of an op-amp source: ``e_U1^2`` (its value in
    ``model.shown_values``), or the number where the name is taken by a circuit symbol."""
    key = name.replace(".", "_")
    if key in circuit.symbols or not model.shown_values:
        return _q(value) ** 2
    sym = sympy.Symbol(key)
    model.shown_values[sym] = _q(value)
    return sym ** 2


def transfer(ctx, req, src: Source) -> Ratio:
    """The port's open-circuit voltage per unit of ``src`` (every other source zeroed), a
    ratio of bordered determinants of the circuit's one solver."""
    solver = ctx.solver(req.loc)
    plus, minus = ctx.port(req.port)
    u = ("port", plus, minus)
    if src.named is not None:
        num = solver.bordered(src.named, u)
    else:
        system = solver.system
        num = solver.det(system.A.bordered(src.vector, solver.vector(u)),
                         ("bordered", ("noise", src.name), u))
    return Ratio(-num, solver.d0(), solver.system).cancel()


# ------------------------------------------------------------------ |H(j w)|^2
def _even_odd(p):
    """(re, im) of polynomial ``p`` in ``s`` at ``s = j·omega`` (sympy, real coefficients)."""
    poly = sympy.Poly(p, S)
    re, im = sympy.Integer(0), sympy.Integer(0)
    for (k,), c in poly.terms():
        c = sympy.factor(c)
        if k % 2 == 0:
            re += (-1) ** (k // 2) * c * W ** k
        else:
            im += (-1) ** ((k - 1) // 2) * c * W ** k
    return re, im


def _mag2_factor(p):
    """|p(j omega)|^2 of a factor ``p`` (a power of a polynomial, or free of ``s``)."""
    base, ex = p.as_base_exp() if p.is_Pow else (p, sympy.Integer(1))
    if S not in base.free_symbols:
        return p ** 2
    re, im = _even_odd(sympy.expand(base))
    sq = sympy.Poly(sympy.expand(re ** 2 + im ** 2), W)
    body = sympy.Add(*[sympy.factor(c) * W ** k for (k,), c in sq.terms()])
    return body ** ex


def mag2(H) -> sympy.Expr:
    """|H(j 2 pi f)|^2 of a rational function ``H`` of ``s`` with real coefficients, as a
    rational function of ``f`` in the circuit symbols (factor by factor: each polynomial
    factor ``p(s)`` becomes ``Re^2 + Im^2`` of ``p(j omega)``)."""
    num, den = sympy.fraction(H)
    out = []
    for part in (num, den):
        factors = part.args if part.is_Mul else (part,)
        out.append(sympy.Mul(*[_mag2_factor(x) for x in factors]))
    return (out[0] / out[1]).xreplace({W: 2 * sympy.pi * F})


# ------------------------------------------------------------------ at nominal values
def _s_polys(ratio: Ratio, nominal: dict):
    """(num, den) of ``ratio`` as fmpq_poly in ``s`` at nominal values; None where a symbol
    of the ratio has no nominal value."""
    system = ratio.system
    values, s_name = {}, None
    used = set(edge.used_vars(ratio))
    for k, v in enumerate(system.vars):
        if v.kind == "expr" and v.expr == S:
            s_name = k
            continue
        if k not in used:
            values[v.name] = fmpq(0)
            continue
        x = edge.var_value(v, nominal)
        if x is None or x is edge.NOT_EXACT:
            return None
        values[v.name] = x

    def uni(p):
        q = p.subs(values) if values else p
        coeffs = {}
        for exps, c in q.to_dict().items():
            e = exps[s_name] if s_name is not None else 0
            coeffs[e] = coeffs.get(e, 0) + c
        n = max(coeffs) + 1 if coeffs else 1
        return fmpq_poly([coeffs.get(i, 0) for i in range(n)])
    if not system.vars:
        return uni(ratio.num), uni(ratio.den)
    num, den = uni(ratio.num), uni(ratio.den)
    if den.is_zero():
        return None
    return num, den


def abs2_poly(p: fmpq_poly) -> fmpq_poly:
    """|p(j w)|^2 as a polynomial in ``w`` (exact): p(jw)·p(-jw)."""
    re, im = [], []
    for k in range(p.degree() + 1):
        c = p[k]
        if k % 2 == 0:
            re.append((k, c * (-1) ** (k // 2)))
        else:
            im.append((k, c * (-1) ** ((k - 1) // 2)))
    r = fmpq_poly([0]); i = fmpq_poly([0])
    for k, c in re:
        r += c * fmpq_poly([0] * k + [1])
    for k, c in im:
        i += c * fmpq_poly([0] * k + [1])
    return r * r + i * i


def nominal_mag2(ratio: Ratio, nominal: dict):
    """(P, Q): |H(j w)|^2 = P(w)/Q(w) at nominal values, reduced, Q monic; None without value."""
    polys = _s_polys(ratio, nominal)
    if polys is None:
        return None
    P, Q = abs2_poly(polys[0]), abs2_poly(polys[1])
    g = P.gcd(Q)
    if not P.is_zero() and g.degree() > 0:
        P, Q = P // g, Q // g
    lead = Q[Q.degree()]
    return P / lead, Q / lead


def contributions(ctx, req) -> NoiseModel:
    """Sources with their transfers, |H|^2 and density contributions (cached per request)."""
    key = ("noise", req.port)
    if key in ctx.cache:
        return ctx.cache[key]
    if "f" in ctx.circuit.symbols:
        raise SheetError("find noise: the density is written in the frequency f, and this "
                         "sheet has a symbol named 'f'", req.loc.line, req.loc.col,
                         hint="rename the symbol f")
    model = sources(ctx, req)
    nominal = ctx.nominal
    for src in model.sources:
        r = transfer(ctx, req, src)
        H = edge.to_sympy(r) if not r.is_zero else sympy.Integer(0)
        m2 = mag2(H) if not r.is_zero else sympy.Integer(0)
        con = Contribution(src, r, H, m2, src.density * m2)
        sval = src.density.xreplace(nominal)
        if sval.is_Rational:
            con.S_value = Fraction(int(sval.p), int(sval.q))
            if r.is_zero:
                con.P, con.Q = fmpq_poly([0]), fmpq_poly([1])
            else:
                pq = nominal_mag2(r, nominal)
                if pq is not None:
                    con.P, con.Q = pq
        model.contributions.append(con)
    ctx.cache[key] = model
    return model
