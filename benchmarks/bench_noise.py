#!/usr/bin/env python
"""Benchmark of ``find noise`` against naive routes, measured in the same run.

    python benchmarks/bench_noise.py

The circuit: an invented three-op-amp instrumentation amplifier (two input buffers with a
gain resistor, a difference stage, source resistances and an output RC filter: 10 resistors,
one capacitor, 3 op-amps with voltage and current noise: 19 noise sources), band 0.1 Hz to
10 kHz, every value symbolic in the derivation.

derive: the whole process, ``python -m derive record SHEET --format json`` in a fresh
interpreter (start-up, parsing, 19 transfers from the one solver, every step verified, the
exact band integral, the JSON). Target: under 3 s.

Naive baselines, measured here:

1. the sympy route: the same nodal equations in sympy, solved for each source alone with
   ``sympy.Matrix.LUsolve`` and ``cancel``, ``|H|^2`` at ``s = j 2 pi f``, and the band
   integral by ``sympy.integrate``: measured in full with the nominal numbers substituted
   first (only ``s`` symbolic, so easier than derive's task), and with every resistor symbolic
   (derive's task) for one source in a subprocess stopped after 60 s (then a lower bound);
2. numeric superposition: numpy solves of the complex nodal system at 20 000 log-spaced
   frequencies for every source and the trapezoid rule (approximate, for scale; its error
   against derive's exact value is printed).
"""
from __future__ import annotations

import json
import math
import os
import subprocess
import sys
import tempfile
import time

sys.path.insert(0, os.path.join(os.path.dirname(os.path.abspath(__file__)), ".."))

import numpy as np          # noqa: E402
import sympy                # noqa: E402

SHEET = """title "Strain-gauge front end, three-op-amp instrumentation amplifier (invented)"
voltage source Vp between sp and gnd = 0 V
voltage source Vn between sn and gnd = 0 V
resistor Rs1 between sp and p1 = 350 ohm
resistor Rs2 between sn and p2 = 350 ohm
opamp U1 inputs p1, a1 output o1 noise 8 nV/rtHz and 0.2 pA/rtHz
opamp U2 inputs p2, a2 output o2 noise 8 nV/rtHz and 0.2 pA/rtHz
resistor R1 between o1 and a1 = 24.9 kohm
resistor R2 between o2 and a2 = 24.9 kohm
resistor Rg between a1 and a2 = 1 kohm
opamp U3 inputs x, y output o3 noise 12 nV/rtHz and 0.5 pA/rtHz
resistor R3 between o2 and x = 10 kohm
resistor R4 between x and gnd = 10 kohm
resistor R5 between o1 and y = 10 kohm
resistor R6 between o3 and y = 10 kohm
resistor Rf between o3 and out = 1 kohm
capacitor Cf between out and gnd = 100 nF
port o between out and gnd
find noise at o from 0.1 Hz to 10 kHz
"""
TARGET = 3.0
K, T = 1.380649e-23, 298.15
RES = {"Rs1": ("sp", "p1", 350), "Rs2": ("sn", "p2", 350), "R1": ("o1", "a1", 24.9e3),
       "R2": ("o2", "a2", 24.9e3), "Rg": ("a1", "a2", 1e3), "R3": ("o2", "x", 10e3),
       "R4": ("x", "gnd", 10e3), "R5": ("o1", "y", 10e3), "R6": ("o3", "y", 10e3),
       "Rf": ("o3", "out", 1e3)}
OPS = {"U1": ("p1", "a1", "o1", 8e-9, 0.2e-12), "U2": ("p2", "a2", "o2", 8e-9, 0.2e-12),
       "U3": ("x", "y", "o3", 12e-9, 0.5e-12)}
CF = ("out", "gnd", 100e-9)
NODES = ["sp", "sn", "p1", "p2", "a1", "a2", "o1", "o2", "o3", "x", "y", "out"]
VSRC = [("sp", "gnd"), ("sn", "gnd")]


def mna(values, s, zero, one):
    """The nodal matrix (nodes, two source currents, three op-amp output currents) built from
    ``values`` (resistances), Laplace variable ``s``; ``zero``/``one`` the ring's constants."""
    idx = {n: i for i, n in enumerate(NODES)}
    n = len(NODES) + len(VSRC) + len(OPS)
    A = [[zero] * n for _ in range(n)]

    def add(i, j, v):
        if i is not None and j is not None:
            A[i][j] = A[i][j] + v
    for name, (a, b, _) in RES.items():
        y = one / values[name]
        ia, ib = idx.get(a), idx.get(b)
        add(ia, ia, y); add(ib, ib, y); add(ia, ib, -y); add(ib, ia, -y)
    ia = idx[CF[0]]
    add(ia, ia, s * values["Cf"])
    for k, (a, b) in enumerate(VSRC):
        j = len(NODES) + k
        add(idx[a], j, one); add(j, idx[a], one)
    for k, (p, m, o, _, _) in enumerate(OPS.values()):
        j = len(NODES) + len(VSRC) + k
        add(idx[o], j, one); add(j, idx[p], one); add(j, idx[m], -one)
    return A, idx


def sources(idx):
    """(name, density, rhs dict) of every noise source."""
    out = []
    for name, (a, b, r) in RES.items():
        out.append((name, 4 * K * T / r, {idx.get(a): 1, idx.get(b): -1}))
    for k, (op, (p, m, o, en, inn)) in enumerate(OPS.items()):
        j = len(NODES) + len(VSRC) + k
        out.append((f"{op}.en", en ** 2, {j: -1}))
        out.append((f"{op}.in+", inn ** 2, {idx[p]: 1}))
        out.append((f"{op}.in-", inn ** 2, {idx[m]: 1}))
    return out


def naive_numpy(points=20000):
    t = time.perf_counter()
    f = np.logspace(-1, 4, points)
    vals = dict((k, v[2]) for k, v in RES.items())
    vals["Cf"] = CF[2]
    A0, idx = mna(vals, 0.0, 0.0, 1.0)
    A1, _ = mna(vals, 1.0, 0.0, 1.0)
    A0, A1 = np.array(A0, complex), np.array(A1, complex) - np.array(A0, complex)
    srcs = sources(idx)
    B = np.zeros((A0.shape[0], len(srcs)), complex)
    for k, (_, _, rhs) in enumerate(srcs):
        for i, v in rhs.items():
            if i is not None:
                B[i, k] = v
    dens = np.zeros(points)
    for i, fr in enumerate(f):
        X = np.linalg.solve(A0 + 2j * np.pi * fr * A1, B)
        dens[i] = sum(d * abs(X[idx["out"], k]) ** 2 for k, (_, d, _) in enumerate(srcs))
    ms = float(np.sum((dens[1:] + dens[:-1]) / 2 * np.diff(f)))
    return time.perf_counter() - t, ms


def naive_sympy(symbolic: bool, count=None):
    """The sympy route for the first ``count`` sources (all by default): nodal equations in
    sympy (every resistor a symbol with ``symbolic``, else the nominal numbers with only s
    symbolic), ``LUsolve`` and ``cancel`` per source, ``|H|^2`` at s = j 2 pi f, and
    ``sympy.integrate`` over the band."""
    t = time.perf_counter()
    s, f = sympy.symbols("s f")
    vals = {n: sympy.nsimplify(v[2]) for n, v in RES.items()}
    vals["Cf"] = sympy.Rational(1, 10 ** 7)
    syms = {n: sympy.Symbol(n, positive=True) for n in vals} if symbolic else vals
    A, idx = mna(syms, s, sympy.Integer(0), sympy.Integer(1))
    M = sympy.Matrix(A)
    nominal = {syms[n]: vals[n] for n in vals} if symbolic else {}
    total = sympy.Integer(0)
    for name, d, rhs in sources(idx)[:count]:
        b = sympy.zeros(M.shape[0], 1)
        for i, v in rhs.items():
            if i is not None:
                b[i] = v
        h = sympy.cancel(M.LUsolve(b)[idx["out"]])             # the transfer
        hn = h.xreplace(nominal).subs(s, 2 * sympy.pi * sympy.I * f)
        mag2 = sympy.cancel(sympy.expand(hn * sympy.conjugate(hn).subs(sympy.conjugate(f), f)))
        total += sympy.nsimplify(d) * mag2
    ms = sympy.integrate(total, (f, sympy.Rational(1, 10), 10 ** 4))
    return time.perf_counter() - t, float(ms)


SYMBOLIC_BUDGET = 60.0      # s: the symbolic sympy route for one source, stopped after this


def naive_sympy_symbolic_one() -> float | None:
    """Seconds of the symbolic sympy route for one source, in a subprocess; None when it
    does not finish within SYMBOLIC_BUDGET."""
    code = ("import sys; sys.path.insert(0, %r); import bench_noise as b; "
            "print(b.naive_sympy(True, 1)[0])" % os.path.dirname(os.path.abspath(__file__)))
    try:
        out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                             timeout=SYMBOLIC_BUDGET, check=True)
        return float(out.stdout.strip().splitlines()[-1])
    except subprocess.TimeoutExpired:
        return None


def main():
    with tempfile.TemporaryDirectory() as tmp:
        path = os.path.join(tmp, "ina.eqv")
        with open(path, "w", encoding="utf-8") as fh:
            fh.write(SHEET)
        env = dict(os.environ)
        env["PYTHONPATH"] = os.path.join(os.path.dirname(os.path.abspath(__file__)), "..")
        t = time.perf_counter()
        proc = subprocess.run([sys.executable, "-m", "derive", "record", path, "--format",
                               "json"], capture_output=True, text=True, env=env, check=True)
        ours = time.perf_counter() - t
    n = json.loads(proc.stdout)["results"][0]["noise"]
    print(f"derive (whole process, fresh interpreter): {ours:.2f} s; rms "
          f"{n['rms'] * 1e6:.6f} uV over 0.1 Hz..10 kHz ({n['mean_square']['method']})")
    import derive
    derive.derive_text("resistor R between a and gnd = 1k\nport p between a and gnd\n"
                       "find noise at p from 1 Hz to 2 Hz\n", "warm.eqv")       # imports
    t = time.perf_counter()
    rec = derive.derive_text(SHEET, "ina.eqv")
    rec.to_json()
    inproc = time.perf_counter() - t
    print(f"derive in-process (after imports, the same work): {inproc:.2f} s")
    t_np, ms_np = naive_numpy()
    print(f"numpy superposition + trapezoid (20 000 frequencies x 19 sources): {t_np:.2f} s; "
          f"rms {math.sqrt(ms_np) * 1e6:.6f} uV, relative error of the mean square "
          f"{abs(ms_np - n['mean_square']['value']) / n['mean_square']['value']:.2e}")
    t_sp, ms_sp = naive_sympy(False)
    print(f"sympy route at nominal values (numbers first, only s symbolic; LUsolve, cancel, "
          f"sympy.integrate; 19 sources): {t_sp:.2f} s; rms {math.sqrt(ms_sp) * 1e6:.6f} uV")
    one = naive_sympy_symbolic_one()
    if one is None:
        print(f"sympy route with every resistor symbolic (as derive keeps them): one source "
              f"did not finish in {SYMBOLIC_BUDGET:g} s, so 19 sources take more than "
              f"{19 * SYMBOLIC_BUDGET:g} s (lower bound)")
        sym_ratio = f"more than {19 * SYMBOLIC_BUDGET / ours:.0f}x (lower bound)"
    else:
        print(f"sympy route with every resistor symbolic: {one:.2f} s for one source, "
              f"about {19 * one:.1f} s for 19 (extrapolated linearly)")
        sym_ratio = f"about {19 * one / ours:.0f}x (extrapolated)"
    print(f"in-process ratio: sympy at nominal values / derive {t_sp / inproc:.1f}x")
    print(f"ratios against derive: sympy at nominal values {t_sp / ours:.1f}x; sympy symbolic "
          f"{sym_ratio}; numpy trapezoid (approximate, not exact) {t_np / ours:.2f}x")
    print(f"target: under {TARGET:g} s: {'met' if ours < TARGET else 'NOT met'}")


if __name__ == "__main__":
    main()
