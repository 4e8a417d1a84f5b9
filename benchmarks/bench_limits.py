"""How large an all-symbolic network ``derive record --format json`` answers within a time
budget (default 10 s): resistor ladders of n sections and square resistor grids of k x k
nodes, every resistor and the source symbolic (no nominal values).

For each family the size is doubled until a run fails or exceeds the budget, then bisected.
Each run is a real subprocess (``python -m derive record SHEET --format json``), so start-up
is included. As a baseline, the same Thevenin quantities are computed the naive way (sympy
``Matrix.LUsolve`` on the nodal equations, then ``cancel``) at the same sizes, in the same
run, and the ratio is printed.

    python benchmarks/bench_limits.py [--budget 10] [--families ladder,grid]
"""
from __future__ import annotations

import argparse
import os
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent


def ladder(n: int) -> str:
    """n sections: series Rs_i from node i-1 to i, shunt Rp_i from node i to ground."""
    lines = ["voltage source V between n0 and gnd"]
    for i in range(1, n + 1):
        lines.append(f"resistor Rs{i} between n{i - 1} and n{i}")
        lines.append(f"resistor Rp{i} between n{i} and gnd")
    lines += [f"port out between n{n} and gnd", "find thevenin at out"]
    return "\n".join(lines) + "\n"


def grid(k: int) -> str:
    """k x k nodes joined by resistors to their right and lower neighbours; the source
    drives one corner, the port is the opposite corner, the ground is a third corner."""
    def node(r, c):
        if (r, c) == (k - 1, 0):
            return "gnd"
        return f"g{r}_{c}"
    lines = ["voltage source V between g0_0 and gnd", "resistor Rsrc between g0_0 and gnd"]
    lines = ["voltage source V between vin and gnd", "resistor Rsrc between vin and g0_0"]
    for r in range(k):
        for c in range(k):
            if c + 1 < k:
                lines.append(f"resistor Rh{r}_{c} between {node(r, c)} and {node(r, c + 1)}")
            if r + 1 < k:
                lines.append(f"resistor Rv{r}_{c} between {node(r, c)} and {node(r + 1, c)}")
    lines += [f"port out between {node(k - 1, k - 1)} and gnd", "find thevenin at out"]
    return "\n".join(lines) + "\n"


FAMILIES = {"ladder": ladder, "grid": grid}


def run_derive(text: str, budget: float):
    """(ok, seconds, note) of one ``derive record --format json`` run."""
    with tempfile.TemporaryDirectory() as d:
        path = os.path.join(d, "bench.eqv")
        Path(path).write_text(text)
        t0 = time.perf_counter()
        try:
            p = subprocess.run([sys.executable, "-m", "derive", "record", path, "--format",
                                "json"], capture_output=True, text=True, cwd=ROOT,
                               timeout=budget, env={**os.environ, "PYTHONPATH": str(ROOT)})
        except subprocess.TimeoutExpired:
            return False, budget, "over budget"
        dt = time.perf_counter() - t0
        if p.returncode != 0:
            return False, dt, p.stderr.strip().splitlines()[0] if p.stderr else f"exit {p.returncode}"
        return dt <= budget, dt, "ok"


def naive(text: str, budget: float):
    """Seconds for the naive sympy solve of vth and rth (or None past the budget)."""
    code = ("import sys, sympy\n"
            "sys.path.insert(0, %r)\n"
            "from derive.sheet.parser import parse_sheet\n"
            "from derive.circuit.build import build_circuit\n"
            "c = build_circuit(parse_sheet(open(sys.argv[1]).read()))\n"
            "nodes = [n for n in c.nodes if n != c.ground]\n"
            "ix = {n: i for i, n in enumerate(nodes)}\n"
            "N = len(nodes) + 1\n"
            "A = sympy.zeros(N, N); b = sympy.zeros(N, 1)\n"
            "for e in c.elements:\n"
            "    a, z = (ix.get(x) for x in e.nodes)\n"
            "    if e.kind == 'resistor':\n"
            "        g = 1 / e.value\n"
            "        for i, j, s in ((a, a, 1), (z, z, 1), (a, z, -1), (z, a, -1)):\n"
            "            if i is not None and j is not None: A[i, j] += s * g\n"
            "    else:\n"
            "        k = N - 1\n"
            "        if a is not None: A[a, k] += 1; A[k, a] += 1\n"
            "        if z is not None: A[z, k] -= 1; A[k, z] -= 1\n"
            "        b[k] = e.value\n"
            "p, m, _ = c.ports['out']\n"
            "x = A.LUsolve(b)\n"
            "vth = sympy.cancel(x[ix[p]] - (x[ix[m]] if m in ix else 0))\n"
            % str(ROOT))
    with tempfile.TemporaryDirectory() as d:
        path = os.path.join(d, "bench.eqv")
        Path(path).write_text(text)
        t0 = time.perf_counter()
        try:
            subprocess.run([sys.executable, "-c", code, path], capture_output=True,
                           timeout=budget, check=True)
        except (subprocess.TimeoutExpired, subprocess.CalledProcessError):
            return None
        return time.perf_counter() - t0


def largest(make, budget: float, start: int = 2, cap: int = 4096):
    good, bad, size, log = None, None, start, []
    while size <= cap:
        ok, dt, note = run_derive(make(size), budget)
        log.append((size, ok, dt, note))
        print(f"  size {size:5d}: {'ok  ' if ok else 'FAIL'} {dt:7.2f} s  {note}", flush=True)
        if not ok:
            bad = size
            break
        good, size = size, size * 2
    if bad is None:
        return good, log
    lo, hi = (good or start - 1), bad
    while hi - lo > 1:
        mid = (lo + hi) // 2
        ok, dt, note = run_derive(make(mid), budget)
        log.append((mid, ok, dt, note))
        print(f"  size {mid:5d}: {'ok  ' if ok else 'FAIL'} {dt:7.2f} s  {note}", flush=True)
        lo, hi = (mid, hi) if ok else (lo, mid)
    return (lo if lo >= start else None), log


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--budget", type=float, default=10.0)
    ap.add_argument("--families", default="ladder,grid")
    args = ap.parse_args()
    for fam in args.families.split(","):
        make = FAMILIES[fam]
        print(f"{fam}: largest size answered within {args.budget:g} s")
        best, log = largest(make, args.budget)
        print(f"{fam}: largest = {best}")
        # baseline at the largest size the naive solve still finishes, same run
        for size, ok, dt, _ in sorted(log):
            if not ok:
                continue
            t_naive = naive(make(size), args.budget)
            shown = f"{t_naive:.2f} s" if t_naive is not None else f"> {args.budget:g} s"
            ratio = (f"{t_naive / dt:.2f}x" if t_naive is not None else
                     f"> {args.budget / dt:.2f}x")
            print(f"  size {size:5d}: derive {dt:.2f} s, naive sympy {shown}, naive/derive "
                  f"{ratio}")
            if t_naive is None:
                break


if __name__ == "__main__":
    main()
