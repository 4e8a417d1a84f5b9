"""Cost of the random-point equality check (derive.derivation.steps.compare) against a naive baseline
measured in the same run: the former check, sympy ``xreplace`` at the same random rational
points followed by ``simplify`` of the difference. Also prints the time of the exact solve
whose result is being checked (the whole ``derive_text``, steps and their checks included).

The expressions are the Thevenin voltage of resistor ladders of n sections, all symbolic,
as the solver returns it, compared with the same quantity written as a sequence of named
intermediates (the continued-fraction form of the ladder: each section's impedance from the
next), so the check takes the random-point branch.

    python benchmarks/bench_verify.py [--sizes 4,8,12]
"""
from __future__ import annotations

import argparse
import random
import sys
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))

import sympy  # noqa: E402

import derive  # noqa: E402
from derive.derivation.steps import compare  # noqa: E402


def ladder(n: int) -> str:
    lines = ["voltage source V between n0 and gnd"]
    for i in range(1, n + 1):
        lines.append(f"resistor Rs{i} between n{i - 1} and n{i}")
        lines.append(f"resistor Rp{i} between n{i} and gnd")
    lines += [f"port out between n{n} and gnd", "find vth at out"]
    return "\n".join(lines) + "\n"


def sequence_form(n: int):
    """vth of the ladder by hand: Z_i seen to the right of node i-1, divider per section."""
    V = sympy.Symbol("V")
    defs = {}
    z_next = None
    for i in range(n, 0, -1):
        rs, rp = sympy.Symbol(f"Rs{i}"), sympy.Symbol(f"Rp{i}")
        zp = rp if z_next is None else rp * z_next / (rp + z_next)
        z = sympy.Symbol(f"Z{i}")
        defs[z] = rs + zp
        defs[sympy.Symbol(f"P{i}")] = zp       # shunt seen at node i
        z_next = z
    # voltage at node i = voltage at node i-1 * P_i / Z_i
    g = V
    for i in range(1, n + 1):
        g = g * sympy.Symbol(f"P{i}") / sympy.Symbol(f"Z{i}")
    return g, defs


def naive(a, b, defs, points=3, seed=20261202):
    syms = set(a.free_symbols) | set(b.free_symbols)
    for v in defs.values():
        syms |= v.free_symbols
    syms -= set(defs)
    rnd = random.Random(seed)
    for _ in range(points):
        env = {x: sympy.Rational(rnd.randint(1, 10**6), rnd.randint(1, 10**3)) for x in syms}
        for _ in range(len(defs) + 1):
            for k, v in defs.items():
                env[k] = v.xreplace(env)
        if sympy.simplify(a.xreplace(env) - b.xreplace(env)) != 0:
            return False
    return True


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--sizes", default="4,8,12")
    args = ap.parse_args()
    print(f"{'n':>3} {'derive s':>9} {'flint s':>9} {'naive s':>9} {'naive/flint':>12} "
          f"{'derive/flint':>12}")
    for n in (int(x) for x in args.sizes.split(",")):
        t0 = time.perf_counter()
        q = derive.derive_text(ladder(n)).results[0].quantities["vth"]
        t_solve = time.perf_counter() - t0
        ref = q.expr if q.expr is not None else q.in_sequence
        g, defs = sequence_form(n)
        clash = {str(k) for k, _ in q.sequence} & {str(k) for k in defs}
        assert not clash, clash
        defs.update(dict(q.sequence))      # where vth exists only as a sequence
        t0 = time.perf_counter()
        m, ok, used = compare(g, ref, defs)
        t_flint = time.perf_counter() - t0
        t0 = time.perf_counter()
        ok2 = naive(g, ref, defs)
        t_naive = time.perf_counter() - t0
        assert ok and ok2 and m == "points", (m, ok, ok2)
        print(f"{n:>3} {t_solve:9.3f} {t_flint:9.4f} {t_naive:9.4f} {t_naive / t_flint:12.1f} "
              f"{t_solve / t_flint:12.1f}")


if __name__ == "__main__":
    main()
