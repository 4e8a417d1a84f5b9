"""Runaway sizes: time and peak memory of a chain of N series resistors, N = 10 ... 10 000,
against a naive baseline measured in the same run, and whether the growth is linear.

The sheet is ``find resistance at p`` of N resistors in series (values 1..N ohm). Every
measurement runs in a fresh Python process (``derive_text`` and the JSON record, after the
imports), best of ``--repeats``; it reports wall-clock and process CPU time, and the peak
RSS above the RSS after the imports.

The naive baseline emulates the former algorithms, switched on in its own processes by
resetting the module constants and functions that choose the path: the plain reduction
rule (the whole list of branches scanned after every move), every move checked through a
copy of the whole chain of definitions, the determinants expanded (a chain of N
resistors: N terms of N variables) and the result checked against them, the term
estimate on a dense matrix. It is skipped above ``--naive-max`` (its memory grows as N^2).

    python benchmarks/bench_runaway.py [--sizes 10,100,1000,10000] [--repeats 3]

The machine may be loaded: CPU time is the steadier figure.
"""
from __future__ import annotations

import argparse
import json
import math
import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent

CHILD = r'''
import json, resource, sys, time
sys.path.insert(0, ROOT)
n, naive = int(sys.argv[1]), sys.argv[2] == "naive"
import derive
from derive.forms import select, series_parallel
from derive.derivation import port_steps
from derive.derivation.steps import Equation
from derive.solver import determinant

def naive_reduce(branches, plus, minus, namer=None):
    """The plain rule: scan the whole list of live branches after every move."""
    live, moves = list(branches), []
    namer = namer or series_parallel.Namer()
    changed = True
    while changed:
        changed = False
        live = [b for b in live if b.a != b.b]
        pairs = {}
        for b in live:
            k = frozenset((b.a, b.b))
            if k in pairs:
                x = pairs[k]
                nb = namer.named(series_parallel.parallel(x, b, namer.branch_name()))
                live = [z for z in live if z is not x and z is not b] + [nb]
                moves.append({"move": "parallel", "parts": [x, b], "result": nb})
                changed = True
                break
            pairs[k] = b
        if changed:
            continue
        ends = {}
        for b in live:
            for m in (b.a, b.b):
                ends.setdefault(m, []).append(b)
        for m, bs in ends.items():
            if m in (plus, minus):
                continue
            if len(bs) == 1:
                live = [z for z in live if z is not bs[0]]
                moves.append({"move": "drop", "parts": bs, "result": None, "node": m})
                changed = True
                break
            if len(bs) == 2:
                x, y = bs
                nb = namer.named(series_parallel.series(x, y, m, namer.branch_name()))
                live = [z for z in live if z is not x and z is not y] + [nb]
                moves.append({"move": "series", "parts": [x, y], "result": nb, "node": m})
                changed = True
                break
    if len(live) == 1 and {live[0].a, live[0].b} == {plus, minus}:
        return (live[0] if live[0].a == plus else live[0].flipped()), moves
    return None, moves

if naive:
    series_parallel.reduce_to_port = naive_reduce
    port_steps._move_equation = lambda lhs, rhs, check, defs, also=(): \
        Equation(lhs, rhs, check=check, defs=dict(defs))
    select.LONG_ELEMENTS = port_steps.SPARSE_ELEMENTS = 10 ** 12
    determinant.DENSE_ESTIMATE = 10 ** 12
lines = ["voltage source Vs between top and gnd = 1 V"]
for i in range(1, n + 1):
    a = "a" if i == 1 else f"m{i - 1}"
    b = "gnd" if i == n else f"m{i}"
    lines.append(f"resistor R{i} between {a} and {b} = {i} ohm")
lines += ["port p between a and gnd", "find resistance at p"]
text = "\n".join(lines) + "\n"
rss0 = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
w0, c0 = time.perf_counter(), time.process_time()
rec = derive.derive_text(text, "chain.eqv", max_terms=1e12)
rec.to_json()
w1, c1 = time.perf_counter(), time.process_time()
q = rec.results[0].quantities["resistance"]
rss1 = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
print(json.dumps({"wall": w1 - w0, "cpu": c1 - c0, "rss_mb": rss1 / 1024,
                  "rss_growth_mb": (rss1 - rss0) / 1024, "value": q.value,
                  "verified": all(s.verified for s in rec.results[0].steps)}))
'''


def measure(n: int, naive: bool, repeats: int, timeout: float):
    best = None
    for _ in range(repeats):
        try:
            out = subprocess.run([sys.executable, "-c", CHILD.replace("ROOT", repr(str(ROOT))),
                                  str(n), "naive" if naive else "new"],
                                 capture_output=True, text=True, timeout=timeout)
        except subprocess.TimeoutExpired:
            return {"timeout": timeout}
        if out.returncode != 0:
            return {"error": (out.stderr.strip().splitlines() or ["?"])[-1]}
        r = json.loads(out.stdout.strip().splitlines()[-1])
        if r["value"] != n * (n + 1) / 2 or not r["verified"]:
            return {"error": f"wrong or unverified result {r['value']}"}
        if best is None or r["cpu"] < best["cpu"]:
            best = r
    return best


def show(r) -> str:
    if r is None:
        return "skipped"
    if "timeout" in r:
        return f"timed out after {r['timeout']:.0f} s"
    if "error" in r:
        return "failed: " + r["error"]
    return (f"{r['wall']:8.2f} s wall {r['cpu']:8.2f} s cpu  peak RSS {r['rss_mb']:6.0f} MB "
            f"(+{r['rss_growth_mb']:.0f} MB)")


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--sizes", default="10,100,1000,10000")
    ap.add_argument("--repeats", type=int, default=3)
    ap.add_argument("--naive-max", type=int, default=1000)
    ap.add_argument("--timeout", type=float, default=600)
    a = ap.parse_args()
    sizes = [int(x) for x in a.sizes.split(",")]
    print("chain of N series resistors, find resistance at p (fresh process per run, best "
          f"of {a.repeats} by CPU time; the machine may be loaded)")
    rows = {}
    for n in sizes:
        reps = a.repeats if n <= 1000 else max(1, a.repeats - 1)
        new = measure(n, False, reps, a.timeout)
        old = measure(n, True, reps, a.timeout) if n <= a.naive_max else None
        rows[n] = (new, old)
        print(f"N = {n:>6}: derive {show(new)}")
        print(f"{'':10}naive  {show(old)}")
        if new and old and "cpu" in new and "cpu" in old:
            print(f"{'':10}naive/derive: {old['cpu'] / new['cpu']:.1f}x cpu, "
                  f"{old['rss_growth_mb'] / max(new['rss_growth_mb'], 1):.1f}x RSS growth")
    print("growth (exponent k of time ~ N^k between consecutive sizes; 1 is linear):")
    ok = True
    for small, big in zip(sizes, sizes[1:]):
        for label, i in (("derive", 0), ("naive", 1)):
            r1, r2 = rows[small][i], rows[big][i]
            if not (r1 and r2 and "cpu" in r1 and "cpu" in r2):
                continue
            k = math.log(r2["cpu"] / r1["cpu"]) / math.log(big / small)
            km = math.log(max(r2["rss_growth_mb"], 1) / max(r1["rss_growth_mb"], 1)) / \
                math.log(big / small)
            print(f"  {label:6} {small:>6} -> {big:<6}: time k = {k:.2f}, RSS growth k = "
                  f"{km:.2f}")
            if label == "derive" and small >= 1000:
                ok = ok and k <= 1.25
    big = [n for n in sizes if n >= 1000]
    if len(big) >= 2:
        print("linear growth from 1000 up:", "yes" if ok else "NO")
    return 0


if __name__ == "__main__":
    sys.exit(main())
