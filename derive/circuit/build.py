"""The circuit: a sheet flattened (blocks expanded, op-amps modelled) and validated.

:func:`build_circuit` is the only entry point. It resolves every name, gives every element
its value as a sympy expression over the circuit's free symbols, and rejects circuits that
cannot be solved (floating nodes, loops of voltage sources, cut sets of current sources,
dependent sources that are not linear in their controls) with a located :class:`SheetError`.
"""
from __future__ import annotations

from dataclasses import dataclass, field
from fractions import Fraction
from typing import Optional

import sympy

from derive.errors import SheetError
from derive.sheet import kinds
from derive.sheet.expressions import names_in, to_sympy
from derive.sheet.model import Call, Element, Loc, Name, Nominal, OpAmp, Sheet, Use
from derive.circuit.naming import key_of
from derive.circuit.requests import check_requests
from derive.circuit.topology import check_topology, dependent_cuts

S = sympy.Symbol("s")




@dataclass
class SymbolInfo:
    """A free symbol of the circuit's results."""
    key: str
    display: str
    kind: str                      # element kind, or 'param' for other symbols
    unit: Optional[str]
    nominal: Optional[Fraction] = None
    tolerance: Optional[Fraction] = None   # relative (0.01 for ±1%)
    loc: Optional[Loc] = None

    @property
    def symbol(self) -> sympy.Symbol:
        return sympy.Symbol(self.key)


@dataclass
class Control:
    """``across(a, b)`` (kind 'across', nodes (a, b)) or ``through(X)`` (kind 'through')."""
    kind: str
    nodes: tuple = ()
    element: str = ""


@dataclass
class CElement:
    """A flattened element.

    ``kind``: resistor, conductance, capacitor, inductor, impedance, admittance, vsource,
    isource (independent or dependent: ``controls`` non-empty), or nullor (ideal op-amp:
    ``nodes`` = (inp, inn, out)). ``value`` is the element's value (resistance, capacitance,
    source voltage, ...) over the circuit symbols; for a dependent source it is None and
    ``controls`` holds (coefficient, Control) pairs.
    """
    name: str
    kind: str
    nodes: tuple
    value: Optional[sympy.Expr]
    loc: Loc
    controls: list = field(default_factory=list)
    internal: bool = False
    part_of: Optional[str] = None
    # the sheet statement (model.Element or model.OpAmp) this element was built from: it
    # carries the design-review attributes (ratings, tc, noiseless, op-amp noise) through
    # flattening; None for elements made by later stages
    origin: object = None

    @property
    def key(self) -> str:
        return key_of(self.name)

    @property
    def dependent(self) -> bool:
        return bool(self.controls)

    @property
    def independent_source(self) -> bool:
        return kinds.kind(self.kind).source is not None and not self.controls


@dataclass
class Circuit:
    sheet: Sheet
    ground: str
    nodes: list
    elements: list
    symbols: dict                   # key -> SymbolInfo
    ports: dict                     # name -> (plus, minus, Loc)
    requests: list
    numeric: set = field(default_factory=set)   # keys to substitute before solving
    # node sets joined to the rest only through current sources, some dependent: well posed
    # only if the nodal matrix is regular, which the solver decides
    # (derive.solver.well_posed.check_well_posed)
    dependent_cuts: list = field(default_factory=list)

    def element(self, name: str) -> CElement:
        for e in self.elements:
            if e.name == name:
                return e
        raise KeyError(name)

    def nominal_values(self) -> dict:
        """sympy Symbol -> Rational for every symbol with a nominal value."""
        return {sympy.Symbol(k): sympy.Rational(v.nominal.numerator, v.nominal.denominator)
                for k, v in self.symbols.items() if v.nominal is not None}


class _Scope:
    """Name resolution inside one instance (or the top level)."""

    def __init__(self, prefix, elements, mappings, parent, node_map, loc=None):
        self.prefix, self.elements, self.mappings = prefix, elements, mappings
        self.parent, self.node_map, self.loc = parent, node_map, loc

    def node(self, name: str) -> str:
        if name in self.node_map:
            return self.node_map[name]
        return self.prefix + name

    def element_name(self, name: str) -> str:
        if name in self.elements:
            return self.prefix + name
        if self.parent is not None:
            return self.parent.element_name(name)
        return name

    def symbol(self, node: Name, builder: "_Builder") -> sympy.Expr:
        if node.name in self.mappings:
            expr, _loc = self.mappings[node.name]
            return builder.expr(expr, self.parent)
        if node.name in self.elements:
            return builder.use_symbol(self.prefix + node.name, node.loc)
        if self.parent is not None:
            return self.parent.symbol(node, builder)
        return builder.use_symbol(node.name, node.loc)


class _Builder:
    def __init__(self, sheet: Sheet):
        self.sheet = sheet
        self.ground = sheet.ground or "gnd"
        self.elements: list[CElement] = []
        self.used: dict[str, Loc] = {}        # display names of symbols met in expressions
        self.own: dict[str, tuple] = {}       # display -> (kind, Value) for element symbols
        self.keys: dict[str, str] = {}        # key -> display, for collision checks

    # -- names
    def register_key(self, display: str, loc: Loc):
        k = key_of(display)
        other = self.keys.get(k)
        if other is not None and other != display:
            raise SheetError(f"the name {display!r} collides with {other!r} (both are written "
                             f"{k!r} in formulas)", loc.line, loc.col)
        self.keys[k] = display

    def use_symbol(self, display: str, loc: Loc) -> sympy.Symbol:
        if display == "s":
            return S
        self.used.setdefault(display, loc)
        self.register_key(display, loc)
        return sympy.Symbol(key_of(display))

    def expr(self, node, scope: _Scope, call=None):
        return to_sympy(node, lambda n: scope.symbol(n, self), call)

    # -- statements
    def expand(self, body, scope: _Scope, stack: tuple):
        for st in body:
            if isinstance(st, Element):
                self.add_element(st, scope)
            elif isinstance(st, OpAmp):
                self.add_opamp(st, scope)
            elif isinstance(st, Use):
                self.add_use(st, scope, stack)
            elif isinstance(st, Nominal) and stack:
                # a block's values name the sheet's own symbols, shared by every instance:
                # a nominal here used to be ignored silently (values null); refused instead
                raise SheetError(f"a 'nominal' line cannot stand inside block '{stack[-1]}': "
                                 f"the symbol '{st.name}' is shared by every instance, so its "
                                 "nominal value belongs at the top level of the sheet",
                                 st.loc.line, st.loc.col,
                                 hint=f"move 'nominal {st.name} = ...' out of the block")

    def value_of(self, display, kind, value, scope, loc, mapped=None):
        """The element value expression: mapped by ``with``, an expression, or its own symbol."""
        if mapped is not None:
            return self.expr(mapped, scope.parent)
        if value is not None and value.expr is not None:
            return self.expr(value.expr, scope)
        self.own[display] = (kind, value, loc)
        return self.use_symbol(display, loc)

    def add_element(self, st: Element, scope: _Scope):
        name = scope.prefix + st.name
        self.register_key(name, st.loc)
        nodes = tuple(scope.node(n) for n in st.nodes)
        mapped = scope.mappings.get(st.name, (None,))[0]
        if kinds.kind(st.kind).source is not None and st.value is not None and st.value.expr is not None \
                and mapped is None and _has_control(st.value.expr):
            controls = self.controls(st.value.expr, scope, st.loc)
            self.elements.append(CElement(name, st.kind, nodes, None, st.loc, controls,
                                          origin=st))
            return
        value = self.value_of(name, st.kind, st.value, scope, st.loc, mapped)
        self.elements.append(CElement(name, st.kind, nodes, value, st.loc, origin=st))

    def controls(self, expr, scope: _Scope, loc: Loc) -> list:
        placeholders: dict[sympy.Symbol, Control] = {}

        def call(c: Call):
            if c.func == "across":
                if len(c.args) != 2 or not all(isinstance(a, Name) for a in c.args):
                    raise SheetError("across(...) takes two node names", c.loc.line, c.loc.col)
                ctl = Control("across", nodes=tuple(scope.node(a.name) for a in c.args))
                self.control_locs.append((ctl, c.args[0].loc, c.args[1].loc))
            else:
                if len(c.args) != 1 or not isinstance(c.args[0], Name):
                    raise SheetError("through(...) takes one element name", c.loc.line, c.loc.col)
                ctl = Control("through", element=scope.element_name(c.args[0].name))
                self.control_locs.append((ctl, c.args[0].loc, None))
            p = sympy.Dummy(f"ctl{len(placeholders)}")
            placeholders[p] = ctl
            return p

        e = sympy.expand(self.expr(expr, scope, call))
        cs = list(placeholders)
        zero = {c: 0 for c in cs}
        if e.subs(zero) != 0:
            raise SheetError("a dependent source must be linear in its controls: this value has "
                             "a term without across(...) or through(...)", loc.line, loc.col)
        out = []
        for c in cs:
            coef = sympy.expand(e.diff(c))
            if coef.free_symbols & set(cs):
                raise SheetError("a dependent source must be linear in its controls "
                                 "(a control is multiplied by a control, divided, or under a "
                                 "root)", loc.line, loc.col)
            out.append((sympy.factor(coef), placeholders[c]))
        return out

    def add_opamp(self, st: OpAmp, scope: _Scope):
        name = scope.prefix + st.name
        self.register_key(name, st.loc)
        inp, inn, out = (scope.node(n) for n in (*st.inputs, st.output))

        def part(label, v):
            display = f"{name}.{label}"
            if v.expr is not None:
                return self.expr(v.expr, scope)
            self.own[display] = ({"gain": "param", "rin": "resistor", "rout": "resistor"}[label],
                                 v, v.loc)
            return self.use_symbol(display, v.loc)

        if st.rin is not None:
            self.elements.append(CElement(f"{name}.rin", "resistor", (inp, inn),
                                          part("rin", st.rin), st.loc, internal=True, part_of=name,
                                          origin=st))
        drive = out if st.rout is None else f"{name}.x"
        if st.gain is None:
            self.elements.append(CElement(name, "nullor", (inp, inn, drive), None, st.loc,
                                          part_of=name, origin=st))
        else:
            a = part("gain", st.gain)
            self.elements.append(CElement(f"{name}.out", "vsource", (drive, self.ground), None,
                                          st.loc, [(a, Control("across", nodes=(inp, inn)))],
                                          internal=True, part_of=name, origin=st))
        if st.rout is not None:
            self.elements.append(CElement(f"{name}.rout", "resistor", (drive, out),
                                          part("rout", st.rout), st.loc, internal=True,
                                          part_of=name, origin=st))

    def add_use(self, st: Use, scope: _Scope, stack: tuple):
        block = self.sheet.blocks.get(st.block)
        if block is None:
            raise SheetError(f"unknown block {st.block!r}", st.loc.line, st.loc.col)
        if st.block in stack:
            chain = " -> ".join(stack + (st.block,))
            raise SheetError(f"block {st.block!r} uses itself ({chain})", st.loc.line, st.loc.col)
        if len(st.nodes) != len(block.terminals):
            raise SheetError(f"block {st.block!r} has {len(block.terminals)} terminals "
                             f"({', '.join(block.terminals)}), but {len(st.nodes)} nodes are "
                             "given", st.loc.line, st.loc.col)
        local = {b.name for b in block.body if isinstance(b, (Element, OpAmp))}
        inner_names = set(local)
        for b in block.body:
            v = getattr(b, "value", None)
            if v is not None and v.expr is not None:
                inner_names |= {n.name for n in names_in(v.expr)}
            for part in ("gain", "rin", "rout"):
                pv = getattr(b, part, None)
                if pv is not None and pv.expr is not None:
                    inner_names |= {n.name for n in names_in(pv.expr)}
        for m, mloc in st.mapping_locs.items():
            if m not in inner_names:
                raise SheetError(f"block {st.block!r} has no symbol {m!r} to map", mloc.line,
                                 mloc.col)
        node_map = {t: scope.node(n) for t, n in zip(block.terminals, st.nodes)}
        node_map.setdefault(self.ground, self.ground)
        mappings = {k: (v, st.mapping_locs.get(k, st.loc)) for k, v in st.mappings.items()}
        inner = _Scope(scope.prefix + st.instance + ".", local, mappings, scope, node_map, st.loc)
        self.expand(block.body, inner, stack + (st.block,))


def _has_control(node) -> bool:
    if isinstance(node, Call):
        return node.func in ("across", "through") or any(_has_control(a) for a in node.args)
    for attr in ("left", "right", "operand"):
        if hasattr(node, attr) and _has_control(getattr(node, attr)):
            return True
    return False


def build_circuit(sheet: Sheet) -> Circuit:
    """Flatten and validate a parsed sheet."""
    b = _Builder(sheet)
    b.control_locs = []
    top = _Scope("", {e.name for e in sheet.body if isinstance(e, (Element, OpAmp))}, {}, None, {})
    b.expand(sheet.body, top, ())
    if not b.elements:
        raise SheetError("the sheet has no elements", 1, 1)
    names = {e.name for e in b.elements}
    try:
        nodes = check_topology(b.elements, b.ground, sheet.ground_loc)
    except SheetError as e:
        cut = getattr(e, "floating", set())
        hit = [p.name for p in sheet.ports if len({p.plus, p.minus} & cut) == 1]
        if hit and e.hint is None:
            e.hint = (f"port {hit[0]!r} joins these nodes to the rest of the circuit by "
                      "nothing: it sees an open circuit (infinite resistance), so no "
                      "Thevenin equivalent exists")
        raise
    node_set = set(nodes)
    for ctl, l1, l2 in b.control_locs:
        if ctl.kind == "across":
            for n, l in zip(ctl.nodes, (l1, l2)):
                if n not in node_set:
                    raise SheetError(f"unknown node {n!r} in across(...)", l.line, l.col)
        elif ctl.element not in names:
            raise SheetError(f"through({ctl.element}): no element of that name", l1.line, l1.col)
        else:
            target = next(e for e in b.elements if e.name == ctl.element)
            if target.kind == "nullor":
                raise SheetError(f"through({ctl.element}): the current of an ideal op-amp's "
                                 "output is not a control this tool offers", l1.line, l1.col)
    symbols = _symbols(b, sheet)
    ports = {}
    for p in sheet.ports:
        for n, l in zip((p.plus, p.minus), p.node_locs):
            if n not in node_set:
                raise SheetError(f"unknown node {n!r} in port {p.name!r}", l.line, l.col)
        if p.plus == p.minus:
            raise SheetError(f"port {p.name!r} has the same node {p.plus!r} at both ends",
                             p.loc.line, p.loc.col)
        ports[p.name] = (p.plus, p.minus, p.loc)
    numeric = set()
    for stmt in sheet.numeric:
        for n, l in zip(stmt.names, stmt.name_locs):
            k = key_of(n)
            if k not in symbols:
                raise SheetError(f"numeric: unknown symbol {n!r}", l.line, l.col)
            if symbols[k].nominal is None:
                raise SheetError(f"numeric: {n!r} has no nominal value", l.line, l.col)
            numeric.add(k)
    c = Circuit(sheet, b.ground, nodes, b.elements, symbols, ports, list(sheet.requests), numeric)
    _real_at_nominal(c)
    c.dependent_cuts = dependent_cuts(c.elements, c.ground, c.nodes)
    check_requests(c)
    return c



def _real_at_nominal(c: Circuit) -> None:
    """A value that is not a real number at nominal values (``sqrt(x)`` with x < 0) is
    refused at its element: every number, sensitivity and tolerance of it would be complex."""
    nominal = c.nominal_values()
    known = set(nominal)
    for e in c.elements:
        if e.value is None or not e.value.free_symbols or \
                not e.value.free_symbols <= known:
            continue
        v = e.value.xreplace(nominal)
        if v.is_number and v.is_extended_real is False and v.is_finite:
            shown = ", ".join(f"{x} = {nominal[x]}" for x in sorted(e.value.free_symbols, key=str))
            raise SheetError(f"the value of {e.part_of or e.name} is not a real number at "
                             f"nominal values ({shown})", e.loc.line, e.loc.col,
                             hint="a value under a square root must not be negative")


def _symbols(b: _Builder, sheet: Sheet) -> dict:
    nominals = {}
    for n in sheet.nominals:
        if n.name in nominals:
            raise SheetError(f"nominal {n.name!r} is given twice", n.loc.line, n.loc.col)
        nominals[n.name] = n
    out = {}
    for display, loc in b.used.items():
        k = key_of(display)
        kind, value, eloc = b.own.get(display, ("param", None, loc))
        unit = None if kind == "param" else kinds.kind(kind).unit
        info = SymbolInfo(k, display, kind, unit, loc=eloc)
        src = None
        if value is not None and value.quantity is not None:
            src = (value.quantity, value.tolerance)
        elif display in nominals:
            src = (nominals[display].quantity, nominals[display].tolerance)
        if src is not None:
            q, tol = src
            info.nominal = q.value
            if q.unit is not None:
                info.unit = q.unit
            info.tolerance = _relative(q, tol)
        out[k] = info
    for name, n in nominals.items():
        if key_of(name) not in out:
            out[key_of(name)] = SymbolInfo(key_of(name), name, "param", n.quantity.unit,
                                           n.quantity.value, _relative(n.quantity, n.tolerance),
                                           n.loc)
    return out


def _relative(q, tol) -> Optional[Fraction]:
    """A tolerance as a fraction of the nominal value (absolute ones divided by it)."""
    if tol is None:
        return None
    if tol.relative:
        return tol.value
    return abs(tol.value / q.value) if q.value != 0 else None
