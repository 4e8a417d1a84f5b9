"""Series-parallel reduction with source transformations, as a hand derivation does it.

Every element becomes a *branch* between two nodes: a Thévenin branch ``V_ab = E + Z*i``
(resistor, inductor, impedance, voltage source ...) or an ideal current branch ``i = K``
(current source). Repeatedly:

* two branches between the same nodes combine in parallel
  (``Z = Z1*Z2/(Z1+Z2)``, ``E = (E1*Z2 + E2*Z1)/(Z1+Z2)``: both sources transformed to
  current sources, added, and transformed back);
* two branches meeting at a node nothing else touches combine in series
  (``E = E1 + E2``, ``Z = Z1 + Z2``);
* a branch hanging from a node nothing else touches carries no current and is dropped.

If the port's two nodes end up joined by one branch, that branch is the Thévenin
equivalent: ``vth = E``, ``rth = Z``. Circuits with dependent sources or op-amps are not
reduced this way (they go to nodal analysis).
"""
from __future__ import annotations

import heapq
import itertools
from dataclasses import dataclass

import sympy

from derive.circuit.build import S
from derive.sheet import kinds, quantities


class Members:
    """The elements a branch stands for, in order, as a join of two parts (so a merge costs
    O(1) and a chain of N merges O(N) memory, not O(N^2)): its ``count``, its first names
    (``head``, up to two) and its last, and every name on iteration (flattened then).

    >>> m = Members.join(Members.of("R1"), Members.join(Members.of("R2"), Members.of("R3")))
    >>> len(m), list(m), m.head, m.last
    (3, ['R1', 'R2', 'R3'], ('R1', 'R2'), 'R3')
    """
    __slots__ = ("parts", "count", "head", "last")

    def __init__(self, parts, count, head, last):
        self.parts, self.count, self.head, self.last = parts, count, head, last

    @staticmethod
    def of(name: str) -> "Members":
        return Members((name,), 1, (name,), name)

    @staticmethod
    def join(x: "Members", y: "Members") -> "Members":
        return Members((x, y), x.count + y.count, (x.head + y.head)[:2], y.last)

    def __len__(self) -> int:
        return self.count

    def __iter__(self):
        stack = [self]
        while stack:
            m = stack.pop()
            if isinstance(m, str):
                yield m
            else:
                stack.extend(reversed(m.parts))

    def __eq__(self, other) -> bool:
        if isinstance(other, (list, tuple)):
            return len(other) == self.count and list(self) == list(other)
        return isinstance(other, Members) and list(self) == list(other)

    __hash__ = None

    def __repr__(self) -> str:
        return f"Members({list(self) if self.count <= 12 else self.count})"


@dataclass
class Branch:
    name: str
    a: str
    b: str
    E: sympy.Expr = sympy.Integer(0)     # Thévenin voltage (a relative to b, open)
    Z: sympy.Expr = sympy.Integer(0)     # impedance
    K: sympy.Expr = None                 # current a->b of an ideal current branch
    members: Members = None

    def __post_init__(self):
        if self.members is None:
            self.members = Members((), 0, (), None)
        elif not isinstance(self.members, Members):     # a list of names
            names = list(self.members)
            m = None
            for n in names:
                m = Members.of(n) if m is None else Members.join(m, Members.of(n))
            self.members = m if m is not None else Members((), 0, (), None)

    @property
    def ideal_current(self) -> bool:
        return self.K is not None

    def flipped(self) -> "Branch":
        return Branch(self.name, self.b, self.a, -self.E, self.Z,
                      None if self.K is None else -self.K, self.members)


def _src(name):
    return sympy.Symbol(f"_src_{name}")


def branches_of(circuit, subs=None):
    """Branches of a circuit, or None if it has parts that are not two-terminal."""
    out = []
    for e in circuit.elements:
        k = kinds.kind(e.kind)
        if e.controls or k.terminals != 2:
            return None
        v = e.value.xreplace(subs) if subs and e.value is not None else e.value
        a, b = e.nodes
        if k.passive:
            z = kinds.impedance(e.kind, v, S)
            out.append(Branch(e.name, a, b, sympy.Integer(0), z, None, [e.name]))
        elif k.source == "voltage":
            out.append(Branch(e.name, a, b, _src(e.name), sympy.Integer(0), None, [e.name]))
        elif k.source == "current":
            out.append(Branch(e.name, a, b, sympy.Integer(0), sympy.oo, _src(e.name), [e.name]))
        else:
            raise ValueError(f"{k.word} {e.name!r} has no branch of its own")
    return out


def is_open(b: Branch) -> bool:
    """A branch of infinite impedance without a source (e.g. a conductance of value 0)."""
    return not b.ideal_current and b.Z in (sympy.zoo, sympy.oo) and b.E == 0


def parallel(x: Branch, y: Branch, name) -> Branch:
    if y.a != x.a:
        y = y.flipped()
    both = Members.join(x.members, y.members)
    if x.ideal_current and y.ideal_current:
        return Branch(name, x.a, x.b, K=x.K + y.K, Z=sympy.oo, members=both)
    if x.ideal_current or y.ideal_current:
        i, t = (x, y) if x.ideal_current else (y, x)
        return Branch(name, t.a, t.b, t.E - i.K * t.Z, t.Z, members=both)
    for o, k in ((x, y), (y, x)):       # an open (infinite impedance, no source) drops out
        if is_open(o):
            return Branch(name, k.a, k.b, k.E, k.Z, members=both)
    if x.Z == 0:
        return Branch(name, x.a, x.b, x.E, x.Z, members=both)
    if y.Z == 0:
        return Branch(name, y.a, y.b, y.E, y.Z, members=both)
    den = x.Z + y.Z
    if x.E == 0 and y.E == 0:           # no source: 0 without asking sympy about den
        return Branch(name, x.a, x.b, sympy.Integer(0), x.Z * y.Z / den, members=both)
    return Branch(name, x.a, x.b, (x.E * y.Z + y.E * x.Z) / den, x.Z * y.Z / den,
                  members=both)


def series(x: Branch, y: Branch, mid, name) -> Branch:
    if x.b != mid:
        x = x.flipped()
    if y.a != mid:
        y = y.flipped()
    both = Members.join(x.members, y.members)
    if x.ideal_current:
        return Branch(name, x.a, y.b, K=x.K, Z=sympy.oo, members=both)
    if y.ideal_current:
        return Branch(name, x.a, y.b, K=y.K, Z=sympy.oo, members=both)
    return Branch(name, x.a, y.b, x.E + y.E, x.Z + y.Z, members=both)


class Namer:
    """Names for the intermediate quantities of a reduction (``Zeq1``, ``Veq1``, ...),
    avoiding the circuit's own symbols; ``defs`` lists (Symbol, expression) in order."""

    def __init__(self, reserved=()):
        self.reserved = set(reserved)
        self.count = 0
        self.defs = []

    def branch_name(self):
        self.count += 1
        return f"{self.count}"

    def name(self, kind, tag, expr):
        if expr.is_Atom or (expr.is_Mul and len(expr.args) == 2 and expr.args[0].is_Number
                             and expr.args[1].is_Atom):
            return expr
        base = f"{kind}eq{tag}"
        while base in self.reserved:
            base += "_"
        sym = sympy.Symbol(base)
        self.defs.append((sym, expr))
        return sym

    def named(self, b: "Branch") -> "Branch":
        b.Z = b.Z if b.Z is sympy.oo else self.name("Z", b.name, b.Z)
        b.E = self.name("V", b.name, b.E)
        if b.K is not None:
            b.K = self.name("I", b.name, b.K)
        return b


def reduce_to_port(branches, plus, minus, namer: Namer | None = None):
    """(branch between plus and minus, moves) or (None, moves) if not reducible.

    The moves are those of the plain rule, in its order: while a move is possible, two
    branches between the same nodes combine in parallel (the pair whose later branch comes
    first in the list of live branches, new branches appended at its end); otherwise, at the
    first node (in order of first appearance along the list) other than the port's that one
    branch touches, the branch is dropped, or two branches touch, they combine in series.
    Branches that start and end at one node are removed. Each move costs O(1) amortised
    (heaps of candidate pairs and nodes, checked when taken), so a chain of N elements
    reduces in O(N log N) time and O(N) memory."""
    moves = []
    namer = namer or Namer()
    seqs = itertools.count()
    live: dict = {}                      # seq -> branch, in list order
    seq_of: dict = {}                    # id(branch) -> seq
    by_pair: dict = {}                   # frozenset of the two nodes -> seqs, ascending
    at: dict = {}                        # node -> {seq: 0 (its a side) or 1 (its b side)}
    pair_heap: list = []                 # (second seq of a pair, tie, key)
    node_heap: list = []                 # (position, node)
    ports = (plus, minus)

    def position(n):
        inc = at[n]
        k = min(inc)
        return (k, inc[k])

    def touch(n):
        inc = at.get(n)
        if inc and n not in ports and len(inc) <= 2:
            heapq.heappush(node_heap, (position(n), n))

    def add(b):
        if b.a == b.b:                   # a loop carries no current into the network
            return
        k = next(seqs)
        live[k] = b
        seq_of[id(b)] = k
        key = frozenset((b.a, b.b))
        lst = by_pair.setdefault(key, [])
        lst.append(k)
        if len(lst) >= 2:
            heapq.heappush(pair_heap, (lst[1], k, key))
        at.setdefault(b.a, {})[k] = 0
        at.setdefault(b.b, {})[k] = 1
        touch(b.a)
        touch(b.b)

    def remove(b):
        k = seq_of.pop(id(b))
        del live[k]
        key = frozenset((b.a, b.b))
        lst = by_pair[key]
        lst.remove(k)
        if len(lst) >= 2:
            heapq.heappush(pair_heap, (lst[1], k, key))
        elif not lst:
            del by_pair[key]
        for n in (b.a, b.b):
            del at[n][k]
            if not at[n]:
                del at[n]
        touch(b.a)
        touch(b.b)

    for b in branches:
        add(b)
    while True:
        move = None
        while pair_heap:
            second, _tie, key = pair_heap[0]
            lst = by_pair.get(key)
            if lst is not None and len(lst) >= 2 and lst[1] == second:
                move = ("parallel", live[lst[0]], live[lst[1]], None)
                break
            heapq.heappop(pair_heap)
        if move is None:
            while node_heap:
                pos, n = node_heap[0]
                inc = at.get(n)
                if inc and len(inc) <= 2 and position(n) == pos:
                    bs = [live[k] for k in sorted(inc)]
                    move = ("drop", bs[0], None, n) if len(bs) == 1 else \
                        ("series", bs[0], bs[1], n)
                    break
                heapq.heappop(node_heap)
        if move is None:
            break
        kind, x, y, n = move
        if kind == "parallel":
            remove(x)
            remove(y)
            nb = namer.named(parallel(x, y, namer.branch_name()))
            add(nb)
            moves.append({"move": "parallel", "parts": [x, y], "result": nb})
        elif kind == "drop":
            remove(x)
            moves.append({"move": "drop", "parts": [x], "result": None, "node": n})
        else:
            remove(x)
            remove(y)
            nb = namer.named(series(x, y, n, namer.branch_name()))
            add(nb)
            moves.append({"move": "series", "parts": [x, y], "result": nb, "node": n})
    rest = list(live.values())
    if len(rest) == 1 and {rest[0].a, rest[0].b} == {plus, minus}:
        b = rest[0] if rest[0].a == plus else rest[0].flipped()
        return b, moves
    return None, moves


def zeroed(branches):
    """Independent sources set to zero: voltage sources become shorts (their nodes merge),
    current sources open (removed)."""
    parent = {}

    def find(x):
        while parent.get(x, x) != x:
            x = parent[x]
        return x

    for b in branches:
        if b.E != 0 and b.Z == 0 and not b.ideal_current:
            parent[find(b.a)] = find(b.b)
    out = []
    for b in branches:
        if b.ideal_current or (b.Z == 0 and b.E != 0):
            continue
        out.append(Branch(b.name, find(b.a), find(b.b), sympy.Integer(0), b.Z, None, b.members))
    return out, find


def source_values(circuit, subs=None, only=None, none=False):
    out = {}
    for e in circuit.elements:
        if e.independent_source:
            v = e.value.xreplace(subs) if subs else e.value
            out[_src(e.name)] = sympy.Integer(0) if none else (
                v if only is None else sympy.Integer(int(e.name == only)))
    return out


def port_form(ctx, req, name):
    """(definitions, result) of a port quantity by reduction, or None where the network
    does not reduce. ``definitions`` are the named intermediate quantities in order."""
    base = quantities.twin(name)
    if req.port is None:
        return None
    subs = ctx.numeric_subs()
    if base == "rth":
        res = reduction(ctx, req.port, zero=True)
        if res is None or res[0] is None or res[0].ideal_current:
            return None
        return tidy(res[2], res[0].Z, {})
    res = reduction(ctx, req.port, zero=False)
    if res is None or res[0] is None or res[0].ideal_current:
        return None
    b, defs = res[0], res[2]
    if base == "vth":
        return tidy(defs, b.E, source_values(ctx.circuit, subs))
    if base == "gain":
        return tidy(defs, b.E, source_values(ctx.circuit, subs, only=req.source))
    if base == "isc":
        if b.Z == 0:
            return None
        return tidy(defs, b.E / b.Z, source_values(ctx.circuit, subs))
    return None


def tidy(defs, final, values):
    """Substitute source values into a definition list; fold definitions that become
    trivial, drop the ones the result does not need."""
    env = dict(values)
    kept = []
    for sym, e in defs:
        e = e.xreplace(env)
        if e.is_Atom or (e.is_Mul and len(e.args) == 2 and e.args[0].is_Number and e.args[1].is_Atom):
            env[sym] = e
        else:
            kept.append((sym, e))
    final = final.xreplace(env)
    need = set(final.free_symbols)
    out = []
    for sym, e in reversed(kept):
        if sym in need:
            out.append((sym, e))
            need |= e.free_symbols
    return list(reversed(out)), final


def reduction(ctx, port, zero: bool):
    """Cached (branch, moves) of the network seen from ``port`` (sources zeroed with
    ``zero``), or None where it has parts that are not two-terminal."""
    key = ("sp", port, zero)
    if key not in ctx.cache:
        bs = branches_of(ctx.circuit, ctx.numeric_subs())
        res = None
        if bs is not None:
            plus, minus = ctx.port(port)
            if zero:
                bs, find = zeroed(bs)
                plus, minus = find(plus), find(minus)
                if plus == minus:
                    res = (Branch("short", plus, minus, sympy.Integer(0), sympy.Integer(0)), [], [])
            if res is None:
                namer = Namer(ctx.circuit.symbols)
                res = reduce_to_port(bs, plus, minus, namer) + (namer.defs,)
        ctx.cache[key] = res
    return ctx.cache[key]


def value_of(ctx, expr):
    """Value at nominal values (None if a symbol has none)."""
    v = expr.xreplace(ctx.nominal)
    if v.free_symbols:
        return None
    v = complex(sympy.N(v, 17))
    return v.real if v.imag == 0 else v
