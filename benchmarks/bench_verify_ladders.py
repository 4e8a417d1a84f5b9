#!/usr/bin/env python
"""Whole-derivation timings and the share spent verifying steps, against a naive route.

    python benchmarks/bench_verify_ladders.py [--repeat N] [--only CASES] [--timeout S] [--json FILE]

Cases (every resistor symbolic, the circuits of bench_solver.py): ladders of 2..32 sections
driven by a voltage source (``find thevenin at out``) and square grids of 3x3..6x6 nodes fed
by a current source (``find resistance at out``). Each case runs in fresh subprocesses (N of
them, default 3; the fastest is kept, its verification time from the same run) through the
public API (``derive.derive_text`` of the whole sheet -- parse, solve, forms, steps, every
check -- timed with ``time.perf_counter`` and ``time.process_time``); inside it every
function listed in ``VERIFY_FUNCTIONS`` (each check of a displayed equation or a result
against an independent computation) is wrapped, in this benchmark only, and the time of the
outermost calls is summed. A listed function that no longer exists stops the benchmark.

Printed per case: total time, verification time and share (wall-clock, then process cpu
time of the same run), the forms chosen. Targets, each printed as met / NOT met from this
run's numbers, once in wall-clock and once in cpu time (a loaded machine inflates the
wall-clock times unevenly):

1. verification <= half of the total on every case;
2. total time monotone in size within each family (each case no faster than the one
   before it beyond a noise margin of 5 % and 2 ms; a non-monotone step is listed), measured without the cyclic garbage
   collector's pauses: a full collection walks every object of the process (sympy's
   modules and caches: 25-40 ms) and falls on whichever case crosses the interpreter's
   allocation threshold, so it adds a step that does not follow the size of the case. The
   pauses are timed in the same run (``gc.callbacks``) and printed (column ``gc``); the
   same target is printed once more on the totals with the pauses, for information;
3. ladder 8 against a naive route measured in the same run (fastest of as many runs): the
   KCL equations into ``sympy.solve``, then ``sympy.cancel`` of the output voltage (vth
   only -- less than derive does), ratio naive/derive >= 10x.
"""
from __future__ import annotations

import argparse
import json
import os
import sys
import time

HERE = os.path.dirname(os.path.abspath(__file__))
ROOT = os.path.dirname(HERE)
sys.path.insert(0, ROOT)
sys.path.insert(0, HERE)

from bench_solver import circuit, run_naive, sheet_text, worker_result   # noqa: E402

LADDERS = list(range(2, 33))
GRIDS = [3, 4, 5, 6]


# ----------------------------------------------------------------------------- worker
class _Clock:
    """Sums the time of the outermost calls of the wrapped functions."""

    def __init__(self):
        self.total = 0.0
        self.cpu = 0.0
        self.by = {}            # outermost cpu seconds per wrapped function
        self.depth = 0
        self.calls = {}

    def wrap(self, owner, name):
        fn = getattr(owner, name)
        clock = self

        def timed(*a, **k):
            clock.calls[name] = clock.calls.get(name, 0) + 1
            if clock.depth:
                return fn(*a, **k)
            clock.depth += 1
            t, c = time.perf_counter(), time.process_time()
            try:
                return fn(*a, **k)
            finally:
                clock.total += time.perf_counter() - t
                dc = time.process_time() - c
                clock.cpu += dc
                clock.by[name] = clock.by.get(name, 0.0) + dc
                clock.depth -= 1
        setattr(owner, name, timed)


# Every function that checks a displayed equation or a result against an independent
# computation, as (module path, attribute path). The benchmark refuses to run when one is
# missing (a renamed check would otherwise drop out of the verification time unnoticed).
VERIFY_FUNCTIONS = [
    ("derive.derivation.steps", "Step.verify"),             # every displayed equation
    ("derive.derivation.steps", "compare"),
    ("derive.derivation.steps", "equal"),
    ("derive.derivation.nodal_steps", "random_solve_check"),  # exact solves at points
    ("derive.derivation.nodal_steps", "Nodal.agrees_with_stamps"),
    ("derive.derivation.nodal_steps", "check_rows"),          # KCL rows against the stamps
    ("derive.derivation.nodal_steps", "det_check"),           # Cramer determinants
    ("derive.derivation.port_steps", "through_agrees"),       # branch current forms
    ("derive.derivation.port_steps", "check_result"),         # result against the solver
                                                              # (or nodal solves at points)
    ("derive.derivation.port_steps", "cross_check_step"),     # vth = isc*rth step
    ("derive.derivation.port_steps", "independent_value"),    # value at nominal values
    ("derive.forms.select", "cross_check"),                   # vth = isc*rth of the ratios
    ("derive.analyses.sensitivity", "agree"),
]


def _resolve(mod, path):
    import importlib
    owner = importlib.import_module(mod)
    *head, name = path.split(".")
    for h in head:
        owner = getattr(owner, h)
    if not callable(getattr(owner, name, None)):
        raise SystemExit(f"bench_verify_ladders: {mod}.{path} not found; update "
                         "VERIFY_FUNCTIONS to the current verification functions")
    return owner, name


class _GcClock:
    """Sums the wall-clock and cpu time of the garbage collector's pauses."""

    def __init__(self):
        self.wall = self.cpu = 0.0
        self.started = None
        self.full = 0               # collections of the oldest generation

    def __call__(self, phase, info):
        if phase == "start":
            self.started = (time.perf_counter(), time.process_time())
        elif self.started is not None:
            self.wall += time.perf_counter() - self.started[0]
            self.cpu += time.process_time() - self.started[1]
            self.full += info.get("generation") == 2
            self.started = None


def worker(case: str):
    import gc
    import derive
    import derive.analyses.run  # noqa: F401  (every stage imported before wrapping)

    derive.derive_text(sheet_text("ladder2"))           # warm-up: imports, grammar
    clock = _Clock()
    for mod, path in VERIFY_FUNCTIONS:
        clock.wrap(*_resolve(mod, path))
    text = sheet_text(case)
    gclock = _GcClock()
    gc.callbacks.append(gclock)
    c = time.process_time()
    t = time.perf_counter()
    rec = derive.derive_text(text, f"{case}.eqv")
    total = time.perf_counter() - t
    cpu = time.process_time() - c
    gc.callbacks.remove(gclock)
    verified = all(s.verified for r in rec.results for s in r.steps)
    eqs = [e for r in rec.results for s in r.steps for e in s.equations]
    methods = {}
    for e in eqs:
        key = f"{e.verified_by}" + (f"@{e.points}" if e.points else "")
        methods[key] = methods.get(key, 0) + 1
    q = rec.results[0].quantities
    forms_used = {n: x.form for n, x in q.items()}
    print("RESULT " + json.dumps(dict(total=total, cpu=cpu, gc=gclock.wall, gc_cpu=gclock.cpu,
                                      gc_full=gclock.full,
                                      total_less_gc=total - gclock.wall,
                                      cpu_less_gc=cpu - gclock.cpu, verify=clock.total,
                                      verify_cpu=clock.cpu, verify_by=clock.by,
                                      calls=clock.calls, verified=verified, forms=forms_used,
                                      methods=methods,
                                      steps=sum(len(r.steps) for r in rec.results))))


def naive_worker(case: str):
    c = time.process_time()
    r = run_naive(case)
    r["cpu"] = time.process_time() - c
    print("RESULT " + json.dumps(r))


def spawn(mode, case, timeout):
    r = worker_result([sys.executable, os.path.abspath(__file__), mode, case], timeout,
                      cwd=ROOT)
    if r["status"] == "error":
        tail = (r.pop("stderr").strip().splitlines() or ["?"])[-1]
        r["error"] = tail[-200:]
    return r


NOISE_SHARE, NOISE_SECONDS = 0.05, 0.002   # a step down within both is run-to-run noise


def _step_down(a: float, b: float) -> bool:
    """Whether the larger case's time ``b`` is below the smaller case's ``a`` by more than
    the noise margin: more than ``NOISE_SHARE`` of ``a`` and more than ``NOISE_SECONDS``
    (best-of-3 times of these 20-150 ms cases move by 1-2 ms between runs of the same
    commit on an idle machine)."""
    return b < a * (1 - NOISE_SHARE) and a - b > NOISE_SECONDS


def targets(rows, ok, failed, ladders, grids, naive, tot, ver, ntot, naive_timeout):
    """Print the three targets as met / NOT met from ``rows`` (``tot``/``ver`` the total and
    verification time keys, ``ntot`` the naive route's)."""
    bad_share = [c for c in ok if rows[c][ver] > 0.5 * rows[c][tot]]
    worst = max(ok, key=lambda c: rows[c][ver] / rows[c][tot]) if ok else None
    print(f"target 1, verification <= half of the total on every case: "
          f"{'met' if not bad_share and not failed else 'NOT met'}"
          + (f" (largest share {rows[worst][ver] / rows[worst][tot] * 100:.0f}% at "
             f"{worst})" if worst else "")
          + (f" (over half: {', '.join(bad_share)})" if bad_share else "")
          + (f" (did not finish: {', '.join(failed)})" if failed else ""))
    for key, what in ((tot + "_less_gc", "target 2, {} total time (collector pauses "
                                          "excluded) monotone in size"),
                      (tot, "  for information, {} total time with the collector's "
                            "pauses monotone in size")):
        for fam, sizes in (("ladder", ladders), ("grid", grids)):
            seq = [(f"{fam}{n}", rows[f"{fam}{n}"]) for n in sizes]
            steps = [(a, b) for (a, ra), (b, rb) in zip(seq, seq[1:])
                     if ra["status"] == rb["status"] == "ok" and _step_down(ra[key], rb[key])]
            missing = [c for c, r in seq if r["status"] != "ok"]
            print(what.format(fam) + ": "
                  f"{'met' if not steps and not missing else 'NOT met'}"
                  + (f" (did not finish: {', '.join(missing)})" if missing else "")
                  + ("" if not steps else " (faster than the smaller case: " +
                     ", ".join(f"{b} {fmt(rows[b][key])} < {a} {fmt(rows[a][key])}"
                               for a, b in steps) + ")"))
    d8 = rows.get("ladder8")
    if d8 and d8["status"] == "ok" and naive["status"] == "ok":
        ratio = naive[ntot] / d8[tot]
        print(f"target 3, ladder8 naive (sympy.solve + cancel of vth only) / derive (whole "
              f"find thevenin, steps verified): {fmt(naive[ntot])} / {fmt(d8[tot])} "
              f"= {ratio:.1f}x ({'met' if ratio >= 10 else 'NOT met'}, target >= 10x)")
    elif d8 and d8["status"] == "ok" and naive["status"].startswith("timeout"):
        print(f"target 3, ladder8 naive route {naive['status']} (wall-clock): ratio >= "
              f"{naive_timeout / d8['total']:.0f}x in wall-clock time (met)")
    else:
        print(f"target 3: not measured (derive {d8 and d8['status']}, naive {naive['status']})")


def est_terms(case):
    from derive.solver import determinant as K
    from bench_solver import nodal
    m, _, _ = nodal(case)
    return K.estimate_det_terms(m)


def fmt(t):
    return "-" if t is None else (f"{t * 1e3:.0f} ms" if t < 1 else f"{t:.2f} s")


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="ladders 2..16 step 2, grids 3..5")
    ap.add_argument("--timeout", type=float, default=300.0, help="per case, seconds")
    ap.add_argument("--naive-timeout", type=float, default=600.0)
    ap.add_argument("--repeat", type=int, default=3,
                    help="fresh runs per case (derive and naive alike); the fastest is kept")
    ap.add_argument("--only", help="comma-separated cases (e.g. ladder9,ladder10)")
    ap.add_argument("--json")
    ap.add_argument("--worker", nargs=1, help=argparse.SUPPRESS)
    ap.add_argument("--naive-worker", nargs=1, help=argparse.SUPPRESS)
    args = ap.parse_args()
    if args.worker:
        return worker(args.worker[0])
    if args.naive_worker:
        return naive_worker(args.naive_worker[0])
    ladders = list(range(2, 17, 2)) if args.quick else LADDERS
    grids = GRIDS[:-1] if args.quick else GRIDS
    cases = [f"ladder{n}" for n in ladders] + [f"grid{n}" for n in grids]
    if args.only:
        cases = args.only.split(",")
        ladders = [int(c[6:]) for c in cases if c.startswith("ladder")]
        grids = [int(c[4:]) for c in cases if c.startswith("grid")]
    print(f"python {sys.version.split()[0]}, cpus {os.cpu_count()}, load average "
          f"{os.getloadavg()[0]:.1f} (wall-clock timings; a loaded machine inflates them)")
    print(f"each case: the fastest of {max(1, args.repeat)} fresh processes (whole "
          "derive_text: parse, solve, forms, steps and every check; verification time and "
          "share from that same run; cpu = process time of that run; gc = the garbage "
          "collector's pauses in that run, wall-clock)")
    hdr = (f"{'case':9} {'est.terms':>11} {'total':>10} {'verify':>10} {'share':>6} "
           f"{'cpu':>8} {'v.cpu':>8} {'share':>6} {'gc':>6} {'forms':28} status")
    print(hdr)
    print("-" * len(hdr))
    rows = {}
    for case in cases:
        runs = [spawn("--worker", case, args.timeout) for _ in range(max(1, args.repeat))]
        ok_runs = [x for x in runs if x["status"] == "ok"]
        r = min(ok_runs, key=lambda x: x["total"]) if ok_runs else runs[0]
        rows[case] = r
        est = est_terms(case)
        if r["status"] == "ok":
            share = r["verify"] / r["total"] if r["total"] else 0.0
            fm = ",".join(f"{k}:{v}" for k, v in r["forms"].items())
            print(f"{case:9} {est:>11.4g} {fmt(r['total']):>10} {fmt(r['verify']):>10} "
                  f"{share * 100:>5.0f}% {fmt(r['cpu']):>8} {fmt(r['verify_cpu']):>8} "
                  f"{r['verify_cpu'] / r['cpu'] * 100 if r['cpu'] else 0:>5.0f}% "
                  f"{fmt(r['gc']):>6} {fm[:28]:28} "
                  f"ok{'' if r['verified'] else ' UNVERIFIED'}", flush=True)
        else:
            print(f"{case:9} {est:>11.4g} {'-':>10} {'-':>10} {'-':>6} {'-':>8} {'-':>8} {'-':>6} "
                  f"{'-':>6} "
                  f"{'':28} {r['status']} "
                  f"{r.get('error', '')}", flush=True)
    # ---- naive route, ladder 8, same run
    nruns = [spawn("--naive-worker", "ladder8", args.naive_timeout)
             for _ in range(max(1, args.repeat))]
    nok = [x for x in nruns if x["status"] == "ok"]
    naive = min(nok, key=lambda x: x["t_total"]) if nok else nruns[0]
    print()
    ok = [c for c, r in rows.items() if r["status"] == "ok"]
    failed = [c for c, r in rows.items() if r["status"] != "ok"]
    unverified = [c for c in ok if not rows[c]["verified"]]
    print(f"every step verified on every case: {'met' if not unverified and not failed else 'NOT met'}"
          + (f" (unverified: {', '.join(unverified)})" if unverified else ""))
    for clock, tot, ver, ntot in (("wall-clock", "total", "verify", "t_total"),
                                  ("process cpu", "cpu", "verify_cpu", "cpu")):
        print(f"-- targets in {clock} time of the same runs:")
        targets(rows, ok, failed, ladders, grids, naive, tot, ver, ntot, args.naive_timeout)
    if args.json:
        with open(args.json, "w") as f:
            json.dump({"cases": rows, "naive_ladder8": naive}, f, indent=1)


if __name__ == "__main__":
    main()
