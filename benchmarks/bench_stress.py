#!/usr/bin/env python
"""Benchmark of ``find stress`` against a naive brute force, measured in the same run.

    python benchmarks/bench_stress.py [--grid N]

The sheet: an invented ten-channel sensor excitation stage, a 10 V reference feeding ten
dividers (20 resistors, each ±1 %, a temperature coefficient and a 0.125 W rating),
-40 °C to 85 °C, derating 60 %, ``find stress``.

derive: the whole process through the command line (``python -m derive record SHEET
--format json``: start-up, parsing, solving, the exact worst cases, the JSON record), wall
time. Target: under 3 s.

Naive baseline: a dense grid brute force in plain Python -- for every channel a grid of N
points on each of its two resistors' tolerance bands and on the temperature range (N³
points per channel, every other part at nominal), the whole circuit's nodal equations
solved at every point by Gaussian elimination in plain Python floats, the largest power of
each resistor kept. It only samples the box (no corners unless on the grid, no interior
optimum unless on the grid), so its maxima are at most derive's; the script checks that.
"""
from __future__ import annotations

import argparse
import json
import os
import random
import subprocess
import sys
import tempfile
import time

TARGET = 3.0
V = 10.0
T0, TLO, THI = 25.0, -40.0, 85.0


def channels():
    rnd = random.Random(3)
    out = []
    for k in range(1, 11):
        rt = rnd.choice([1000, 2200, 4700, 10000])
        rb = rnd.choice([1000, 2200, 4700, 10000])
        out.append((k, rt, rnd.choice([25, 50, 100, -50]), rb, rnd.choice([25, 50, 100, -50])))
    return out


def sheet_text(chs) -> str:
    lines = ['title "Ten-channel sensor excitation (benchmark, invented)"',
             "voltage source Vref between ref and gnd = 10 V"]
    for k, rt, tct, rb, tcb in chs:
        lines.append(f"resistor Rt{k} between ref and t{k} = {rt} ohm ±1% rated 0.125 W "
                     f"tc {tct} ppm/K")
        lines.append(f"resistor Rb{k} between t{k} and gnd = {rb} ohm ±1% rated 0.125 W "
                     f"tc {tcb} ppm/K")
    lines += [f"temperature 25 C from {TLO:g} C to {THI:g} C", "derating 60%", "find stress"]
    return "\n".join(lines) + "\n"


# ------------------------------------------------------------------ naive baseline
def solve(G, b):
    """Gaussian elimination with partial pivoting, plain Python floats."""
    n = len(b)
    M = [row[:] + [b[i]] for i, row in enumerate(G)]
    for c in range(n):
        p = max(range(c, n), key=lambda r: abs(M[r][c]))
        M[c], M[p] = M[p], M[c]
        for r in range(c + 1, n):
            f = M[r][c] / M[c][c]
            if f:
                for j in range(c, n + 1):
                    M[r][j] -= f * M[c][j]
    x = [0.0] * n
    for r in range(n - 1, -1, -1):
        x[r] = (M[r][n] - sum(M[r][j] * x[j] for j in range(r + 1, n))) / M[r][r]
    return x


def circuit_powers(values):
    """Every resistor's power; ``values`` {name: ohms}. Unknowns: the ten tap voltages (the
    reference node is held at V by the ideal source)."""
    n = 10
    G = [[0.0] * n for _ in range(n)]
    b = [0.0] * n
    for k in range(1, 11):
        gt, gb = 1 / values[f"Rt{k}"], 1 / values[f"Rb{k}"]
        G[k - 1][k - 1] += gt + gb
        b[k - 1] += gt * V
    x = solve(G, b)
    out = {}
    for k in range(1, 11):
        out[f"Rt{k}"] = (V - x[k - 1]) ** 2 / values[f"Rt{k}"]
        out[f"Rb{k}"] = x[k - 1] ** 2 / values[f"Rb{k}"]
    return out


def baseline(chs, grid):
    nominal = {}
    tcs = {}
    for k, rt, tct, rb, tcb in chs:
        nominal[f"Rt{k}"], nominal[f"Rb{k}"] = float(rt), float(rb)
        tcs[f"Rt{k}"], tcs[f"Rb{k}"] = tct * 1e-6, tcb * 1e-6
    us = [-1 + 2 * i / (grid - 1) for i in range(grid)]
    ts = [TLO + (THI - TLO) * i / (grid - 1) for i in range(grid)]
    best = {}
    for k, *_ in chs:
        for T in ts:
            for ut in us:
                for ub in us:
                    vals = {}
                    for name, r0 in nominal.items():
                        u = ut if name == f"Rt{k}" else ub if name == f"Rb{k}" else 0.0
                        vals[name] = r0 * (1 + 0.01 * u) * (1 + tcs[name] * (T - T0))
                    p = circuit_powers(vals)
                    for name in (f"Rt{k}", f"Rb{k}"):
                        best[name] = max(best.get(name, 0.0), p[name])
    return best


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--grid", type=int, default=11, help="grid points per coordinate")
    args = ap.parse_args()
    chs = channels()
    here = os.path.dirname(os.path.abspath(__file__))
    with tempfile.TemporaryDirectory() as tmp:
        path = os.path.join(tmp, "excitation.eqv")
        with open(path, "w", encoding="utf-8") as f:
            f.write(sheet_text(chs))
        env = dict(os.environ, PYTHONPATH=os.path.join(here, "..") + os.pathsep +
                   os.environ.get("PYTHONPATH", ""))
        t = time.perf_counter()
        done = subprocess.run([sys.executable, "-m", "derive", "record", path, "--format",
                               "json"], capture_output=True, text=True, env=env)
        t_derive = time.perf_counter() - t
    if done.returncode != 0:
        print(done.stderr)
        raise SystemExit(f"derive failed with status {done.returncode}")
    stress = json.loads(done.stdout)["results"][0]["stress"]
    t = time.perf_counter()
    naive = baseline(chs, args.grid)
    t_naive = time.perf_counter() - t
    below = all(naive[n] <= stress[n]["worst"] * (1 + 1e-12) for n in naive)
    closest = max(naive[n] / stress[n]["worst"] for n in naive)
    methods = {}
    for s in stress.values():
        key = s["method"].split(": ")[0].split("; ")[-1][:60]
        methods[key] = methods.get(key, 0) + 1
    print(f"find stress of 20 rated resistors (tolerance box x {TLO:g}..{THI:g} C)")
    print(f"  derive (whole command, exact worst cases): {t_derive:.2f} s")
    print(f"  naive grid brute force ({args.grid}^3 points per channel, plain Python nodal "
          f"solves, {10 * args.grid ** 3} solves): {t_naive:.2f} s")
    print(f"  ratio naive/derive: {t_naive / t_derive:.2f}")
    print(f"  brute-force maxima never above derive's worst cases: {below} "
          f"(largest ratio {closest:.6f})")
    for k, v in sorted(methods.items()):
        print(f"  method: {k}... x{v}")
    print(f"  target under {TARGET:g} s: {'met' if t_derive < TARGET else 'NOT met'}")


if __name__ == "__main__":
    main()
