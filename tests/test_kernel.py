"""Tests of the exact determinant kernel (derive.solver.determinant)."""
import doctest
import random
from fractions import Fraction

import networkx as nx
import numpy as np
import pytest
import sympy

from derive.solver import determinant as K


def random_poly_matrix(rng, n, names, density=0.5, zero_diag=False):
    ctx = K.make_context(names)
    gens = ctx.gens()
    m = K.SparseMatrix(ctx, n)
    for i in range(n):
        for j in range(n):
            if (zero_diag and i == j) or rng.random() > density:
                continue
            v = ctx.constant(rng.randint(-3, 3))
            for _ in range(rng.randint(0, 2)):
                v += rng.randint(-2, 2) * gens[rng.randrange(len(gens))] ** rng.randint(1, 2)
            m.add(i, j, v)
    return m


def sympy_det(m, syms):
    M = sympy.Matrix(m.n, m.n, lambda i, j: K.poly_to_sympy(m.get(i, j), syms))
    return sympy.expand(M.det(method="berkowitz"))


def as_sympy(p, syms):
    return sympy.expand(K.poly_to_sympy(p, syms))


DETS = {
    "hybrid": K.det,
    "bareiss": lambda m: K._det_sparse(m, defer=True),
    "eager": lambda m: K._det_sparse(m, defer=False),
    "expand": lambda m: K._det_expand(m, K._expansion_plan(m, 10 ** 6)),
}


@pytest.mark.parametrize("which", sorted(DETS))
def test_det_vs_sympy_small_random(which):
    rng = random.Random(1234)
    names = ["x", "y", "z"]
    syms = sympy.symbols(names)
    for trial in range(60):
        n = rng.randint(0, 5)
        m = random_poly_matrix(rng, n, names, density=rng.choice([0.3, 0.6, 1.0]),
                               zero_diag=(trial % 3 == 0))
        got = DETS[which](m)
        ref = sympy_det(m, syms) if n else sympy.Integer(1)
        assert sympy.expand(as_sympy(got, syms) - ref) == 0, (trial, m.to_lists())


@pytest.mark.parametrize("which", sorted(DETS))
def test_det_singular_and_special(which):
    f = DETS[which]
    ctx = K.make_context(["a", "b"])
    a, b = ctx.gens()
    assert f(K.SparseMatrix(ctx, 0)) == 1
    # two equal rows
    m = K.SparseMatrix(ctx, 3)
    for j, v in enumerate([a, b, a + b]):
        m.add(0, j, v); m.add(1, j, v)
    m.add(2, 2, 1)
    assert f(m) == 0
    # rank-deficient with symbolic dependence: row2 = a*row0 + b*row1
    m = K.SparseMatrix(ctx, 3)
    r0, r1 = [1, a, 0], [b, 0, 1]
    for j in range(3):
        m.add(0, j, r0[j]); m.add(1, j, r1[j]); m.add(2, j, a * r0[j] + b * r1[j])
    assert f(m) == 0
    # an empty row / column
    m = K.SparseMatrix(ctx, 2); m.add(0, 0, a); m.add(1, 0, b)
    assert f(m) == 0
    # permutation matrix with zero diagonal: sign
    m = K.SparseMatrix(ctx, 3); m.add(0, 1, 1); m.add(1, 2, 1); m.add(2, 0, a)
    assert f(m) == a
    m = K.SparseMatrix(ctx, 2); m.add(0, 1, a); m.add(1, 0, b)
    assert f(m) == -a * b


def test_det_vs_numpy_large_sparse():
    rng = random.Random(7)
    names = [f"g{k}" for k in range(6)]
    for n in (12, 20, 26):
        ctx = K.make_context(names)
        gens = ctx.gens()
        m = K.SparseMatrix(ctx, n)
        for i in range(n):  # banded-ish sparse with random extra entries, some zero diagonals
            for j in range(max(0, i - 2), min(n, i + 3)):
                if rng.random() < 0.6:
                    m.add(i, j, rng.randint(-2, 2) + gens[rng.randrange(6)])
            if rng.random() < 0.3:
                m.add(i, rng.randrange(n), rng.randint(-3, 3))
        d = K.det(m)
        if n == 12:  # the Bareiss fallback agrees (too slow to cross-check larger ones)
            assert K._det_sparse(m) == d
        for _ in range(3):
            pt = [rng.uniform(0.5, 1.5) for _ in names]
            A = np.array([[float(K.evaluate(m.get(i, j), pt)) for j in range(n)]
                          for i in range(n)])
            ref = np.linalg.det(A)
            assert float(K.evaluate(d, pt)) == pytest.approx(ref, rel=1e-7, abs=1e-9)


def laplacian_reduced(graph, ground):
    """Reduced Laplacian with one conductance symbol per edge."""
    edges = list(graph.edges())
    names = [f"G{k}" for k in range(len(edges))]
    ctx = K.make_context(names)
    gens = ctx.gens()
    nodes = [v for v in graph.nodes() if v != ground]
    idx = {v: i for i, v in enumerate(nodes)}
    m = K.SparseMatrix(ctx, len(nodes))
    for (u, v), g in zip(edges, gens):
        for x, y in ((u, v), (v, u)):
            if x in idx:
                m.add(idx[x], idx[x], g)
                if y in idx:
                    m.add(idx[x], idx[y], -g)
    return m


GRAPHS = {
    "grid3": nx.grid_2d_graph(3, 3),
    "grid3x4": nx.grid_2d_graph(3, 4),
    "cube": nx.hypercube_graph(3),
    "K5": nx.complete_graph(5),
    "ladder": nx.ladder_graph(6),
    "wheel": nx.wheel_graph(7),
    "petersen": nx.petersen_graph(),
    "random": nx.gnm_random_graph(9, 16, seed=3),
}


@pytest.mark.parametrize("name", sorted(GRAPHS))
def test_matrix_tree_theorem(name):
    # Kirchhoff's matrix-tree theorem; networkx: with distinct conductance symbols every
    # spanning tree is one monomial of coefficient 1 in det of the reduced Laplacian.
    g = GRAPHS[name]
    if not nx.is_connected(g):
        g = g.subgraph(max(nx.connected_components(g), key=len)).copy()
    ground = next(iter(g.nodes()))
    m = laplacian_reduced(g, ground)
    trees = round(nx.number_of_spanning_trees(g))
    d = K.det(m)
    assert len(d) == trees
    assert set(int(c) for c in d.coeffs()) == {1}
    if name in ("grid3", "K5", "wheel", "cube"):  # Bareiss fallback is slow on the rest
        assert K._det_sparse(m) == d
    assert K.estimate_det_terms(m) == trees


def test_estimate_fast_100():
    import time
    g = nx.grid_2d_graph(10, 10)
    m = laplacian_reduced(g, (0, 0))
    assert m.n == 99
    t = time.perf_counter()
    est = K.estimate_det_terms(m)
    assert time.perf_counter() - t < 0.1
    assert est == pytest.approx(nx.number_of_spanning_trees(g), rel=1e-9)


def test_poly_to_sympy_round_trip():
    rng = random.Random(5)
    names = ["a", "b", "c", "d"]
    syms = sympy.symbols(names)
    ctx = K.make_context(names)
    gens = ctx.gens()
    for _ in range(20):
        p = ctx.constant(rng.randint(-5, 5))
        for _ in range(rng.randint(0, 12)):
            t = ctx.constant(rng.choice([-7, -1, 1, 2, 30]))
            for gname in gens:
                t *= gname ** rng.randint(0, 3)
            p += t
        e = K.poly_to_sympy(p, syms)
        ref = sympy.Poly(sympy.sympify(str(p).replace("^", "**"), locals=dict(zip(names, syms))),
                         *syms).as_expr()
        assert sympy.expand(e - ref) == 0
        assert sympy.Poly(e, *syms) == sympy.Poly(ref, *syms)
    assert K.poly_to_sympy(ctx.constant(0), syms) == 0


def test_cancel_ratio():
    ctx = K.make_context(["a", "b"])
    a, b = ctx.gens()
    n, d = K.cancel_ratio((a + b) * (a - b) * 6, -(a + b) * 4 * b)
    assert d.leading_coefficient() > 0
    assert n * (-(a + b) * 4 * b) == d * ((a + b) * (a - b) * 6)
    assert n.gcd(d).is_one()
    assert K.cancel_ratio(ctx.constant(0), a) == (0, 1)
    with pytest.raises(ZeroDivisionError):
        K.cancel_ratio(a, ctx.constant(0))


def test_evaluate():
    ctx = K.make_context(["x", "y"])
    x, y = ctx.gens()
    p = 3 * x ** 2 * y - 2 * y + 7
    assert K.evaluate(p, [Fraction(1, 3), Fraction(-2, 5)]) == \
        3 * Fraction(1, 9) * Fraction(-2, 5) - 2 * Fraction(-2, 5) + 7
    assert K.evaluate(p, [2, 3]) == 3 * 4 * 3 - 6 + 7
    assert K.evaluate(p, [0.5, 2.0]) == pytest.approx(3 * 0.25 * 2 - 4 + 7)
    v = K.evaluate(p, [1j, 2])
    assert v == pytest.approx(3 * (1j) ** 2 * 2 - 4 + 7)


def test_matrix_helpers():
    ctx = K.make_context(["a", "b"])
    a, b = ctx.gens()
    m = K.SparseMatrix(ctx, 2)
    m.add(0, 0, a); m.add(1, 1, b); m.add(0, 1, 1); m.add(0, 1, -1)
    assert 1 not in m.rows[0]
    c = m.copy(); c.add(0, 0, 1)
    assert m.get(0, 0) == a
    w = m.with_column(1, {0: 5})
    assert K.det(w) == 0 and w.get(0, 1) == 5 and w.get(1, 1) == 0
    bo = m.bordered({0: 1, 1: 1}, {0: 1, 1: 1}, corner=0)
    assert bo.n == 3 and K.det(bo) == -(a + b)


def test_doctests():
    res = doctest.testmod(K)
    assert res.failed == 0 and res.attempted > 5
