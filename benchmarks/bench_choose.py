#!/usr/bin/env python
"""Benchmark of ``choose`` with two symbols against a naive exhaustive search, measured in
the same run.

    python benchmarks/bench_choose.py

The sheet: a loaded divider feeding an ADC, ``choose R1, R2 from E96 for vth at out =
1.25 V``: R1 and R2 each over three decades of E96 (288 values each) around their nominal
values, every other part at nominal.

1. Whole process: ``python -m derive record SHEET --format json`` in a fresh interpreter
   (imports, parsing, derivation, search, JSON), timed from outside. Target: under 2 s.
2. The search alone: :meth:`derive.analyses.choose.Problem.search` (288 univariate solves
   with exact root isolation and a few exact evaluations each), against the naive
   exhaustive search over the same 288 x 288 = 82 944 combinations with the same exact
   evaluator (:meth:`Problem.value`, python-flint rationals), which must find the same
   best combination. The ratio naive/derive is printed.
"""
from __future__ import annotations

import itertools
import os
import subprocess
import sys
import tempfile
import time

HERE = os.path.dirname(os.path.abspath(__file__))
sys.path.insert(0, os.path.join(HERE, ".."))

SHEET = """title "ADC input divider (benchmark)"
voltage source Vref between top and gnd = 4.096 V
resistor R1 between top and out = 10 kohm ±1%
resistor R2 between out and gnd = 4.7 kohm ±1%
resistor Rin between out and gnd = 1 Mohm
port out between out and gnd
choose R1, R2 from E96 for vth at out = 1.25 V
"""
TARGET_S = 2.0


def main() -> int:
    with tempfile.TemporaryDirectory() as tmp:
        path = os.path.join(tmp, "bench.eqv")
        with open(path, "w", encoding="utf-8") as f:
            f.write(SHEET)
        env = dict(os.environ, PYTHONPATH=os.path.join(HERE, ".."))
        t = time.perf_counter()
        out = subprocess.run([sys.executable, "-m", "derive", "record", path, "--format",
                              "json"], capture_output=True, text=True, env=env)
        whole = time.perf_counter() - t
        if out.returncode != 0:
            print(out.stderr)
            return 1

    import derive
    from derive.analyses import choose
    from derive.forms.results import Context, Options
    c = derive.circuit_of(SHEET, "bench.eqv")
    req = c.requests[0]
    pb = choose.Problem(Context(c, Options()), req)
    t = time.perf_counter()
    ranked = pb.search()
    fast = time.perf_counter() - t
    n_fast = pb.evaluations
    pb.evaluations = 0
    t = time.perf_counter()
    best = None
    for vals in itertools.product(*pb.windows):
        v = pb.value(vals)
        if v is None:
            continue
        key = (pb.error(v), vals)
        if best is None or key < best:
            best = key
    naive = time.perf_counter() - t
    same = best == (ranked[0][0], ranked[0][1])
    print(f"choose R1, R2 from E96 (288 x 288 values): whole process {whole:.2f} s "
          f"(target < {TARGET_S:g} s): {'met' if whole < TARGET_S else 'NOT met'}")
    print(f"  search: derive {fast * 1000:.1f} ms ({n_fast} exact evaluations), naive "
          f"exhaustive {naive * 1000:.1f} ms ({pb.evaluations} exact evaluations): ratio "
          f"{naive / fast:.1f}x; same best combination: {same}")
    print(f"  best: R1 = {float(ranked[0][1][0]):g}, R2 = {float(ranked[0][1][1]):g}, "
          f"relative error {float(ranked[0][0]):.3e}")
    return 0 if same else 1


if __name__ == "__main__":
    sys.exit(main())
