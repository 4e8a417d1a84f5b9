"""Runaway sizes: long chains reduce in linear time and memory, and a sheet that would need
more than about 1 GB is refused before any work (issue 18, item 9).

References, written here and not taken from derive:

* the handbook sums (from memory, any circuits text): resistors in series add,
  R = R1 + ... + RN; in parallel their conductances add, 1/R = 1/R1 + ... + 1/RN; summed
  here with Python's exact ``fractions.Fraction``;
* the order of the reduction moves: the plain rule (scan the list of live branches after
  every move, as :mod:`derive.forms.series_parallel` describes it), written out again here
  and compared move by move on seeded random multigraphs;
* exact sparse solves against python-flint's dense ``fmpq_mat.solve``, and the nodal solve
  of a small network against a numpy nodal solve written here.

Speed is not asserted (benchmarks/bench_runaway.py measures it against a naive baseline).
"""
from __future__ import annotations

import random
from fractions import Fraction

import flint
import numpy as np
import pytest
import sympy

import derive
from derive.cli import main
from derive.forms import series_parallel as sp
from derive.solver import sparse


def series_chain(values) -> str:
    n = len(values)
    lines = ["voltage source Vs between top and gnd = 1 V"]
    for i, v in enumerate(values, 1):
        a = "a" if i == 1 else f"m{i - 1}"
        b = "gnd" if i == n else f"m{i}"
        lines.append(f"resistor R{i} between {a} and {b} = {v} ohm")
    lines += ["port p between a and gnd", "find resistance at p"]
    return "\n".join(lines) + "\n"


def decimal(text: str) -> Fraction:
    return Fraction(text)


def test_a_chain_of_1000_series_resistors_is_the_handbook_sum_exactly():
    values = [f"{i}.{i % 10}" for i in range(1, 1001)]
    rec = derive.derive_text(series_chain(values), "chain.eqv")
    r = rec.results[0]
    q = r.quantities["resistance"]
    handbook = sum(decimal(v) for v in values)          # R = R1 + ... + R1000
    assert handbook == Fraction(500950)                  # 500 500 + 100·(0+...+9)/10
    # the exact value of the record: the value step's equation, exact rational
    value_eq = r.steps[-1].equations[0]
    assert value_eq.rhs == sympy.Rational(handbook.numerator, handbook.denominator)
    assert value_eq.verified and value_eq.verified_by == "system"     # a sparse nodal solve
    assert q.value == float(handbook)
    # the sequence form: every move a verified step, each naming a bounded number of
    # elements and a bounded text, the result checked against exact sparse nodal solves
    assert q.form == "series-parallel" and len(q.sequence) == 999
    assert all(st.verified for st in r.steps)
    moves = [st for st in r.steps if st.kind == "reduction"]
    assert len(moves) == 999
    assert max(len(st.elements) for st in moves) <= 12
    assert max(len(st.text) for st in moves) < 400
    result = next(st for st in r.steps if st.kind == "result")
    assert {e.verified_by for e in result.equations} == {"system"}


def test_a_bank_of_1000_parallel_resistors_is_the_handbook_conductance_sum():
    vals = [("10", 10000), ("22", 22000), ("47", 47000)]
    lines = ["voltage source Vs between top and gnd = 1 V",
             "resistor R0 between top and a = 1 kohm"]
    rs = []
    for i in range(1, 1001):
        word, v = vals[i % 3]
        lines.append(f"resistor R{i} between a and gnd = {word} kohm")
        rs.append(Fraction(v))
    lines += ["port p between a and gnd", "find thevenin at p"]
    rec = derive.derive_text("\n".join(lines) + "\n", "bank.eqv")
    q = rec.results[0].quantities
    bank = 1 / sum(1 / r for r in rs)                   # 1/R = 1/R1 + ... + 1/R1000
    rth = 1 / (1 / Fraction(1000) + 1 / bank)           # R0 in parallel, Vs shorted
    vth = bank / (Fraction(1000) + bank)                 # divider R0 / bank, Vs = 1 V
    assert q["rth"].value == pytest.approx(float(rth), rel=1e-15)
    assert q["vth"].value == pytest.approx(float(vth), rel=1e-15)
    assert all(st.verified for st in rec.results[0].steps)
    exact = [st for st in rec.results[0].steps if st.kind == "value"]
    got = {str(st.equations[0].lhs): st.equations[0].rhs for st in exact if st.equations}
    assert got["rth"] == sympy.Rational(rth.numerator, rth.denominator)
    assert got["vth"] == sympy.Rational(vth.numerator, vth.denominator)


# ------------------------------------------------------------------ refusal
def grid(k: int) -> str:
    """A k x k resistor grid (no series or parallel moves reduce it), numeric values."""
    lines = ["voltage source Vs between n0_0 and gnd = 1 V"]
    c = 0
    for i in range(k):
        for j in range(k):
            if j + 1 < k:
                c += 1
                lines.append(f"resistor R{c} between n{i}_{j} and n{i}_{j + 1} = 1 kohm")
            if i + 1 < k:
                c += 1
                lines.append(f"resistor R{c} between n{i}_{j} and n{i + 1}_{j} = 1 kohm")
    c += 1
    lines.append(f"resistor R{c} between n{k - 1}_{k - 1} and gnd = 1 kohm")
    lines += [f"port p between n{k - 1}_{k - 1} and gnd", "find voltage at p"]
    return "\n".join(lines) + "\n"


def test_a_sheet_beyond_about_1_gb_is_refused_up_front_with_remedies(tmp_path, capsys):
    # 46 x 46 nodes: the dense nodal equations of the steps have 2117^2 entries, more
    # than 1 GB at the measured cost per entry
    text = grid(46)
    p = tmp_path / "grid.eqv"
    p.write_text(text, encoding="utf-8")
    code = main(["record", str(p), "-o", str(tmp_path / "grid.json")])
    err = capsys.readouterr().err
    assert code == 2
    line = text.splitlines().index("find voltage at p") + 1
    assert f"grid.eqv:{line}:1: error: this sheet would need about" in err
    assert "refused before any work" in err and "limit about 1 GB" in err
    assert "dense nodal equations (2117 unknowns)" in err
    for remedy in ("numeric", "--symbolic", "fewer symbols"):
        assert remedy in err, remedy
    assert "Traceback" not in err
    assert not (tmp_path / "grid.json").exists()


def test_a_small_grid_is_not_refused():
    rec = derive.derive_text(grid(4), "grid.eqv")
    assert rec.results[0].quantities["voltage"].value is not None


# ------------------------------------------------------------------ reduction order
def plain_rule(branches, plus, minus, namer):
    """The reduction rule as written in the module doc, one full scan per move."""
    live, moves = list(branches), []
    changed = True
    while changed:
        changed = False
        live = [b for b in live if b.a != b.b]
        pairs = {}
        for b in live:
            k = frozenset((b.a, b.b))
            if k in pairs:
                x = pairs[k]
                nb = namer.named(sp.parallel(x, b, namer.branch_name()))
                live = [z for z in live if z is not x and z is not b] + [nb]
                moves.append(("parallel", x.name, b.name, nb.name))
                changed = True
                break
            pairs[k] = b
        if changed:
            continue
        ends = {}
        for b in live:
            for n in (b.a, b.b):
                ends.setdefault(n, []).append(b)
        for n, bs in ends.items():
            if n in (plus, minus):
                continue
            if len(bs) == 1:
                live = [z for z in live if z is not bs[0]]
                moves.append(("drop", bs[0].name, n))
                changed = True
                break
            if len(bs) == 2:
                x, y = bs
                nb = namer.named(sp.series(x, y, n, namer.branch_name()))
                live = [z for z in live if z is not x and z is not y] + [nb]
                moves.append(("series", x.name, y.name, nb.name, n))
                changed = True
                break
    done = len(live) == 1 and {live[0].a, live[0].b} == {plus, minus}
    return (live[0].Z if done else None), moves


def shown(moves):
    out = []
    for m in moves:
        if m["move"] == "parallel":
            out.append(("parallel", m["parts"][0].name, m["parts"][1].name, m["result"].name))
        elif m["move"] == "drop":
            out.append(("drop", m["parts"][0].name, m["node"]))
        else:
            out.append(("series", m["parts"][0].name, m["parts"][1].name, m["result"].name,
                        m["node"]))
    return out


@pytest.mark.parametrize("seed", range(40))
def test_the_reduction_makes_the_moves_of_the_plain_rule_in_its_order(seed):
    rnd = random.Random(seed)
    nodes = [f"n{i}" for i in range(rnd.randint(2, 9))]

    def make():
        out = []
        for i in range(rnd.randint(1, 16)):
            a, b = rnd.choice(nodes), rnd.choice(nodes)
            out.append(sp.Branch(f"R{i}", a, b, sympy.Integer(0), sympy.Symbol(f"R{i}"),
                                 None, [f"R{i}"]))
        return out
    branches = make()
    copy = [sp.Branch(b.name, b.a, b.b, b.E, b.Z, None, [b.name]) for b in branches]
    plus, minus = nodes[0], nodes[1]
    got_b, got_moves = sp.reduce_to_port(branches, plus, minus, sp.Namer())
    want_z, want_moves = plain_rule(copy, plus, minus, sp.Namer())
    assert shown(got_moves) == want_moves
    assert (got_b is None) == (want_z is None)
    if got_b is not None:
        assert got_b.Z == want_z


# ------------------------------------------------------------------ sparse solves
@pytest.mark.parametrize("seed", range(10))
def test_sparse_solve_agrees_with_a_dense_exact_solve(seed):
    rnd = random.Random(seed)
    n = rnd.randint(1, 12)
    rows = {}
    for i in range(n):
        rows[i] = {i: flint.fmpq(rnd.choice([0, rnd.randint(1, 9)]))}     # zero diagonals too
        for _ in range(rnd.randint(0, 3)):
            rows[i][rnd.randrange(n)] = flint.fmpq(rnd.randint(-9, 9), rnd.randint(1, 5))
        rows[i] = {j: v for j, v in rows[i].items() if v != 0}
    b = {i: flint.fmpq(rnd.randint(-9, 9)) for i in range(n)}
    M = flint.fmpq_mat(n, n)
    for i, r in rows.items():
        for j, v in r.items():
            M[i, j] = v
    if M.det() == 0:
        with pytest.raises(sparse.Singular):
            sparse.solve(n, rows, b)
        return
    want = M.solve(flint.fmpq_mat(n, 1, [b[i] for i in range(n)]))
    got = sparse.solve(n, rows, b)
    assert [got[i] for i in range(n)] == [want[i, 0] for i in range(n)]


def test_nodal_solve_of_a_small_network_agrees_with_numpy():
    text = """voltage source V1 between a and gnd = 5 V
current source I1 from gnd to c = 2 mA
resistor R1 between a and b = 1 kohm
resistor R2 between b and gnd = 2 kohm
resistor R3 between b and c = 3 kohm
conductance G1 between c and gnd = 1 mS
port p between c and gnd
find vth at p
"""
    c = derive.circuit_of(text, "net.eqv")
    x = sparse.nodal_solve(c, c.nominal_values(), {}, None)
    # numpy nodal solve (written here): unknowns v_b, v_c with v_a = 5 fixed;
    # KCL at b: (v_b - 5)/1k + v_b/2k + (v_b - v_c)/3k = 0
    # KCL at c: (v_c - v_b)/3k + v_c*1m = 2m (I1 drives 2 mA into c)
    M = np.array([[1 / 1e3 + 1 / 2e3 + 1 / 3e3, -1 / 3e3], [-1 / 3e3, 1 / 3e3 + 1e-3]])
    vb, vc = np.linalg.solve(M, [5 / 1e3, 2e-3])
    assert float(x["a"]) == 5.0
    assert float(x["b"]) == pytest.approx(vb, rel=1e-12)
    assert float(x["c"]) == pytest.approx(vc, rel=1e-12)


def test_a_long_chain_with_two_sources_gives_the_superposition_of_the_handbook():
    # a 12 V source drives a chain of 600 resistors (i ohm) into a 47 kohm load; 1 mA is
    # injected at the chain's middle node n300. By hand (superposition, handbook divider
    # and parallel rules): vth = 12·RL/(S + RL) + 1 mA·(S1 ∥ (S2 + RL))·RL/(S2 + RL),
    # rth = S ∥ RL, isc = vth/rth, gain = RL/(S + RL), with S1 = 1 + ... + 300,
    # S2 = 301 + ... + 600, S = S1 + S2
    n = 600
    lines = ["voltage source Vs between n0 and gnd = 12 V",
             "current source I1 from gnd to n300 = 1 mA"]
    lines += [f"resistor R{i} between n{i - 1} and n{i} = {i} ohm" for i in range(1, n + 1)]
    lines += [f"resistor RL between n{n} and gnd = 47 kohm", f"port p between n{n} and gnd",
              "find thevenin at p", "find norton at p", "find gain from Vs to p"]
    rec = derive.derive_text("\n".join(lines) + "\n", "chain.eqv")
    S1, S2, RL = Fraction(300 * 301, 2), Fraction(600 * 601 - 300 * 301, 2), Fraction(47000)
    S = S1 + S2
    vth = 12 * RL / (S + RL) + Fraction(1, 1000) * (S1 * (S2 + RL) / (S + RL)) * RL / (S2 + RL)
    rth = S * RL / (S + RL)
    want = {"vth": vth, "rth": rth, "isc": vth / rth, "rn": rth, "gain": RL / (S + RL)}
    for r in rec.results:
        assert all(st.verified for st in r.steps)
        for k, q in r.quantities.items():
            assert q.form == "series-parallel"
            value = next(st for st in r.steps if st.kind == "value"
                         and st.equations and str(st.equations[0].lhs) == k)
            assert value.equations[0].rhs == sympy.Rational(want[k].numerator,
                                                            want[k].denominator), k
