"""derive code: generated C (compiled with gcc) and Python checked against exact vectors."""
import importlib.util
import os
import shutil
import subprocess
from fractions import Fraction

import pytest
import sympy

import derive
from derive import cli
from derive.export.code_vectors import vectors
from derive.export.code import collect, comment, ident, render

THERMISTOR = os.path.join(os.path.dirname(__file__), "..", "worked", "thermistor_stage.eqv")
GCC = ["gcc", "-std=c99", "-Wall", "-Wextra", "-Werror", "-pedantic"]
needs_gcc = pytest.mark.skipif(shutil.which("gcc") is None, reason="gcc not installed")

QUADRATIC = """title "Trim */ network /* with \\ odd ??/ text"
nominal int = 1 kohm
resistor Ra between a and b = int
resistor Rb between b and gnd = int
resistor Rc between b and gnd = 2 kohm
current source I from gnd to a = 1 mA
port p between a and gnd
solve rth at p for int
find thevenin at p
"""


class Args:
    def __init__(self, output=None, with_tests=False):
        self.output, self.with_tests = output, with_tests


def record():
    return derive.derive_file(THERMISTOR)


def write(files):
    for path, text in files.items():
        with open(path, "w", encoding="utf-8") as f:
            f.write(text)


@needs_gcc
def test_c_compiles_and_meets_exact_vectors(tmp_path):
    out = str(tmp_path / "thermistor.c")
    files = render(record(), "c", Args(out, True))
    assert set(files) == {out, str(tmp_path / "thermistor.h"), str(tmp_path / "thermistor_test.c"),
                          str(tmp_path / "thermistor_vectors.json")}
    write(files)
    exe = str(tmp_path / "t")
    subprocess.run(GCC + ["-o", exe, out, str(tmp_path / "thermistor_test.c"), "-lm"],
                   check=True, capture_output=True, text=True)
    run = subprocess.run([exe], capture_output=True, text=True)
    assert run.returncode == 0, run.stdout
    count, worst = run.stdout.split(" vectors, max relative error ")
    assert int(count) >= 20
    assert float(worst.split(",")[0]) <= 1e-12
    header = files[str(tmp_path / "thermistor.h")]
    assert "double Rt_from_vth_at_divider(double vth, double Vref, double Rpu);" in header
    assert "line 20: solve vth at divider for Rt" in header
    assert "vth [V], Vref [V], Rpu [ohm]" in header


@needs_gcc
def test_c_inverse_matches_hand_formula_and_guards_division(tmp_path):
    files = render(record(), "c", Args(str(tmp_path / "th.c")))
    write(files)
    (tmp_path / "drv.c").write_text(
        '#include <math.h>\n#include <stdio.h>\n#include "th.h"\n'
        "int main(void)\n{\n"
        '    printf("%.17g\\n", Rt_from_vth_at_divider(1.2, 3.3, 10000.0));\n'
        '    printf("%d\\n", th_error);\n'
        '    printf("%d\\n", isnan(Rt_from_vth_at_divider(3.3, 3.3, 10000.0)) ? 1 : 0);\n'
        '    printf("%d\\n", th_error == TH_ERANGE);\n'
        '    th_error = TH_OK;\n'
        '    printf("%d\\n", isnan(Rt_from_vth_at_divider(3.4, 3.3, 10000.0)) ? 1 : 0);\n'
        '    printf("%d\\n", th_error == TH_ERANGE);\n'
        '    th_error = TH_OK;\n'
        '    printf("%d\\n", isnan(Rt_from_vth_at_divider(-0.1, 3.3, 10000.0)) ? 1 : 0);\n'
        '    printf("%d\\n", th_error == TH_ERANGE);\n'
        "    return 0;\n}\n")
    exe = str(tmp_path / "drv")
    subprocess.run(GCC + ["-o", exe, str(tmp_path / "th.c"), str(tmp_path / "drv.c"), "-lm"],
                   check=True, capture_output=True)
    lines = subprocess.run([exe], capture_output=True, text=True, check=True).stdout.split()
    # Rt = Rpu*v/(Vref - v) for a thermistor below a pull-up (common practice, no source)
    want = Fraction(10000) * Fraction("1.2") / (Fraction("3.3") - Fraction("1.2"))
    assert float(lines[0]) == pytest.approx(float(want), rel=1e-13)
    # an open sensor (vth = Vref), a reading above Vref and a negative one are outside the
    # range the record derives (0 < vth < Vref: a positive Rt): NAN and TH_ERANGE, never a
    # negative or infinite resistance
    assert lines[1:] == ["0", "1", "1", "1", "1", "1", "1"]


def load_module(path):
    spec = importlib.util.spec_from_file_location("generated_formulas", path)
    mod = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(mod)
    return mod


def test_python_module_against_exact_vectors(tmp_path):
    rec = record()
    path = str(tmp_path / "thermistor.py")
    write(render(rec, "python", Args(path, True)))
    mod = load_module(path)
    nominal = rec.circuit.nominal_values()
    worst, n = 0.0, 0
    for f in collect(rec)[0]:
        for inputs, want in vectors(f, nominal):
            got = getattr(mod, f.name)(*map(float, inputs))
            worst = max(worst, abs(got - float(want)) / abs(float(want)))
            n += 1
    assert n >= 20 and worst <= 1e-12
    run = subprocess.run(["python", str(tmp_path / "thermistor_test.py")], capture_output=True,
                         text=True)
    assert run.returncode == 0 and "0 failures" in run.stdout
    with pytest.raises(ValueError, match="outside the valid range 0 < vth < Vref"):
        mod.Rt_from_vth_at_divider(3.3, 3.3, 10000.0)       # an open sensor
    # hand formula, as above (common practice, no source)
    assert mod.Rt_from_vth_at_divider(1.2, 3.3, 1e4) == pytest.approx(1e4 * 1.2 / 2.1, rel=1e-14)


@needs_gcc
def test_hostile_names_and_title_and_square_root(tmp_path):
    rec = derive.derive_text(QUADRATIC, "trim.eqv")
    out = str(tmp_path / "trim.c")
    files = render(rec, "c", Args(out, True))
    write(files)
    src = files[out] + files[str(tmp_path / "trim.h")]
    assert "double int_" in src and "double int," not in src
    assert "sqrt(" in src and "TRIM_EDOMAIN" in src
    assert "Trim * / network / * with / odd ? ?/ text" in src
    exe = str(tmp_path / "q")
    subprocess.run(GCC + ["-o", exe, out, str(tmp_path / "trim_test.c"), "-lm"], check=True,
                   capture_output=True)
    run = subprocess.run([exe], capture_output=True, text=True)
    assert run.returncode == 0, run.stdout
    py = str(tmp_path / "trim.py")
    write(render(rec, "python", Args(py)))
    mod = load_module(py)
    # R + R||Rc = rth at R = 1k, Rc = 2k: rth = 5/3 k, and the inverse returns 1k (hand algebra)
    assert mod.int_from_rth_at_p(5000 / 3, 2000.0) == pytest.approx(1000.0, rel=1e-13)


def test_cli_prints_one_self_contained_c_file(tmp_path, capsys):
    assert cli.main(["code", THERMISTOR, "--lang", "c"]) == 0
    text = capsys.readouterr().out
    assert "#include \"" not in text and "int thermistor_stage_error" in text
    if shutil.which("gcc"):
        (tmp_path / "one.c").write_text(text)
        subprocess.run(GCC + ["-c", "-o", str(tmp_path / "one.o"), str(tmp_path / "one.c")],
                       check=True, capture_output=True)


def test_sequence_results_become_locals(tmp_path):
    from derive.export.code import Formula, py_function
    a, b, rp = sympy.symbols("a b Rp")
    f = Formula("f", [(a, "ohm"), (b, "ohm")], [(rp, a * b / (a + b))], rp + a, "ohm",
                "test", "origin")
    code = py_function(f)
    assert "    Rp = " in code
    (tmp_path / "seq.py").write_text("import math\n\n" + code)
    mod = load_module(str(tmp_path / "seq.py"))
    assert mod.f(2.0, 2.0) == 3.0            # 2||2 + 2 (hand arithmetic)
    with pytest.raises(ValueError, match="a \\+ b is zero"):
        mod.f(1.0, -1.0)


def test_identifier_and_comment_sanitising():
    assert ident("while") == "while_" and ident("lambda") == "lambda_"
    assert ident("a b-c") == "a_b_c" and ident("x", {"x"}) == "x_"
    assert "*/" not in comment("*/*/") and "??" not in comment("???")
    assert "\n" not in comment("a\nb")


def test_python_calibration_refuses_readings_outside_the_valid_range(tmp_path):
    files = render(record(), "python", Args(str(tmp_path / "th.py")))
    write(files)
    mod = load_module(str(tmp_path / "th.py"))
    # Rt = Rpu*v/(Vref - v) (common practice, no source)
    assert mod.Rt_from_vth_at_divider(1.2, 3.3, 10000.0) == pytest.approx(
        10000 * 1.2 / (3.3 - 1.2), rel=1e-13)
    for v in (3.3, 3.4, -0.1, 0.0):
        with pytest.raises(ValueError, match="outside the valid range"):
            mod.Rt_from_vth_at_divider(v, 3.3, 10000.0)
