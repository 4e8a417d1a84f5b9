"""derive's exact results against general-purpose numeric libraries."""
from __future__ import annotations

import random

import networkx as nx
import numpy as np
import sympy
from hypothesis import given, settings, strategies as st

from helpers import closed, run


@st.composite
def resistor_networks(draw):
    n = draw(st.integers(3, 8))
    # a random spanning tree keeps the network connected, then extra edges
    edges = []
    for v in range(1, n):
        edges.append((draw(st.integers(0, v - 1)), v))
    extra = draw(st.integers(0, n))
    for _ in range(extra):
        a, b = draw(st.integers(0, n - 1)), draw(st.integers(0, n - 1))
        if a != b:
            edges.append((a, b))
    values = [draw(st.integers(1, 1000)) for _ in edges]
    a, b = draw(st.sampled_from([(i, j) for i in range(n) for j in range(n) if i < j]))
    return n, edges, values, a, b


@settings(max_examples=40, deadline=None, derandomize=True, database=None)
@given(resistor_networks())
def test_rth_equals_networkx_resistance_distance(net):
    # reference: networkx.resistance_distance with conductance weights (Laplacian pseudo-
    # inverse method, networkx documentation)
    n, edges, values, a, b = net
    lines = ["ground n0"]
    for k, ((u, v), r) in enumerate(zip(edges, values)):
        lines.append(f"resistor R{k} between n{u} and n{v} = {r} ohm")
    lines += [f"port p between n{a} and n{b}", "find resistance at p"]
    q = run("\n".join(lines)).results[0].quantities["resistance"]
    G = nx.MultiGraph()
    G.add_nodes_from(range(n))
    for (u, v), r in zip(edges, values):
        G.add_edge(u, v, g=1.0 / r)
    ref = nx.resistance_distance(nx.Graph(_merge(G)), a, b, weight="g", invert_weight=False)
    assert abs(q.value - ref) <= 1e-9 * max(1.0, ref)
    # and the closed form at the same values
    subs = {sympy.Symbol(f"R{k}"): r for k, r in enumerate(values)}
    assert abs(float(closed(q).xreplace(subs)) - ref) <= 1e-9 * max(1.0, ref)


def _merge(G):
    H = nx.Graph()
    H.add_nodes_from(G.nodes)
    for u, v, d in G.edges(data=True):
        if u == v:
            continue
        if H.has_edge(u, v):
            H[u][v]["g"] += d["g"]
        else:
            H.add_edge(u, v, g=d["g"])
    return H


DEP = """
voltage source Vs between s and gnd
resistor Rs between s and b
resistor rpi between b and e
resistor Re between e and gnd
current source G1 from c to e = gm*across(b, e)
resistor Rc between c and gnd
capacitor Cc between c and o
resistor RL between o and gnd
voltage source E1 between x and gnd = mu*across(o, gnd)
resistor Rx between x and y
current source F1 from y to gnd = beta*through(Rx)
resistor Ry between y and gnd
port out between o and gnd
port aux between y and gnd
find thevenin at out
find voltage at aux
find current through Re
"""


def _numeric_reference(v, s):
    """Hand-stamped nodal equations of DEP (written here independently of derive), solved
    with numpy.linalg.solve. Unknowns: node voltages s, b, e, c, o, x, y and the currents
    of Vs and E1."""
    idx = {n: i for i, n in enumerate("s b e c o x y".split())}
    N = len(idx) + 2
    A = np.zeros((N, N), dtype=complex)
    rhs = np.zeros(N, dtype=complex)

    def g(a, b, y):
        for p, q, sign in ((a, a, 1), (b, b, 1), (a, b, -1), (b, a, -1)):
            if p is not None and q is not None:
                A[idx[p], idx[q]] += sign * y

    g("s", "b", 1 / v["Rs"]); g("b", "e", 1 / v["rpi"]); g("e", None, 1 / v["Re"])
    g("c", None, 1 / v["Rc"]); g("c", "o", s * v["Cc"]); g("o", None, 1 / v["RL"])
    g("x", "y", 1 / v["Rx"]); g("y", None, 1 / v["Ry"])
    # VCCS gm*(Vb - Ve) from c to e: leaves c, enters e
    for node, sign in (("c", 1), ("e", -1)):
        A[idx[node], idx["b"]] += sign * v["gm"]
        A[idx[node], idx["e"]] -= sign * v["gm"]
    # CCCS beta*I(Rx) from y to ground; I(Rx) = (Vx - Vy)/Rx
    A[idx["y"], idx["x"]] += v["beta"] / v["Rx"]
    A[idx["y"], idx["y"]] -= v["beta"] / v["Rx"]
    # Vs: branch current j1 leaves s into the source; Vs row: V(s) = Vs
    j1, j2 = len(idx), len(idx) + 1
    A[idx["s"], j1] += 1; A[j1, idx["s"]] = 1; rhs[j1] = v["Vs"]
    # E1 = mu*V(o): branch current j2 leaves x; row: V(x) - mu V(o) = 0
    A[idx["x"], j2] += 1; A[j2, idx["x"]] = 1; A[j2, idx["o"]] = -v["mu"]
    x = np.linalg.solve(A, rhs)
    vo_open = x[idx["o"]]
    vy = x[idx["y"]]
    i_re = x[idx["e"]] / v["Re"]
    # rth at out: zero Vs, inject 1 A into o
    rhs2 = np.zeros(N, dtype=complex)
    rhs2[idx["o"]] = 1
    rth = np.linalg.solve(A, rhs2)[idx["o"]]
    return vo_open, rth, vy, i_re


def test_dependent_sources_and_reactive_parts_against_numpy():
    # reference: numpy.linalg.solve on the independently written nodal matrix above
    rec = run(DEP)
    q0, q1, q2 = (r.quantities for r in rec.results)
    rnd = random.Random(5)
    for _ in range(5):
        vals = {k: sympy.Rational(rnd.randint(1, 100), rnd.randint(1, 20)) for k in
                "Vs Rs rpi Re gm Rc Cc RL mu Rx beta Ry".split()}
        s = complex(rnd.uniform(-3, 3), rnd.uniform(0.1, 5))
        ref = _numeric_reference({k: float(x) for k, x in vals.items()}, s)
        subs = {sympy.Symbol(k): x for k, x in vals.items()}
        subs[sympy.Symbol("s")] = sympy.Float(s.real) + sympy.I * sympy.Float(s.imag)
        got = [complex(sympy.N(closed(q).xreplace(subs))) for q in
               (q0["vth"], q0["rth"], q1["voltage"], q2["current"])]
        for g_, r_ in zip(got, ref):
            assert abs(g_ - r_) <= 1e-8 * max(1.0, abs(r_)), (g_, r_)


def test_large_grid_sequence_form_against_networkx():
    # A 5x5 resistor grid is too large to expand (about 5.6e8 terms): derive answers with a
    # sequence of named intermediates. Reference: networkx.resistance_distance (conductance
    # weights), at the nominal values given in the sheet.
    k = 5
    rnd = random.Random(3)
    lines, G = ["ground n0_0"], nx.Graph()
    for r in range(k):
        for c in range(k):
            for dr, dc, tag in ((0, 1, "h"), (1, 0, "v")):
                if r + dr < k and c + dc < k:
                    val = rnd.randint(100, 999)
                    lines.append(f"resistor R{tag}{r}{c} between n{r}_{c} and n{r+dr}_{c+dc} = {val} ohm")
                    G.add_edge((r, c), (r + dr, c + dc), g=1.0 / val)
    lines += [f"port p between n0_0 and n{k-1}_{k-1}", "find resistance at p"]
    q = run("\n".join(lines)).results[0].quantities["resistance"]
    assert q.form == "sequence" and q.sequence
    ref = nx.resistance_distance(G, (0, 0), (k - 1, k - 1), weight="g", invert_weight=False)
    assert abs(q.value - ref) <= 1e-9 * ref


def test_long_ladder_series_parallel_sequence_against_numpy():
    # 16-section ladder driven by V: vth by series-parallel reduction (named intermediates)
    # against numpy.linalg.solve of the nodal equations written here.
    n = 16
    rnd = random.Random(4)
    rs = [rnd.randint(100, 999) for _ in range(n)]
    rp = [rnd.randint(100, 999) for _ in range(n)]
    lines = ["voltage source V between n0 and gnd = 1 V"]
    for i in range(n):
        lines.append(f"resistor Rs{i} between n{i} and n{i+1} = {rs[i]} ohm")
        lines.append(f"resistor Rp{i} between n{i+1} and gnd = {rp[i]} ohm")
    lines += [f"port out between n{n} and gnd", "find thevenin at out"]
    q = run("\n".join(lines)).results[0].quantities
    # nodal matrix of nodes n1..n16 with n0 held at 1 V
    A = np.zeros((n, n))
    b = np.zeros(n)
    for i in range(n):
        gs, gp = 1.0 / rs[i], 1.0 / rp[i]
        A[i, i] += gs + gp
        if i > 0:
            A[i, i - 1] -= gs
            A[i - 1, i] -= gs
            A[i - 1, i - 1] += gs
        else:
            b[0] += gs * 1.0
    vth = np.linalg.solve(A, b)[-1]
    e = np.zeros(n); e[-1] = 1.0
    rth = np.linalg.solve(A, e)[-1]
    assert abs(q["vth"].value - vth) <= 1e-9 * abs(vth)
    assert abs(q["rth"].value - rth) <= 1e-9 * rth
