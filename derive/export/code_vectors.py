"""Exact test vectors for generated code (``derive code --with-tests``) and the small C and
Python programs that check the generated functions against them.

Inputs are exactly representable doubles (a rational rounded once to binary64 and then
kept exact), so the expected value, computed in exact rational arithmetic (or to 40 digits
where a square root makes it irrational), is the true value of the function at exactly
the inputs the compiled code receives. Values are printed with 17 significant digits.
An inverted formula is probed on its own branch: the measured quantity is computed from the
forward closed form at a point near nominal values.
"""
from __future__ import annotations

import json
import random

import sympy

from derive.export.code_forms import Lowering, collect, num17

TOLERANCE = 1e-12


def _double(v) -> sympy.Rational:
    """The binary64 value nearest ``v``, as an exact rational."""
    return sympy.Rational(float(v))


def evaluate(f, inputs: list):
    """The formula's exact value at ``inputs`` (in parameter order), or None where it is
    undefined or not real."""
    env = {x: v for (x, _u), v in zip(f.params, inputs)}
    try:
        for s, e in f.defs:
            env[s] = e.xreplace(env)
        v = f.final.xreplace(env)
    except ZeroDivisionError:
        return None
    if not v.is_number or v.has(sympy.zoo, sympy.nan, sympy.oo, -sympy.oo):
        return None
    if not v.is_Rational:
        n = sympy.N(v, 40)
        if not n.is_real:
            return None
    return v


def vectors(f, nominal: dict, count: int = 6, seed: int = 2024) -> list:
    """[(inputs, expected)] at nominal values (where every parameter has one) and at
    random points within ±30 % of nominal (or 1..1000 where a symbol has none)."""
    rnd = random.Random(seed)
    out = []
    measured = f.forward[2] if f.forward else None

    def near(x, spread):
        base = nominal.get(x, sympy.Rational(rnd.randint(1, 1000)))
        if not spread:
            return base
        return base * (1 + sympy.Rational(rnd.randint(-300, 300), 1000))

    for k in range(count + 1):
        spread = k > 0
        if not spread and any(x not in nominal for x, _u in f.params if x != measured):
            continue
        pt = {x: _double(near(x, spread)) for x, _u in f.params if x != measured}
        if measured is not None:
            fwd, solved, _m = f.forward
            env = dict(pt)
            env[solved] = near(solved, spread)
            q = fwd.xreplace(env) if fwd is not None else None
            if q is None or not q.is_Rational:
                continue
            pt[measured] = _double(q)
        inputs = [pt[x] for x, _u in f.params]
        want = evaluate(f, inputs)
        if want is not None:
            out.append((inputs, want))
    return out


def _all(record):
    formulas, _skipped = collect(record)
    nominal = record.circuit.nominal_values()
    return [(f, vectors(f, nominal)) for f in formulas]


def vectors_json(table, prefix=None) -> str:
    """The vectors as JSON, inputs named as the generated code (C: with ``prefix``) names
    its parameters."""
    return json.dumps({f.name: [{"inputs": {Lowering(f, prefix).rename[x].name: str(v)
                                            for (x, _u), v in zip(f.params, ins)},
                                 "expected": str(want) if want.is_Rational else num17(want),
                                 "expected_17": num17(want)} for ins, want in vs]
                       for f, vs in table}, indent=2) + "\n"


def c_tests(record, base: str, header_name: str, prefix: str) -> dict:
    table = _all(record)
    lines = ["/* Checks the generated functions against exact test vectors (derive code",
             "   --with-tests). Exit status 0 when every relative error is within "
             f"{TOLERANCE:g}. */",
             "#include <math.h>", "#include <stdio.h>", f'#include "{header_name}"', "",
             "static double worst = 0.0;", "static int failures = 0;", "static int count = 0;",
             ""]
    if any(vs for _f, vs in table):      # (an unused static function fails -Werror)
        lines += ["static void compare(double got, double want)", "{",
                  "    double err = want != 0.0 ? fabs(got - want) / fabs(want) : fabs(got);",
                  "    count++;",
                  f"    if (!(err <= {TOLERANCE!r})) failures++;",
                  "    if (!(err <= worst)) worst = err;", "}", ""]
    main = ["int main(void)", "{"] + (["    size_t i;"] if any(vs for _f, vs in table) else [])
    for f, vs in table:
        if not vs:
            continue
        n = len(f.params)
        rows = ",\n".join("    {" + ", ".join(num17(v) for v in ins + [want]) + "}"
                          for ins, want in vs)
        lines.append(f"static const double v_{f.name}[{len(vs)}][{n + 1}] = {{\n{rows}\n}};")
        call = ", ".join(f"v_{f.name}[i][{j}]" for j in range(n))
        main += [f"    for (i = 0; i < sizeof v_{f.name} / sizeof v_{f.name}[0]; i++)",
                 f"        compare({f.name}({call}), v_{f.name}[i][{n}]);"]
    main += ['    printf("%d vectors, max relative error %.3g, %d failures\\n", count, worst, '
             'failures);',
             '    if (count == 0) {',
             '        printf("no test vectors: nothing was checked\\n");',
             '        return 1;',
             '    }',
             f"    return failures == 0 && {prefix}_error == 0 ? 0 : 1;", "}"]
    return {base + "_test.c": "\n".join(lines + [""] + main) + "\n",
            base + "_vectors.json": vectors_json(table, prefix)}


def py_tests(record, base: str, module_file: str) -> dict:
    table = _all(record)
    data = {f.name: [([num17(v) for v in ins], num17(want)) for ins, want in vs]
            for f, vs in table}
    text = f'''"""Checks the generated functions against exact test vectors (derive code --with-tests)."""
import importlib.util
import os
import sys

HERE = os.path.dirname(os.path.abspath(__file__))
VECTORS = {json.dumps(data, indent=1)}


def load():
    spec = importlib.util.spec_from_file_location("formulas", os.path.join(HERE, {module_file!r}))
    mod = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(mod)
    return mod


def main():
    mod = load()
    worst, failures, count = 0.0, 0, 0
    for name, rows in VECTORS.items():
        fn = getattr(mod, name)
        for inputs, want in rows:
            got, want = fn(*map(float, inputs)), float(want)
            err = abs(got - want) / abs(want) if want != 0 else abs(got)
            count += 1
            worst = max(worst, err)
            failures += not err <= {TOLERANCE!r}
    print(f"{{count}} vectors, max relative error {{worst:.3g}}, {{failures}} failures")
    if count == 0:
        print("no test vectors: nothing was checked")
        return 1
    return 1 if failures else 0


if __name__ == "__main__":
    sys.exit(main())
'''
    return {base + "_test.py": text, base + "_vectors.json": vectors_json(table)}

