"""Graph checks on a flattened circuit: connection to ground, loops of voltage sources,
cut sets of current sources.

A circuit whose node voltages are not fixed by its elements has a singular nodal matrix;
these checks name the elements and nodes at fault before any algebra is attempted.
"""
from __future__ import annotations

from derive.errors import SheetError
from derive.sheet import kinds


def _fixes_voltage(e) -> bool:
    """Whether an element fixes a voltage (a voltage source; a nullor's output to ground)."""
    k = kinds.kind(e.kind)
    return k.source == "voltage" or k.stamp == "nullor"


def _current_source(e) -> bool:
    return kinds.kind(e.kind).source == "current"


class _DSU:
    def __init__(self):
        self.parent = {}

    def find(self, x):
        self.parent.setdefault(x, x)
        while self.parent[x] != x:
            self.parent[x] = self.parent[self.parent[x]]
            x = self.parent[x]
        return x

    def union(self, a, b) -> bool:
        ra, rb = self.find(a), self.find(b)
        if ra == rb:
            return False
        self.parent[ra] = rb
        return True


def _edges(e, ground):
    """(a, b) node pairs an element connects, for connectivity."""
    if e.kind == "nullor":
        inp, inn, out = e.nodes
        return [(out, ground), (inp, inn)]
    return [tuple(e.nodes)]


def _path(adj, start, goal):
    prev = {start: None}
    todo = [start]
    while todo:
        n = todo.pop()
        if n == goal:
            break
        for m, el in adj.get(n, []):
            if m not in prev:
                prev[m] = (n, el)
                todo.append(m)
    out = []
    n = goal
    while prev.get(n):
        n, el = prev[n]
        out.append(el)
    return out


def check_topology(elements, ground, ground_loc=None) -> list:
    """Validate the graph; return the node names (ground first, then in order of mention)."""
    seen = {ground: None}               # insertion order: ground, then order of mention
    for e in elements:
        for n in e.nodes:
            seen.setdefault(n, None)
    nodes = list(seen)
    touched = {n for e in elements for n in e.nodes}
    if ground not in touched:
        loc = ground_loc or elements[0].loc
        raise SheetError(f"the ground node {ground!r} is not connected to any element "
                         "(name the reference node with 'ground NAME')", loc.line, loc.col)
    # loops of voltage sources and op-amp outputs
    dsu = _DSU()
    adj: dict = {}
    for e in elements:
        if _fixes_voltage(e):
            a, b = (e.nodes[2], ground) if e.kind == "nullor" else e.nodes
            if a == b:
                raise SheetError(f"voltage source {e.name!r} is shorted (both ends on {a!r})",
                                 e.loc.line, e.loc.col)
            if not dsu.union(a, b):
                loop = _path(adj, a, b) + [e.name]
                what = "voltage sources and op-amp outputs" if any(
                    x.kind == "nullor" for x in elements if x.name in loop) else "voltage sources"
                raise SheetError(f"loop of {what}: {', '.join(sorted(set(loop)))} "
                                 "(their voltages cannot all hold)", e.loc.line, e.loc.col)
            adj.setdefault(a, []).append((b, e.name))
            adj.setdefault(b, []).append((a, e.name))
    # connectivity without independent current sources: a group of nodes joined to the rest
    # only through them (or through nothing) has no fixed voltage. Dependent current sources
    # do join (a gyrator's nodes are joined only through two of them); whether they fix the
    # voltages is decided by the rank of the stamped system (see :func:`dependent_cuts`).
    dsu = _connectivity(elements, ground, nodes, dependent=True)
    groups: dict = {}
    for n in nodes:
        groups.setdefault(dsu.find(n), []).append(n)
    groot = dsu.find(ground)
    for root, members in groups.items():
        if root == groot:
            continue
        cut = [e for e in elements if _current_source(e)
               and (dsu.find(e.nodes[0]) == root) != (dsu.find(e.nodes[1]) == root)]
        first = next(e for e in elements if any(n in members for n in e.nodes))
        shown = ", ".join(members)
        if cut:
            raise SheetError(f"cut set of current sources {', '.join(e.name for e in cut)}: "
                             f"node(s) {shown} have no other connection to the rest of the "
                             "circuit", cut[0].loc.line, cut[0].loc.col)
        err = SheetError(f"node(s) {shown} are not connected to the rest of the circuit "
                         "(no path to ground)", first.loc.line, first.loc.col)
        err.floating = set(members)
        raise err
    return nodes


def _connectivity(elements, ground, nodes, dependent: bool) -> _DSU:
    """Nodes joined by elements other than current sources (and, with ``dependent``, by
    dependent current sources too)."""
    dsu = _DSU()
    for n in nodes:
        dsu.find(n)
    for e in elements:
        if _current_source(e) and not (dependent and e.controls):
            continue
        for a, b in _edges(e, ground):
            dsu.union(a, b)
    return dsu


def dependent_cuts(elements, ground, nodes) -> list:
    """Groups of nodes joined to the rest of the circuit only through current sources of
    which some are dependent: [(members, dependent sources at the cut)]. Such a circuit
    may be well posed (a gyrator) or singular; the caller decides by the rank of the
    stamped nodal system."""
    plain = _connectivity(elements, ground, nodes, dependent=False)
    groups: dict = {}
    for n in nodes:
        groups.setdefault(plain.find(n), []).append(n)
    groot = plain.find(ground)
    out = []
    for root, members in groups.items():
        if root == groot:
            continue
        cut = [e for e in elements if _current_source(e) and e.controls
               and (plain.find(e.nodes[0]) == root) != (plain.find(e.nodes[1]) == root)]
        if cut:
            out.append((members, cut))
    return out
