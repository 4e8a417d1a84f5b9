#!/usr/bin/env python
"""Time and peak memory of whole `derive record` runs against size, family by family.

    python benchmarks/bench_families.py [--quick] [--repeats N] [--formats json,md,pdf]
                                        [--naive-timeout S] [--no-naive] [--json FILE]

Families (every R and C symbolic, no values):

* ``ladder N``  N sections (series ``Rs{k}``, shunt ``Rp{k}``), ``find thevenin at out``
  (the sheets of ``bench_solver.sheet_text``); N = 2, 3, 4, 5, 6, 8, 10, 12, 16, 20, 24,
  28, 32 (``--quick``: 2, 5, 10, 16, 32).
* ``grid N``    an N x N grid of nodes, a resistor on every edge, ``find resistance at out``
  across the diagonal (``bench_solver.sheet_text``); N = 3..8 (``--quick``: 3, 6, 8).
* ``sk N``      N unity-gain Sallen-Key low-pass stages in cascade (op-amp followers), each
  ``R{k}a``, ``R{k}b`` in series, ``C{k}a`` from the middle node to the stage output,
  ``C{k}b`` from the op-amp input to ground; ``find gain from Vin to out``; N = 1..8
  (``--quick``: 1, 3, 5, 8).
* ``int N``     N inverting integrators in cascade (``R{k}`` into the inverting input,
  ``C{k}`` feedback, ideal op-amp); ``find gain from Vin to out``; N = 1..8 (``--quick``:
  1, 4, 8).

Each (case, format) is ``derive record SHEET --format F -o FILE --profile`` in a fresh
process (``python -m derive``), best of ``--repeats`` runs by wall-clock time (a loaded
machine inflates single runs); the table gives wall-clock and CPU seconds of that run and
the child's peak resident memory (``ru_maxrss`` from ``os.wait4``: the process and the
children it waited for, TeX included). Where the time went comes from the product's own
phase clock (``--profile``: startup, parse, solve, forms, verification, frequency, export;
:mod:`derive.clock`), each phase's share of the clocked total printed per case.

The naive route, in the same run, in its own subprocess with ``--naive-timeout`` (default
30 s; ``--quick`` 10 s): the KCL (nodal) equations written in sympy (capacitors as ``s C``,
an ideal op-amp as ``v+ = v-`` with the KCL of its output node dropped), ``sympy.solve``,
then ``sympy.cancel`` of the output. Its solve-and-cancel time (imports excluded) is divided
by derive's whole-process JSON time (startup and export included), so the printed ratio
understates derive's lead. Once a family's naive run times out, its larger sizes are not
tried.

Targets, judged on this run's numbers (JSON format unless said): time monotone in size in
each family and format (a step down counts only if larger than both 10 % and 30 ms:
noise margin), judged by wall-clock and again by CPU time (less sensitive to a loaded
machine); ladder 10 < 1.5 s; five Sallen-Key stages < 3 s, eight < 8 s; eight
integrators < 2 s; grid 8x8 < 4 s; peak memory < 200 MB for every case and format.
"""
from __future__ import annotations

import argparse
import json
import os
import re
import subprocess
import sys
import tempfile
import threading
import time

HERE = os.path.dirname(os.path.abspath(__file__))
ROOT = os.path.dirname(HERE)
sys.path.insert(0, ROOT)
sys.path.insert(0, HERE)

PHASES = ("startup", "parse", "solve", "forms", "verification", "frequency", "export")
NOISE_FRAC, NOISE_ABS = 0.10, 0.030


# ----------------------------------------------------------------------------- sheets
def sallen_key(n: int) -> str:
    lines = [f'title "{n} Sallen-Key stages (benchmark)"',
             "voltage source Vin between n0 and gnd"]
    for k in range(1, n + 1):
        lines += [f"resistor R{k}a between n{k-1} and a{k}",
                  f"resistor R{k}b between a{k} and b{k}",
                  f"capacitor C{k}a between a{k} and n{k}",
                  f"capacitor C{k}b between b{k} and gnd",
                  f"opamp U{k} inputs b{k}, n{k} output n{k}"]
    lines += [f"port out between n{n} and gnd", "find gain from Vin to out"]
    return "\n".join(lines) + "\n"


def integrators(n: int) -> str:
    lines = [f'title "{n} integrators (benchmark)"',
             "voltage source Vin between n0 and gnd"]
    for k in range(1, n + 1):
        lines += [f"resistor R{k} between n{k-1} and m{k}",
                  f"capacitor C{k} between m{k} and n{k}",
                  f"opamp U{k} inputs gnd, m{k} output n{k}"]
    lines += [f"port out between n{n} and gnd", "find gain from Vin to out"]
    return "\n".join(lines) + "\n"


def netlist(fam: str, n: int) -> dict:
    """Elements for the naive route: resistors/capacitors (name, a, b), op-amps
    (plus, minus, out), the source node, ground and output node."""
    if fam in ("ladder", "grid"):
        from bench_solver import circuit
        c = circuit(f"{fam}{n}")
        kind, sname, snode = c["source"]
        return dict(parts=[("R", *r) for r in c["resistors"]], opamps=[], source=(kind, sname,
                    snode), gnd=c["gnd"], out=c["out"])
    parts, opamps = [], []
    if fam == "sk":
        for k in range(1, n + 1):
            parts += [("R", f"R{k}a", f"n{k-1}", f"a{k}"), ("R", f"R{k}b", f"a{k}", f"b{k}"),
                      ("C", f"C{k}a", f"a{k}", f"n{k}"), ("C", f"C{k}b", f"b{k}", "gnd")]
            opamps.append((f"b{k}", f"n{k}", f"n{k}"))
    else:
        for k in range(1, n + 1):
            parts += [("R", f"R{k}", f"n{k-1}", f"m{k}"), ("C", f"C{k}", f"m{k}", f"n{k}")]
            opamps.append(("gnd", f"m{k}", f"n{k}"))
    return dict(parts=parts, opamps=opamps, source=("V", "Vin", "n0"), gnd="gnd",
                out=f"n{n}")


def sheet(fam: str, n: int) -> str:
    if fam in ("ladder", "grid"):
        from bench_solver import sheet_text
        return sheet_text(f"{fam}{n}")
    return sallen_key(n) if fam == "sk" else integrators(n)


def sizes(quick: bool) -> dict:
    if quick:
        return {"ladder": [2, 5, 10, 16, 32], "grid": [3, 6, 8], "sk": [1, 3, 5, 8],
                "int": [1, 4, 8]}
    return {"ladder": [2, 3, 4, 5, 6, 8, 10, 12, 16, 20, 24, 28, 32],
            "grid": [3, 4, 5, 6, 7, 8], "sk": list(range(1, 9)), "int": list(range(1, 9))}


# ----------------------------------------------------------------------------- naive route
def naive(fam: str, n: int) -> dict:
    import sympy
    c = netlist(fam, n)
    s = sympy.Symbol("s")
    kind, sname, snode = c["source"]
    src = sympy.Symbol(sname)
    nodes = []
    for _k, _name, a, b in c["parts"]:
        for x in (a, b):
            if x not in nodes:
                nodes.append(x)
    for trip in c["opamps"]:
        for x in trip:
            if x not in nodes:
                nodes.append(x)
    v = {x: (sympy.Integer(0) if x == c["gnd"] else
             src if (kind == "V" and x == snode) else sympy.Symbol("v_" + x)) for x in nodes}
    kcl = {x: sympy.Integer(0) for x in nodes}
    for k, name, a, b in c["parts"]:
        y = 1 / sympy.Symbol(name) if k == "R" else s * sympy.Symbol(name)
        kcl[a] += (v[a] - v[b]) * y
        kcl[b] += (v[b] - v[a]) * y
    if kind == "I":
        kcl[snode] -= src
    outs = {o for _p, _m, o in c["opamps"]}
    eqs = [sympy.Eq(kcl[x], 0) for x in nodes
           if isinstance(v[x], sympy.Symbol) and v[x] != src and x not in outs]
    eqs += [sympy.Eq(v[p], v[m]) for p, m, _o in c["opamps"]]
    unknowns = [v[x] for x in nodes if isinstance(v[x], sympy.Symbol) and v[x] != src]
    t, cpu = time.perf_counter(), time.process_time()
    sol = sympy.solve(eqs, unknowns, dict=True)[0]
    out = sympy.cancel(sol[v[c["out"]]])
    return dict(t=time.perf_counter() - t, cpu=time.process_time() - cpu,
                ops=int(sympy.count_ops(out)))


def spawn_naive(fam, n, timeout):
    from bench_solver import worker_result
    return worker_result([sys.executable, os.path.abspath(__file__), "--naive-worker", fam,
                          str(n)], timeout, stderr_chars=400)


# ----------------------------------------------------------------------------- derive runs
PHASE_RE = re.compile(r"(\w+) ([0-9.]+)s/([0-9.]+)cpu")


def run_once(path: str, fmt: str, out: str, timeout: float) -> dict:
    """One whole `derive record` process: wall, CPU and peak RSS of the child, phases."""
    cmd = [sys.executable, "-m", "derive", "record", path, "--format", fmt, "-o", out,
           "--profile"]
    with tempfile.TemporaryFile() as err:
        t = time.perf_counter()
        p = subprocess.Popen(cmd, cwd=ROOT, stdout=subprocess.DEVNULL, stderr=err,
                             env=dict(os.environ, PYTHONPATH=ROOT))
        timer = threading.Timer(timeout, p.kill)
        timer.start()
        _pid, status, ru = os.wait4(p.pid, 0)
        wall = time.perf_counter() - t
        timer.cancel()
        p.returncode = os.waitstatus_to_exitcode(status)
        err.seek(0)
        text = err.read().decode("utf-8", "replace")
    r = dict(wall=wall, cpu=ru.ru_utime + ru.ru_stime, rss_mb=ru.ru_maxrss / 1024.0,
             code=p.returncode)
    if p.returncode != 0:
        r["status"] = f"exit {p.returncode}" if wall < timeout else f"timeout>{timeout:g}s"
        r["stderr"] = text[-400:]
        return r
    line = next((x for x in text.splitlines() if x.startswith("derive: phases")), "")
    r["phases"] = {m.group(1): (float(m.group(2)), float(m.group(3)))
                   for m in PHASE_RE.finditer(line.split(":", 2)[-1])}
    r["status"] = "ok"
    return r


def run_case(fam, n, fmt, repeats, timeout, tmp) -> dict:
    path = os.path.join(tmp, f"{fam}{n}.eqv")
    with open(path, "w") as f:
        f.write(sheet(fam, n))
    out = os.path.join(tmp, f"{fam}{n}.{fmt}")
    best, peak = None, 0.0
    for k in range(repeats):
        r = run_once(path, fmt, out, timeout)
        peak = max(peak, r.get("rss_mb", 0.0))
        if r["status"] != "ok":
            return r
        if best is None or r["wall"] < best["wall"]:
            best = r
        if r["wall"] > 20:                   # slow enough: one run says it
            break
    best["rss_mb_max"] = peak
    best["out_bytes"] = os.path.getsize(out) if os.path.exists(out) else None
    return best


def shares(ph: dict) -> str:
    tot = sum(w for w, _c in ph.values()) or 1.0
    return " ".join(f"{p[:5]} {100 * ph.get(p, (0, 0))[0] / tot:3.0f}%" for p in PHASES)


# ----------------------------------------------------------------------------- main
def main(args):
    fams = sizes(args.quick)
    formats = args.formats.split(",") if args.formats else (
        ["json"] if args.quick else ["json", "md", "pdf"])
    naive_timeout = args.naive_timeout or (10.0 if args.quick else 30.0)
    load = os.getloadavg()
    t_start = time.perf_counter()
    print(f"python {sys.version.split()[0]}, cpus {os.cpu_count()}, load average "
          f"{load[0]:.2f}/{load[1]:.2f}/{load[2]:.2f} at start; best of {args.repeats} "
          f"fresh processes per case; naive timeout {naive_timeout:g} s")
    results = {}
    with tempfile.TemporaryDirectory() as tmp:
        for fam, ns in fams.items():
            print(f"\n== {fam} ==")
            hdr = (f"{'case':9} {'fmt':4} {'wall s':>7} {'cpu s':>6} {'peakMB':>7} "
                   f"{'naive s':>10} {'naive/derive':>12}  phase shares of the clocked time")
            print(hdr)
            print("-" * (len(hdr) + 40))
            gave_up = False
            for n in ns:
                nv = None
                if not args.no_naive:
                    nv = {"status": "skipped (smaller timed out)"} if gave_up else \
                        spawn_naive(fam, n, naive_timeout)
                    gave_up = gave_up or nv["status"].startswith("timeout")
                for fmt in formats:
                    r = run_case(fam, n, fmt, args.repeats, args.timeout, tmp)
                    results[(fam, n, fmt)] = r
                    if nv is not None and fmt == formats[0]:
                        r["naive"] = nv
                    nvs = ""
                    ratio = ""
                    if nv is not None and fmt == formats[0]:
                        nvs = f"{nv['t']:.3f}" if nv["status"] == "ok" else nv["status"]
                        if r["status"] == "ok":
                            if nv["status"] == "ok":
                                ratio = f"{nv['t'] / r['wall']:.2f}x"
                            elif nv["status"].startswith("timeout"):
                                ratio = f">{naive_timeout / r['wall']:.1f}x"
                    if r["status"] != "ok":
                        print(f"{fam}{n:<6} {fmt:4} {r['status']}  {r.get('stderr', '')[-200:]!r}")
                        continue
                    print(f"{fam + str(n):9} {fmt:4} {r['wall']:7.3f} {r['cpu']:6.2f} "
                          f"{r['rss_mb_max']:7.1f} {nvs:>10} {ratio:>12}  "
                          f"{shares(r['phases'])}", flush=True)
    load = os.getloadavg()
    print(f"\nbenchmark took {time.perf_counter() - t_start:.0f} s; load average "
          f"{load[0]:.2f}/{load[1]:.2f}/{load[2]:.2f} at the end")
    targets(results, fams, formats)
    if args.json:
        with open(args.json, "w") as f:
            json.dump([dict(family=k[0], n=k[1], format=k[2], **v)
                       for k, v in results.items()], f, indent=1)


def targets(results, fams, formats):
    print("\n== phases (seconds, best run, wall/cpu) of the target cases, JSON ==")
    for fam, n in (("ladder", 10), ("sk", 5), ("sk", 8), ("int", 8), ("grid", 8)):
        r = results.get((fam, n, "json"))
        if r and r["status"] == "ok":
            ph = r["phases"]
            tot = sum(w for w, _c in ph.values())
            print(f"{fam}{n}: " + ", ".join(f"{p} {ph[p][0]:.3f}/{ph[p][1]:.3f}"
                                             for p in PHASES if p in ph)
                  + f"; clocked {tot:.3f} s of {r['wall']:.3f} s wall")
    print("\n== targets (this run's numbers) ==")
    for clock in ("wall", "cpu"):
        bad = []
        for fam, ns in fams.items():
            for fmt in formats:
                ts = [(n, results.get((fam, n, fmt))) for n in ns]
                ts = [(n, r[clock]) for n, r in ts if r and r["status"] == "ok"]
                for (n0, t0), (n1, t1) in zip(ts, ts[1:]):
                    if t1 < t0 - max(NOISE_FRAC * t0, NOISE_ABS):
                        bad.append(f"{fam} {fmt}: {n0} -> {n1}: {t0:.3f} s -> {t1:.3f} s")
        print(f"time monotone in size in every family and format, by {clock} time (noise "
              f"margin: a step down must exceed {100 * NOISE_FRAC:.0f} % and "
              f"{1000 * NOISE_ABS:.0f} ms): " + ("met" if not bad else "NOT met"))
        for b in bad:
            print("   non-monotone step: " + b)

    def wall(fam, n, fmt="json"):
        r = results.get((fam, n, fmt))
        return r["wall"] if r and r["status"] == "ok" else None

    for fam, n, limit, what in (("ladder", 10, 1.5, "ladder 10"),
                                ("sk", 5, 3.0, "five Sallen-Key stages"),
                                ("sk", 8, 8.0, "eight Sallen-Key stages"),
                                ("int", 8, 2.0, "eight integrators"),
                                ("grid", 8, 4.0, "grid 8x8")):
        t = wall(fam, n)
        if t is None:
            r = results.get((fam, n, "json"))
            print(f"{what} < {limit:g} s: not measured"
                  + (f" ({r['status']})" if r else " (size not in this run)"))
            continue
        others = ", ".join(f"{fmt} {wall(fam, n, fmt):.2f} s" for fmt in formats
                           if fmt != "json" and wall(fam, n, fmt) is not None)
        cpu = results[(fam, n, "json")]["cpu"]
        print(f"{what} < {limit:g} s (json): {t:.2f} s wall: {'met' if t < limit else 'NOT met'}"
              f" (cpu {cpu:.2f} s: {'met' if cpu < limit else 'NOT met'})"
              + (f"  [{others}]" if others else ""))
    mems = [(k, r["rss_mb_max"]) for k, r in results.items() if r["status"] == "ok"]
    worst = max(mems, key=lambda x: x[1]) if mems else None
    over = [f"{k[0]}{k[1]} {k[2]} {m:.0f} MB" for k, m in mems if m >= 200]
    failed = [f"{k[0]}{k[1]} {k[2]}: {r['status']}" for k, r in results.items()
              if r["status"] != "ok"]
    if worst:
        print(f"peak memory < 200 MB for every case: {'met' if not over and not failed else 'NOT met'}"
              f" (largest {worst[1]:.0f} MB, {worst[0][0]}{worst[0][1]} {worst[0][2]})")
    for o in over + failed:
        print("   " + o)
    print("every phase's share printed per case: yes (columns above; shares of the clocked "
          "time, the rest of the wall time is interpreter start and exit)")


if __name__ == "__main__":
    if len(sys.argv) >= 2 and sys.argv[1] == "--naive-worker":
        import sympy  # noqa: F401  (import cost outside the timing)
        print("RESULT " + json.dumps(naive(sys.argv[2], int(sys.argv[3]))))
        sys.exit(0)
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--quick", action="store_true", help="fewer sizes, JSON only")
    ap.add_argument("--repeats", type=int, default=2)
    ap.add_argument("--formats", default=None, help="comma separated: json,md,pdf")
    ap.add_argument("--naive-timeout", type=float, default=None)
    ap.add_argument("--no-naive", action="store_true")
    ap.add_argument("--timeout", type=float, default=300.0,
                    help="per derive run (killed after it)")
    ap.add_argument("--json", default=None, help="write the raw results here")
    main(ap.parse_args())
