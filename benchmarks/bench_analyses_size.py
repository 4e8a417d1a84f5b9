#!/usr/bin/env python
"""Sensitivity, tolerance, solve and check at real sizes, whole process, against a naive
route measured in the same run.

    python benchmarks/bench_analyses_size.py [--quick] [--repeat N] [--naive-timeout S]

Cases (every part with a nominal and +-1 %):
  * all-symbolic ladders of 2..16 sections: ``find sensitivity of vth`` and
    ``find tolerance of vth`` (Monte Carlo included);
  * a 14-resistor, five-node mesh with one source: ``find sensitivity of vth``,
    ``find tolerance of vth``, ``solve vth for R5`` and ``check rth equals R1||R2``.
Each runs as ``derive record SHEET --format json`` in fresh processes (``--repeat`` of
them, default 3; the fastest in wall-clock time is kept); wall-clock time, process cpu
time (user + system of that child and its worker, from ``os.wait4``) and peak memory
(``ru_maxrss``) are printed, and the time targets are judged in both (a loaded machine
inflates the wall-clock times unevenly). Run it on an idle machine. The naive route, in a subprocess with a time
limit: nodal equations into ``sympy.solve``, then ``sympy.diff`` and ``sympy.cancel`` of
the output voltage for every part (the sensitivities), or ``sympy.solve`` for R5.
Targets printed as met / NOT met: every case under 3 s, peak memory under 500 MB, time
monotone in size along the ladders (within 0.15 s of noise).
"""
from __future__ import annotations

import argparse
import itertools
import os
import subprocess
import sys
import tempfile
import time

HERE = os.path.dirname(os.path.abspath(__file__))
ROOT = os.path.dirname(HERE)


def ladder(n: int) -> str:
    lines = ["voltage source V between n0 and gnd = 10 V ±1%"]
    for k in range(1, n + 1):
        lines.append(f"resistor Rs{k} between n{k - 1} and n{k} = {k} kohm ±1%")
        lines.append(f"resistor Rp{k} between n{k} and gnd = {10 + k} kohm ±1%")
    lines.append(f"port out between n{n} and gnd")
    return "\n".join(lines) + "\n"


def mesh() -> str:
    """Every pair of five nodes joined once, four pairs twice: 14 resistors, one source."""
    nodes = ["top", "n1", "n2", "n3", "gnd"]
    pairs = list(itertools.combinations(nodes, 2))
    pairs += pairs[:4]
    lines = ["voltage source V between top and gnd = 5 V ±1%"]
    for i, (a, b) in enumerate(pairs, 1):
        lines.append(f"resistor R{i} between {a} and {b} = {1 + i % 5} kohm ±1%")
    lines.append("port out between n3 and gnd")
    return "\n".join(lines) + "\n"


def run_derive(text: str) -> tuple:
    with tempfile.NamedTemporaryFile("w", suffix=".eqv", delete=False) as f:
        f.write(text)
    cmd = [sys.executable, "-m", "derive", "record", f.name, "--format", "json",
           "--samples", "20000", "--timeout", "120"]
    t = time.perf_counter()
    with tempfile.TemporaryFile() as out, tempfile.TemporaryFile() as err:
        proc = subprocess.Popen(cmd, stdout=out, stderr=err, cwd=ROOT)
        _pid, status, usage = os.wait4(proc.pid, 0)      # this child's own peak memory
        dt = time.perf_counter() - t
        proc.returncode = os.waitstatus_to_exitcode(status)
        err.seek(0)
        message = err.read().decode("utf-8", "replace").strip().splitlines()[-1:]
    os.unlink(f.name)
    cpu = usage.ru_utime + usage.ru_stime
    if proc.returncode != 0:
        return dt, None, message, cpu
    return dt, usage.ru_maxrss / 1024, None, cpu


def best_of(text: str, repeat: int) -> tuple:
    """run_derive ``repeat`` times; the fastest run (wall-clock) that succeeded."""
    runs = [run_derive(text) for _ in range(max(1, repeat))]
    ok = [r for r in runs if r[2] is None]
    return min(ok, key=lambda r: r[0]) if ok else runs[0]


NAIVE = r'''
import sys, itertools, sympy
kind, n = sys.argv[1], int(sys.argv[2])
if kind == "ladder":
    edges = [("V", "n0", "gnd", None)]
    for k in range(1, n + 1):
        edges += [(f"Rs{k}", f"n{k-1}", f"n{k}", 1), (f"Rp{k}", f"n{k}", "gnd", 1)]
    out, src = f"n{n}", "n0"
else:
    nodes = ["top", "n1", "n2", "n3", "gnd"]
    pairs = list(itertools.combinations(nodes, 2)); pairs += pairs[:4]
    edges = [("V", "top", "gnd", None)] + [(f"R{i}", a, b, 1) for i, (a, b) in
                                           enumerate(pairs, 1)]
    out, src = "n3", "top"
V = sympy.Symbol("V")
names = sorted({e[1] for e in edges} | {e[2] for e in edges} - {"gnd", src})
v = {m: sympy.Symbol("v_" + m) for m in names}
v["gnd"], v[src] = 0, V
eqs = []
for m in names:
    kcl = 0
    for name, a, b, r in edges:
        if r is None:
            continue
        R = sympy.Symbol(name)
        if a == m:
            kcl += (v[a] - v[b]) / R
        elif b == m:
            kcl += (v[b] - v[a]) / R
    eqs.append(kcl)
sol = sympy.solve(eqs, [v[m] for m in names], dict=True)[0]
vth = sympy.cancel(sol[v[out]])
if sys.argv[3] == "solve":
    sympy.solve(sympy.Symbol("vth") - vth, sympy.Symbol("R5"))
else:
    for name, a, b, r in edges:
        sympy.cancel(sympy.diff(vth, sympy.Symbol(name)))
'''


def run_naive(kind: str, n: int, what: str, limit: float):
    t = time.perf_counter()
    try:
        subprocess.run([sys.executable, "-c", NAIVE, kind, str(n), what], timeout=limit,
                       capture_output=True, check=True)
    except subprocess.TimeoutExpired:
        return None
    return time.perf_counter() - t


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--quick", action="store_true", help="fewer ladder sizes")
    ap.add_argument("--naive-timeout", type=float, default=60.0)
    ap.add_argument("--repeat", type=int, default=3,
                    help="fresh processes per case; the fastest is kept")
    a = ap.parse_args()
    sizes = [2, 4, 6, 8, 12, 16] if a.quick else list(range(2, 17))
    rows, ok_mem = [], True
    ok_time = {"wall-clock": True, "process cpu": True}
    series = {}
    print(f"load average {os.getloadavg()[0]:.1f} (a loaded machine inflates wall-clock "
          f"times); each case the fastest of {max(1, a.repeat)} fresh processes")
    for n in sizes:
        for req in ("find sensitivity of vth at out", "find tolerance of vth at out"):
            dt, mb, err, cpu = best_of(ladder(n) + req + "\n", a.repeat)
            series.setdefault(req, []).append((n, dt, cpu))
            rows.append((f"ladder {n:2d}", req.split(" of")[0], dt, mb, err, cpu))
    base = mesh()
    for req in ("find sensitivity of vth at out", "find tolerance of vth at out",
                "solve vth at out for R5", "check rth at out equals R1||R2"):
        dt, mb, err, cpu = best_of(base + req + "\n", a.repeat)
        rows.append(("mesh 14R", req.split(" at")[0].split(" of")[0], dt, mb, err, cpu))
    print(f"{'case':10} {'request':18} {'time s':>7} {'cpu s':>7} {'peak MB':>8}")
    for case, req, dt, mb, err, cpu in rows:
        ok_time["wall-clock"] &= dt < 3 and err is None
        ok_time["process cpu"] &= cpu < 3 and err is None
        ok_mem &= mb is not None and mb < 500
        print(f"{case:10} {req:18} {dt:7.2f} {cpu:7.2f} {mb if mb else float('nan'):8.0f}"
              + (f"  FAILED: {err}" if err else ""))
    mono = {"wall-clock": True, "process cpu": True}
    for req, pts in series.items():
        for (n0, t0, c0), (n1, t1, c1) in zip(pts, pts[1:]):
            for clock, x0, x1 in (("wall-clock", t0, t1), ("process cpu", c0, c1)):
                if x1 + 0.15 < x0:
                    mono[clock] = False
                    print(f"not monotone ({clock}): {req}: ladder {n0} {x0:.2f} s > "
                          f"ladder {n1} {x1:.2f} s")
    print("naive route (sympy.solve of the nodal equations, then diff + cancel per part):")
    for kind, n, what, ours in (("ladder", 6, "sens", None), ("mesh", 0, "sens", None),
                                ("mesh", 0, "solve", None)):
        t = run_naive(kind, n, what, a.naive_timeout)
        mine = [r for r in rows if (r[0] == "mesh 14R" if kind == "mesh" else
                                    r[0] == f"ladder {n:2d}") and
                r[1] == ("solve vth" if what == "solve" else "find sensitivity")]
        label = f"{kind} {n}" if kind == "ladder" else "mesh 14R"
        if mine:
            d = mine[0][2]
            if t is None:
                print(f"  {label} {what}: naive > {a.naive_timeout:.0f} s (stopped); derive "
                      f"{d:.2f} s; ratio > {a.naive_timeout / d:.0f}x")
            else:
                print(f"  {label} {what}: naive {t:.2f} s; derive {d:.2f} s; ratio "
                      f"{t / d:.1f}x")
    for clock in ("wall-clock", "process cpu"):
        print(f"target every case under 3 s ({clock}): "
              f"{'met' if ok_time[clock] else 'NOT met'}")
    print(f"target peak memory under 500 MB: {'met' if ok_mem else 'NOT met'}")
    for clock in ("wall-clock", "process cpu"):
        print(f"target time monotone along the ladders ({clock}, within 0.15 s): "
              f"{'met' if mono[clock] else 'NOT met'}")


if __name__ == "__main__":
    main()
