#!/usr/bin/env python
"""Benchmark of the tolerance and sensitivity work against naive routes, measured in the
same run.

    python benchmarks/bench_tolerance.py [--quick]

1. Monte Carlo of 10^6 samples of a 20-symbol expression (a chain of parallel pairs and
   divider ratios). derive: :func:`derive.analyses.tolerance.monte_carlo` (numpy on a lambdified
   form). Naive baseline: a Python loop substituting each sample into the sympy expression
   (``expr.subs(...)`` then ``float``) for a few thousand samples, extrapolated linearly to
   10^6 (after a 10-sample warm-up call that pays one-off imports). Target: under 2 s.
2. Sensitivities of a 12-section ladder's vth (12 series, 12 shunt resistors and the
   source: 25 parts). derive: ``find sensitivity of vth at out`` (the derivation of vth
   included; the time of ``find vth at out`` alone is printed beside it). Naive baseline:
   the expanded rational function of vth, then ``sympy.diff`` and ``sympy.cancel`` per part.
   That is far too slow to run at 12 sections, so it is measured for one part on ladders of
   3..6 sections, fitted by a geometric growth per section, and extrapolated to 12
   sections x 25 parts (stated as extrapolated). Target: under 5 s.
"""
from __future__ import annotations

import argparse
import math
import os
import sys
import time

sys.path.insert(0, os.path.join(os.path.dirname(os.path.abspath(__file__)), ".."))

import numpy as np          # noqa: E402
import sympy                # noqa: E402

import derive               # noqa: E402
from derive.solver import convert as edge     # noqa: E402
from derive.analyses.sensitivity import Form   # noqa: E402
from derive.analyses.tolerance import monte_carlo   # noqa: E402


def expression_20():
    xs = sympy.symbols("x1:21")
    e = sympy.Integer(0)
    for a, b in zip(xs[0::2], xs[1::2]):
        e = e + a * b / (a + b)
    e = e * xs[2] / (xs[2] + xs[5]) + sympy.sqrt(xs[7] * xs[11])
    nominal = {x: sympy.Integer(100 + 37 * i) for i, x in enumerate(xs)}
    box = {x: (v, v / 100) for x, v in nominal.items()}
    return e, nominal, box


def bench_monte_carlo(n_naive: int):
    e, nominal, box = expression_20()
    monte_carlo(Form([], e), nominal, box, 10, seed=1)     # warm-up: first-use imports
    t = time.perf_counter()
    _, mc = monte_carlo(Form([], e), nominal, box, 10 ** 6, seed=1)
    fast = time.perf_counter() - t
    rng = np.random.default_rng(1)
    syms = sorted(box, key=str)
    t = time.perf_counter()
    acc = 0.0
    for _ in range(n_naive):
        pt = {x: float(box[x][0]) + float(box[x][1]) * rng.uniform(-1, 1) for x in syms}
        acc += float(e.subs(pt))
    naive = (time.perf_counter() - t) * 10 ** 6 / n_naive
    print(f"Monte Carlo, 10^6 samples, 20 symbols: derive {fast:.3f} s (target < 2 s); "
          f"naive sympy subs loop {naive:.0f} s (extrapolated from {n_naive} samples); "
          f"ratio naive/derive = {naive / fast:.0f}x; mean {mc['mean']:.6g} "
          f"(naive sample mean {acc / n_naive:.6g})")


def ladder(n: int) -> str:
    lines = ["voltage source V1 between n0 and gnd = 10 V ±1%"]
    for k in range(1, n + 1):
        lines.append(f"resistor Rs{k} between n{k - 1} and n{k} = {k} kohm ±1%")
        lines.append(f"resistor Rp{k} between n{k} and gnd = {10 + k} kohm ±1%")
    lines.append(f"port out between n{n} and gnd")
    return "\n".join(lines) + "\n"


def naive_one_part(n: int) -> float:
    """Seconds for the expanded-form route for one part (Rs1) of an n-section ladder."""
    rec = derive.derive_text(ladder(n) + "find vth at out\n")
    q = rec.results[0].quantities["vth"]
    expanded = edge.to_sympy(q.ratio) if q.ratio is not None else sympy.cancel(q.expr)
    expanded = sympy.expand(sympy.numer(expanded)) / sympy.expand(sympy.denom(expanded))
    t = time.perf_counter()
    sympy.cancel(sympy.diff(expanded, sympy.Symbol("Rs1")))
    return time.perf_counter() - t


def bench_ladder(sizes):
    text = ladder(12)
    t = time.perf_counter()
    derive.derive_text(text + "find vth at out\n")
    only_q = time.perf_counter() - t
    t = time.perf_counter()
    rec = derive.derive_text(text + "find sensitivity of vth at out\n")
    fast = time.perf_counter() - t
    s = rec.results[0].extra["sensitivities"]
    total = sum(v["value"] for k, v in s.items() if k != "V1")
    measured = [(n, naive_one_part(n)) for n in sizes]
    (n0, t0), (n1, t1) = measured[0], measured[-1]
    growth = (t1 / t0) ** (1 / (n1 - n0))
    naive = t1 * growth ** (12 - n1) * 25
    print("naive expanded-form route, one part: " +
          ", ".join(f"ladder{n} {t:.3f} s" for n, t in measured) +
          f" (growth {growth:.2f}x per section)")
    print(f"Sensitivities of ladder12 vth to 25 parts: derive {fast:.2f} s (target < 5 s; "
          f"find vth alone {only_q:.2f} s); naive ~{naive:.3g} s (extrapolated); ratio "
          f"naive/derive ~{naive / fast:.3g}x; sum of S over resistors {total:.2e} (0 expected)")


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--quick", action="store_true", help="smaller naive baselines")
    a = ap.parse_args()
    bench_monte_carlo(500 if a.quick else 3000)
    bench_ladder([3, 4, 5] if a.quick else [3, 4, 5, 6])


if __name__ == "__main__":
    main()
