#!/usr/bin/env python
"""Benchmark of ``approximately within 1%`` on a 12-symbol op-amp stage, against a naive
search measured in the same run.

    python benchmarks/bench_approximation.py [--budget SECONDS]

The stage (an invented scenario): an inverting amplifier with a T feedback network, a
source resistance and an input shunt, a bias-compensation resistor, a finite op-amp model
(gain, input and output resistance) and a series resistor into a load -- 12 toleranced
symbols; the exact gain has 5 numerator and 145 denominator terms.

1. Whole process: ``python -m derive record SHEET --format json`` in a fresh interpreter
   (imports, parsing, the exact derivation, the approximation and its established bound, the
   JSON record). Target: under 3 s. Wall and CPU time are both printed (with the load
   average): on a shared machine the wall time includes waiting for a CPU.
2. In-process: :func:`derive.analyses.approximation.approximate` (the dominant-term search,
   then the bound established by exact evaluation) against a naive baseline on the same
   problem: every subset of the terms, by increasing number of kept terms (numerator and
   denominator), screened on the same floating-point points, and the first passing subset
   established the same way. Both in CPU seconds of this process. The baseline stops after
   ``--budget`` CPU seconds (default 20);
   if it has not finished by then, the ratio is printed as a lower bound.
"""
from __future__ import annotations

import argparse
import itertools
import math
import os
import subprocess
import sys
import tempfile
import time

sys.path.insert(0, os.path.join(os.path.dirname(os.path.abspath(__file__)), ".."))

import derive                                   # noqa: E402
from derive.analyses import approximation as ap  # noqa: E402
from derive.analyses import sensitivity as sens  # noqa: E402
from derive.analyses import tolerance            # noqa: E402
from derive.forms.results import Context, Options   # noqa: E402
from derive.forms.select import port_quantities     # noqa: E402

SHEET = """title "Inverting stage with T feedback"
voltage source Vin between src and gnd = 100 mV
resistor Rs between src and a = 50 ohm ±5%
resistor Rd between a and gnd = 100 kohm ±1%
resistor R1 between a and n = 10 kohm ±1%
resistor R2 between n and t = 47 kohm ±1%
resistor R3 between t and o = 47 kohm ±1%
resistor R4 between t and gnd = 5.1 kohm ±1%
resistor Rb between p and gnd = 9.1 kohm ±1%
opamp U1 inputs p, n output o gain A rin Ri rout Ro
nominal A = 200000 ±50%
nominal Ri = 2 Mohm ±30%
nominal Ro = 75 ohm ±20%
resistor Rser between o and out = 100 ohm ±1%
resistor RL between out and gnd = 10 kohm ±10%
port out between out and gnd
find gain from Vin to out approximately within 1%
"""
WITHIN = 0.01
TARGET = 3.0


def whole_process() -> tuple:
    with tempfile.TemporaryDirectory() as d:
        path = os.path.join(d, "stage.eqv")
        with open(path, "w", encoding="utf-8") as f:
            f.write(SHEET)
        root = os.path.join(os.path.dirname(os.path.abspath(__file__)), "..")
        env = dict(os.environ, PYTHONPATH=root + os.pathsep + os.environ.get("PYTHONPATH", ""))
        import resource
        before = resource.getrusage(resource.RUSAGE_CHILDREN)
        t = time.perf_counter()
        out = subprocess.run([sys.executable, "-m", "derive", "record", path, "--format",
                              "json"], capture_output=True, text=True, env=env, check=True)
        wall = time.perf_counter() - t
        after = resource.getrusage(resource.RUSAGE_CHILDREN)
        cpu = (after.ru_utime - before.ru_utime) + (after.ru_stime - before.ru_stime)
        return wall, cpu, out.stdout


def problem():
    c = derive.circuit_of(SHEET)
    ctx = Context(c, Options())
    req = c.requests[0]
    q = port_quantities(ctx, req)[0]
    num, den, syms = sens.rational(q.expr, [])
    return ctx, req, q, ap.Problem(num, den, syms, ctx.nominal, tolerance.box_of(ctx, syms),
                                   None)


def naive(pb, budget: float):
    """Every subset of terms by increasing size; (candidate, bound, subsets, finished)."""
    sc = ap.Screen(pb)
    t0 = time.process_time()
    nn, nd = len(pb.num), len(pb.den)
    tried = 0
    for size in range(2, nn + nd):
        for a in range(1, min(nn, size - 1) + 1):
            b = size - a
            if b > nd:
                continue
            for kn in itertools.combinations(range(nn), a):
                for kd in itertools.combinations(range(nd), b):
                    tried += 1
                    if tried % 256 == 0 and time.process_time() - t0 > budget:
                        return None, None, tried, False
                    if sc.max_error(kn, kd) > WITHIN * ap.MARGINS[0]:
                        continue
                    c = ap.Candidate(pb, kn, kd, "naive")
                    bound = ap.establish(pb, sc, c)
                    if bound.value <= WITHIN:
                        return c, bound, tried, True
    return None, None, tried, True


def main():
    ap_ = argparse.ArgumentParser()
    ap_.add_argument("--budget", type=float, default=20.0)
    args = ap_.parse_args()

    wall, cpu, out = whole_process()
    import json
    a = json.loads(out)["results"][0]["quantities"]["gain"]["approximation"]
    load = os.getloadavg()[0] if hasattr(os, "getloadavg") else float("nan")
    print(f"whole process (python -m derive record, 12 symbols): {wall:.2f} s wall, "
          f"{cpu:.2f} s CPU (load average {load:.1f} on {os.cpu_count()} CPUs); "
          f"target < {TARGET:g} s: {'met' if wall < TARGET else 'NOT met'} (wall), "
          f"{'met' if cpu < TARGET else 'NOT met'} (CPU)")
    print(f"  approximation: {a['expr']}  max error {a['max_error'] * 100:.3g} % "
          f"({'proven' if a['proven'] else 'searched, %d points' % a['points']})")

    ctx, req, q, pb = problem()
    print(f"  exact gain: {len(pb.num)} numerator and {len(pb.den)} denominator terms, "
          f"{len(pb.tol)} toleranced symbols")
    # CPU time of this process (the ratio is not skewed by other load on the machine)
    t = time.process_time()
    res = ap.approximate(ctx, req, q)
    ours = time.process_time() - t
    print(f"derive (in process): {ours:.3f} s CPU -> {ap.to_text(res['expr'])}")
    t = time.process_time()
    cand, bound, tried, finished = naive(pb, args.budget)
    base = time.process_time() - t
    if finished and cand is not None:
        print(f"naive subsets (in process): {base:.3f} s CPU after {tried} subsets -> "
              f"{ap.to_text(cand.expr)} (max error {bound.value * 100:.3g} %)")
        print(f"ratio naive/derive: {base / ours:.1f}x")
    else:
        print(f"naive subsets (in process): not finished in {base:.1f} s CPU ({tried} subsets "
              "tried, none met the bound yet)")
        print(f"ratio naive/derive: > {base / ours:.1f}x (lower bound)")
    if not math.isfinite(ours):
        sys.exit(1)


if __name__ == "__main__":
    main()
