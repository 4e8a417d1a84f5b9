#!/usr/bin/env python
"""Benchmark of the exact determinant kernel against the routes a user would take.

    python benchmarks/bench_solver.py [--quick] [--variants] [--no-cli]

Circuits (every resistor symbolic, component symbols are conductances G = 1/R in the kernel):

* ``ladderN`` (N = 2..16): ``V1`` between n0 and gnd, per section a series resistor
  ``Rs{k}`` n{k-1}-n{k} then a shunt ``Rp{k}`` n{k}-gnd; the port is n{N} against gnd.
* ``gridN`` (N = 2..5): an N x N grid of *nodes* (resistor on every edge); the corner
  (0,0) is gnd, the port is the opposite corner; a symbolic current ``I1`` is injected there.
* ``cube``: the 12-resistor cube, port across a body diagonal (gnd at one end, ``I1`` in).

Per case and method the timed work is: the determinant of the nodal (conductance) matrix
and the numerator of the port voltage (Cramer: the matrix with the port column replaced by
the source vector). Methods:

(a) ``naive``  -- KCL equations in R handed to ``sympy.solve``, then ``sympy.cancel`` of the
    port voltage (what a user would write). Guarded by a timeout (default 20 s).
(b) ``dense``  -- a plain one-pass dense Bareiss on fmpz_mpoly (below, the naive baseline).
(c) ``kernel`` -- :func:`derive.solver.determinant.det`.

Every (case, method) runs in its own subprocess (``--worker``), so a hang is killed by the
timeout and peak memory (``ru_maxrss`` of that process, minus the RSS after imports) is
per run. Cases whose determinant is estimated (:func:`derive.solver.determinant.estimate_det_terms`)
above ``TERM_LIMIT`` terms are not expanded (grid5: ~5.6e8 terms, several tens of GB).

Targets: naive/kernel >= 1000x at ladder6; kernel expands ladder16's determinant in < 1 s.
"""
from __future__ import annotations

import argparse
import json
import os
import resource
import shutil
import subprocess
import sys
import tempfile
import threading
import time

HERE = os.path.dirname(os.path.abspath(__file__))
ROOT = os.path.dirname(HERE)
sys.path.insert(0, ROOT)

TERM_LIMIT = 2e7


# ----------------------------------------------------------------------------- circuits
def circuit(case: str):
    """Return dict(resistors=[(name, a, b)], source=(kind, name, node), gnd, out)."""
    if case.startswith("ladder"):
        n = int(case[6:])
        res = []
        for k in range(1, n + 1):
            res.append((f"Rs{k}", f"n{k-1}", f"n{k}"))
            res.append((f"Rp{k}", f"n{k}", "gnd"))
        return dict(resistors=res, source=("V", "V1", "n0"), gnd="gnd", out=f"n{n}")
    if case.startswith("grid"):
        n = int(case[4:])
        name = lambda r, c: "gnd" if (r, c) == (0, 0) else f"n{r}_{c}"
        res = []
        for r in range(n):
            for c in range(n):
                if c + 1 < n:
                    res.append((f"Rh{r}_{c}", name(r, c), name(r, c + 1)))
                if r + 1 < n:
                    res.append((f"Rv{r}_{c}", name(r, c), name(r + 1, c)))
        out = name(n - 1, n - 1)
        return dict(resistors=res, source=("I", "I1", out), gnd="gnd", out=out)
    if case == "cube":
        verts = [(x, y, z) for x in (0, 1) for y in (0, 1) for z in (0, 1)]
        name = lambda v: "gnd" if v == (0, 0, 0) else "c%d%d%d" % v
        res = []
        for v in verts:
            for d in range(3):
                if v[d] == 0:
                    w = list(v); w[d] = 1; w = tuple(w)
                    res.append((f"R{name(v)}_{name(w)}".replace("gnd", "000"), name(v), name(w)))
        return dict(resistors=res, source=("I", "I1", "c111"), gnd="gnd", out="c111")
    raise ValueError(case)


def nodal(case: str):
    """Nodal conductance matrix, source vector and port index as derive.solver.determinant objects."""
    from derive.solver import determinant as K

    c = circuit(case)
    kind, sname, snode = c["source"]
    fixed = {c["gnd"]} | ({snode} if kind == "V" else set())
    nodes = []
    for _, a, b in c["resistors"]:
        for x in (a, b):
            if x not in fixed and x not in nodes:
                nodes.append(x)
    idx = {x: i for i, x in enumerate(nodes)}
    names = ["G" + r[0][1:] for r in c["resistors"]] + [sname]
    ctx = K.make_context(names)
    gens = ctx.gens()
    src = gens[-1]
    m = K.SparseMatrix(ctx, len(nodes))
    rhs = {}
    for (_, a, b), g in zip(c["resistors"], gens):
        ia, ib = idx.get(a), idx.get(b)
        for i, j, other in ((ia, ib, b), (ib, ia, a)):
            if i is None:
                continue
            m.add(i, i, g)
            if j is not None:
                m.add(i, j, -g)
            elif kind == "V" and other == snode:
                rhs[i] = rhs.get(i, 0) + g * src
    if kind == "I":
        rhs[idx[snode]] = src
    return m, rhs, idx[c["out"]]


# ----------------------------------------------------------------------------- methods
def dense_bareiss(m):
    """Plain one-pass dense Bareiss (row swaps on zero pivots) -- the baseline."""
    n = m.n
    ctx = m.ctx
    if n == 0:
        return ctx.constant(1)
    a = m.to_lists()
    sign, prev = 1, ctx.constant(1)
    for k in range(n - 1):
        if a[k][k].is_zero():
            for i in range(k + 1, n):
                if not a[i][k].is_zero():
                    a[k], a[i] = a[i], a[k]
                    sign = -sign
                    break
            else:
                return ctx.constant(0)
        akk = a[k][k]
        for i in range(k + 1, n):
            aik = a[i][k]
            for j in range(k + 1, n):
                a[i][j] = (akk * a[i][j] - aik * a[k][j]) / prev
        prev = akk
    return a[n - 1][n - 1] if sign > 0 else -a[n - 1][n - 1]


def run_kernel_like(case, detfn):
    """Best of up to 5 runs (repeats only while cheap: the machine may be shared)."""
    m, rhs, out = nodal(case)
    mn = m.with_column(out, rhs)
    best = None
    spent = 0.0
    for _ in range(5):
        t, c = time.perf_counter(), time.process_time()
        d = detfn(m)
        t_det, cpu_det = time.perf_counter() - t, time.process_time() - c
        t = time.perf_counter()
        num = detfn(mn)
        t_num = time.perf_counter() - t
        r = dict(t_det=t_det, cpu_det=cpu_det, t_num=t_num, terms_det=len(d),
                 terms_num=len(num))
        if best is None or t_det + t_num < best["t_det"] + best["t_num"]:
            best = r
        spent += t_det + t_num
        if spent > 0.2:
            break
    return best


def run_naive(case):
    import sympy

    c = circuit(case)
    kind, sname, snode = c["source"]
    src = sympy.Symbol(sname)
    v = {}
    for _, a, b in c["resistors"]:
        for x in (a, b):
            if x not in v:
                v[x] = sympy.Integer(0) if x == c["gnd"] else (
                    src if (kind == "V" and x == snode) else sympy.Symbol("v_" + x))
    unknowns = [s for s in v.values() if isinstance(s, sympy.Symbol) and s != src]
    kcl = {x: sympy.Integer(0) for x in v}
    for name, a, b in c["resistors"]:
        R = sympy.Symbol(name)
        kcl[a] += (v[a] - v[b]) / R
        kcl[b] += (v[b] - v[a]) / R
    if kind == "I":
        kcl[snode] -= src
    eqs = [sympy.Eq(kcl[x], 0) for x in v if v[x] in unknowns]
    t = time.perf_counter()
    sol = sympy.solve(eqs, unknowns, dict=True)[0]
    vout = sympy.cancel(sol[v[c["out"]]])
    t_tot = time.perf_counter() - t
    num, den = sympy.fraction(vout)
    return dict(t_total=t_tot, terms_det=len(sympy.Add.make_args(sympy.expand(den))),
                terms_num=len(sympy.Add.make_args(sympy.expand(num))))


def worker(method, case):
    import flint  # noqa: F401  (import cost outside the measured RSS)
    import sympy  # noqa: F401
    from derive.solver import determinant as K

    base = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
    if method == "naive":
        r = run_naive(case)
    elif method == "dense":
        r = run_kernel_like(case, dense_bareiss)
    elif method == "kernel":
        r = run_kernel_like(case, K.det)
    elif method == "eager":          # variant: sparse Bareiss scaling every row each step
        r = run_kernel_like(case, lambda m: K._det_sparse(m, defer=False))
    elif method.startswith("kernel-"):  # variant: other monomial ordering
        K._ORDERING = method.split("-", 1)[1]
        r = run_kernel_like(case, K.det)
    else:
        raise ValueError(method)
    peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
    r["peak_mb"] = (peak - base) / 1024.0
    print("RESULT " + json.dumps(r))


def worker_result(cmd, timeout, cwd=None, stderr_chars=500) -> dict:
    """Run a benchmark worker (``cmd``) and return the JSON of its ``RESULT`` line with
    ``status`` "ok" (and ``process``: the wall-clock seconds of the whole subprocess), or a
    status saying it timed out or failed (with the end of its standard error)."""
    t = time.perf_counter()
    try:
        p = subprocess.run(cmd, capture_output=True, text=True, timeout=timeout, cwd=cwd)
    except subprocess.TimeoutExpired:
        return {"status": f"timeout>{timeout:g}s"}
    for line in p.stdout.splitlines():
        if line.startswith("RESULT "):
            r = json.loads(line[7:])
            r["status"] = "ok"
            r["process"] = time.perf_counter() - t
            return r
    return {"status": "error", "stderr": p.stderr[-stderr_chars:]}


def spawn(method, case, timeout):
    return worker_result([sys.executable, os.path.abspath(__file__), "--worker", method, case],
                         timeout)


def fmt_t(r, key="t"):
    if r.get("status") != "ok":
        return r.get("status", "-")
    t = r["t_total"] if "t_total" in r else r["t_det"] + r["t_num"]
    return f"{t*1e3:.2f}ms" if t < 1 else f"{t:.2f}s"


def total(r):
    if r.get("status") != "ok":
        return None
    return r["t_total"] if "t_total" in r else r["t_det"] + r["t_num"]


def main_bench(args):
    from derive.solver import determinant as K

    ladders = list(range(2, 17)) if not args.quick else [2, 4, 6, 8, 12, 16]
    grids = [2, 3, 4, 5]
    cases = [f"ladder{n}" for n in ladders] + [f"grid{n}" for n in grids] + ["cube"]
    methods = ["naive", "dense", "kernel"]
    timeouts = {"naive": args.naive_timeout, "dense": args.dense_timeout, "kernel": 120}
    if args.variants:
        methods += ["eager", "kernel-degrevlex", "kernel-deglex"]
        timeouts.update({"eager": args.dense_timeout, "kernel-degrevlex": 120,
                         "kernel-deglex": 120})
    gave_up = {m: set() for m in methods}   # family -> gave up after a timeout
    print(f"python {sys.version.split()[0]}, cpus {os.cpu_count()}, load average "
          f"{os.getloadavg()[0]:.1f} (timings are wall clock; a loaded machine inflates them), "
          f"term limit {TERM_LIMIT:g}")
    hdr = (f"{'case':9} {'n':>3} {'est.terms':>11} {'det terms':>10} {'num terms':>9} "
           + " ".join(f"{m:>14}" for m in methods)
           + f" {'naive/kern':>10} {'dense/kern':>10} {'kernel det':>10} {'peak MB k/d':>12}")
    print(hdr)
    print("-" * len(hdr))
    rows = []
    for case in cases:
        m, rhs, out = nodal(case)
        est = K.estimate_det_terms(m)
        fam = case.rstrip("0123456789")
        res = {}
        for meth in methods:
            if est > TERM_LIMIT:
                res[meth] = {"status": "skipped(est)"}
            elif fam in gave_up[meth]:
                res[meth] = {"status": "skipped"}
            else:
                res[meth] = spawn(meth, case, timeouts[meth])
                if res[meth]["status"].startswith("timeout"):
                    gave_up[meth].add(fam)
        k = res["kernel"]
        tk = total(k)
        ratio = lambda meth: (f"{total(res[meth]) / tk:.0f}x" if tk and total(res[meth])
                              else (f">{timeouts[meth] / tk:.0f}x"
                                    if tk and res[meth]["status"].startswith("timeout")
                                    else "-"))
        terms = k.get("terms_det", "-")
        nterms = k.get("terms_num", "-")
        kd = f"{k['t_det']*1e3:.2f}ms" if k.get("status") == "ok" else "-"
        mem = (f"{k.get('peak_mb', 0):.0f}/" +
               (f"{res['dense']['peak_mb']:.0f}" if res["dense"].get("status") == "ok" else "-"))
        print(f"{case:9} {m.n:>3} {est:>11.4g} {terms:>10} {nterms:>9} "
              + " ".join(f"{fmt_t(res[x]):>14}" for x in methods)
              + f" {ratio('naive'):>10} {ratio('dense'):>10} {kd:>10} {mem:>12}", flush=True)
        if k.get("status") == "ok" and terms != round(est):
            print(f"   note: estimate {est:g} != terms {terms}")
        rows.append(dict(case=case, n=m.n, est=est, results=res))
    # ---- targets
    by = {r["case"]: r["results"] for r in rows}
    print()
    if "ladder6" in by:
        tk, tn = total(by["ladder6"]["kernel"]), total(by["ladder6"]["naive"])
        if tk and tn:
            print(f"target naive/kernel >= 1000x at ladder6: {tn / tk:.0f}x "
                  f"({'MET' if tn / tk >= 1000 else 'NOT met'})")
        elif tk:
            print(f"target naive/kernel >= 1000x at ladder6: naive {by['ladder6']['naive']['status']}"
                  f", so >= {args.naive_timeout / tk:.0f}x")
    if "ladder16" in by and by["ladder16"]["kernel"].get("status") == "ok":
        t = by["ladder16"]["kernel"]["t_det"]
        cpu = by["ladder16"]["kernel"]["cpu_det"]
        print(f"target kernel det of ladder16 < 1 s: {t:.3f} s wall, {cpu:.3f} s cpu "
              f"({by['ladder16']['kernel']['terms_det']} terms) ({'MET' if t < 1 else 'NOT met'})")
    if args.json:
        with open(args.json, "w") as f:
            json.dump(rows, f, indent=1)


# ----------------------------------------------------------------------------- CLI timings
# Whole-process timings of the `derive` command line. Runs only if the CLI exists (an
# executable `derive` on PATH, or a runnable `python -m derive` package in this repo).
def sheet_text(case: str) -> str:
    """The case as a sheet in the language of /work/shared/SHEET.md."""
    c = circuit(case)
    lines = [f'title "{case} (benchmark)"']
    kind, sname, snode = c["source"]
    if kind == "V":
        lines.append(f"voltage source {sname} between {snode} and {c['gnd']}")
    for name, a, b in c["resistors"]:
        lines.append(f"resistor {name} between {a} and {b}")
    lines.append(f"port out between {c['out']} and {c['gnd']}")
    lines.append("find thevenin at out" if kind == "V" else "find resistance at out")
    return "\n".join(lines) + "\n"


def cli_command():
    exe = shutil.which("derive")
    if exe:
        return [exe]
    if os.path.exists(os.path.join(ROOT, "derive", "__main__.py")):
        return [sys.executable, "-m", "derive"]
    return None


def cli_timings(cases=("ladder16", "grid4", "grid5"), timeout=600):
    cmd = cli_command()
    print()
    print("== CLI whole-process timings (derive record FILE --format json) ==")
    if cmd is None:
        print("   skipped: no `derive` CLI yet (neither on PATH nor derive/__main__.py)")
        return
    with tempfile.TemporaryDirectory() as tmp:
        for case in cases:
            path = os.path.join(tmp, f"{case}.eqv")
            with open(path, "w") as f:
                f.write(sheet_text(case))
            t = time.perf_counter()
            p = subprocess.Popen(cmd + ["record", path, "--format", "json"], cwd=ROOT,
                                 stdout=subprocess.PIPE, stderr=subprocess.PIPE,
                                 env=dict(os.environ, PYTHONPATH=ROOT))
            timer = threading.Timer(timeout, p.kill)
            timer.start()
            out, err = p.communicate()
            timer.cancel()
            wall = time.perf_counter() - t
            peak = resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss / 1024.0
            status = "ok" if p.returncode == 0 else (
                f"timeout>{timeout}s" if p.returncode < 0 else f"exit {p.returncode}")
            size = len(out)
            print(f"   {case:9} {status:12} wall {wall:8.2f}s  output {size} bytes  "
                  f"max child RSS so far {peak:.0f} MB")
            if status != "ok":
                print("      " + err.decode(errors="replace").strip().splitlines()[-1:][0]
                      if err.strip() else "")


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="fewer ladder sizes, short timeouts")
    ap.add_argument("--variants", action="store_true",
                    help="also time kernel variants (eager sparse Bareiss, other orderings)")
    ap.add_argument("--no-cli", action="store_true", help="skip the CLI timings")
    ap.add_argument("--naive-timeout", type=float, default=None)
    ap.add_argument("--dense-timeout", type=float, default=None)
    ap.add_argument("--json", help="also write the raw results here")
    ap.add_argument("--worker", nargs=2, metavar=("METHOD", "CASE"), help=argparse.SUPPRESS)
    args = ap.parse_args()
    if args.worker:
        worker(*args.worker)
        return
    if args.naive_timeout is None:
        args.naive_timeout = 10.0 if args.quick else 20.0
    if args.dense_timeout is None:
        args.dense_timeout = 10.0 if args.quick else 30.0
    main_bench(args)
    if not args.no_cli:
        cli_timings()


if __name__ == "__main__":
    main()
