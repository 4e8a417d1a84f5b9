"""Robustness II: output paths, option values, generated code, valid sheets that used to
crash, and the error display. Each test names the defect it guards against."""
from __future__ import annotations

import os
import stat
import subprocess
import sys

import pytest

from derive.cli import main

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
CORPUS = os.path.join(ROOT, "tests", "corpus")

# A voltage divider: 10 V, R1 = 1 kΩ over R2 = 2 kΩ (vth = 10·2/3 V, common practice).
DIVIDER = ("title \"Divider\"\nvoltage source V1 between in and gnd = 10 V\n"
           "resistor R1 between in and out = 1 kohm ±1%\n"
           "resistor R2 between out and gnd = 2 kohm ±1%\n"
           "port out between out and gnd\nfind vth at out\nfind rth at out\n")
TOLERANCE = DIVIDER.replace("find rth at out\n", "find tolerance of vth at out\n")


@pytest.fixture
def sheet(tmp_path):
    p = tmp_path / "s.eqv"
    p.write_text(DIVIDER, encoding="utf-8")
    return p


def _err(capsys):
    return capsys.readouterr().err


# ------------------------------------------------------------------ 1. output paths
@pytest.mark.parametrize("timeout", [None, "60"])
def test_output_onto_dev_null_keeps_the_device(sheet, capsys, timeout):
    before = os.stat("/dev/null")
    extra = ["--timeout", timeout] if timeout else []
    assert main(["record", str(sheet), "-o", "/dev/null", *extra]) == 0
    after = os.stat("/dev/null")
    assert stat.S_ISCHR(after.st_mode) and after.st_rdev == before.st_rdev


def test_output_onto_a_device_node_writes_into_it(sheet, tmp_path, capsys):
    dev = tmp_path / "nulldev"
    try:
        os.mknod(dev, 0o666 | stat.S_IFCHR, os.makedev(1, 3))   # the null device (Linux)
    except (PermissionError, AttributeError, OSError) as e:
        pytest.skip(f"cannot make a device node here: {e}")
    assert main(["record", str(sheet), "-o", str(dev)]) == 0
    assert stat.S_ISCHR(os.stat(dev).st_mode)          # before: replaced by a regular file
    assert sorted(os.listdir(tmp_path)) == ["nulldev", "s.eqv"]


def test_output_onto_dev_full_fails_and_keeps_the_device(sheet, capsys):
    if not os.path.exists("/dev/full"):
        pytest.skip("no /dev/full on this system")
    before = os.stat("/dev/full")
    assert main(["record", str(sheet), "-o", "/dev/full"]) == 2
    err = _err(capsys)
    assert "cannot write /dev/full" in err and "internal" not in err
    assert stat.S_ISCHR(os.stat("/dev/full").st_mode)
    assert os.stat("/dev/full").st_rdev == before.st_rdev


def test_output_onto_a_fifo_writes_through_it(sheet, tmp_path, capsys):
    fifo = tmp_path / "pipe"
    os.mkfifo(fifo)
    reader = subprocess.Popen([sys.executable, "-c",
                               "import sys; sys.stdout.write(str(len(open(sys.argv[1], 'rb')"
                               ".read())))", str(fifo)], stdout=subprocess.PIPE)
    assert main(["record", str(sheet), "-o", str(fifo), "--format", "json"]) == 0
    out, _ = reader.communicate(timeout=60)
    assert int(out) > 100
    assert stat.S_ISFIFO(os.stat(fifo).st_mode)


def test_symlink_to_a_regular_file_is_followed(sheet, tmp_path, capsys):
    real = tmp_path / "real.json"
    real.write_text("old", encoding="utf-8")
    os.chmod(real, 0o640)
    link = tmp_path / "link.json"
    link.symlink_to(real.name)
    assert main(["record", str(sheet), "-o", str(link)]) == 0
    assert link.is_symlink()
    assert '"vth"' in real.read_text(encoding="utf-8")
    assert stat.S_IMODE(os.stat(real).st_mode) == 0o640     # the file's mode is kept


def test_missing_folder_is_a_clear_error(sheet, tmp_path, capsys):
    assert main(["record", str(sheet), "-o", str(tmp_path / "nope" / "r.md")]) == 2
    err = _err(capsys)
    assert "does not exist" in err and "internal" not in err and ".derive-" not in err


def test_folder_as_output_is_a_clear_error(sheet, tmp_path, capsys):
    (tmp_path / "out").mkdir()
    assert main(["record", str(sheet), "-o", str(tmp_path / "out")]) == 2
    assert "is a folder" in _err(capsys)


def test_folder_as_sheet_is_a_clear_error(tmp_path, capsys):
    assert main(["record", str(tmp_path)]) == 2        # before: internal error, exit 3
    err = _err(capsys)
    assert "folder" in err and "internal" not in err


def test_unwritable_folder_is_a_clear_error(sheet, tmp_path, capsys):
    if os.geteuid() == 0:
        # root ignores permission bits; /proc refuses new files to everyone
        target = "/proc/derive-robustness-test.md"
        if not os.path.isdir("/proc"):
            pytest.skip("running as root and no /proc to test an unwritable folder")
    else:
        ro = tmp_path / "ro"
        ro.mkdir()
        os.chmod(ro, 0o500)
        target = str(ro / "r.md")
    try:
        assert main(["record", str(sheet), "-o", target]) == 2
        err = _err(capsys)
        assert f"cannot write {target}" in err and "internal" not in err
    finally:
        if os.geteuid() != 0:
            os.chmod(tmp_path / "ro", 0o700)


@pytest.mark.parametrize("how", ["same", "symlink", "hardlink"])
def test_output_equal_to_the_sheet_is_refused(sheet, tmp_path, capsys, how):
    target = sheet
    if how == "symlink":
        target = tmp_path / "alias.md"
        target.symlink_to(sheet.name)
    elif how == "hardlink":
        target = tmp_path / "hard.md"
        os.link(sheet, target)
    assert main(["record", str(sheet), "-o", str(target)]) == 2
    assert "never overwrites" in _err(capsys)
    assert sheet.read_text(encoding="utf-8") == DIVIDER


def test_code_files_are_written_all_or_none(sheet, tmp_path, capsys):
    (tmp_path / "f.h").mkdir()                   # the header cannot be written
    assert main(["code", str(sheet), "--lang", "c", "-o", str(tmp_path / "f.c"),
                 "--with-tests"]) == 2
    assert "f.h" in _err(capsys)
    assert sorted(os.listdir(tmp_path)) == ["f.h", "s.eqv"]      # before: f.c was written


def test_code_output_named_like_the_sheet_is_refused(tmp_path, capsys):
    sheet = tmp_path / "f.h"                     # the header of -o f.c would replace it
    sheet.write_text(DIVIDER, encoding="utf-8")
    assert main(["code", str(sheet), "--lang", "c", "-o", str(tmp_path / "f.c")]) == 2
    assert "never overwrites" in _err(capsys)
    assert sheet.read_text(encoding="utf-8") == DIVIDER
    assert sorted(os.listdir(tmp_path)) == ["f.h"]


def test_figures_of_a_failed_run_are_removed(tmp_path, capsys):
    sheet = tmp_path / "t.eqv"
    sheet.write_text(TOLERANCE, encoding="utf-8")
    tpl = tmp_path / "tpl"
    tpl.mkdir()
    (tpl / "record.md.j2").write_text("{% if %}\n", encoding="utf-8")   # a broken template
    out = tmp_path / "out"
    out.mkdir()
    assert main(["record", str(sheet), "-o", str(out / "r.md"), "--template", str(tpl),
                 "--samples", "200"]) == 2
    assert "template" in _err(capsys)
    assert os.listdir(out) == []               # before: the figure PNG stayed behind


def test_failed_pdf_never_overwrites_an_existing_tex(sheet, tmp_path, capsys, monkeypatch):
    from derive.export import latex
    monkeypatch.setattr(latex, "_tex_tool", lambda: None)      # TeX "missing"
    tex = tmp_path / "r.tex"
    tex.write_text("my own LaTeX", encoding="utf-8")
    assert main(["record", str(sheet), "-o", str(tmp_path / "r.pdf")]) == 2
    assert "not written" in _err(capsys)
    assert tex.read_text(encoding="utf-8") == "my own LaTeX"
    assert not (tmp_path / "r.pdf").exists()


def test_failed_pdf_writes_the_tex_when_there_is_none(sheet, tmp_path, capsys, monkeypatch):
    from derive.export import latex
    monkeypatch.setattr(latex, "_tex_tool", lambda: None)
    assert main(["record", str(sheet), "-o", str(tmp_path / "r.pdf")]) == 2
    assert "written to" in _err(capsys)
    assert "\\documentclass" in (tmp_path / "r.tex").read_text(encoding="utf-8")


def test_image_links_are_escaped(tmp_path, capsys):
    sheet = tmp_path / "t.eqv"
    sheet.write_text(TOLERANCE, encoding="utf-8")
    out = tmp_path / "my (rec) [1].md"
    assert main(["record", str(sheet), "-o", str(out), "--samples", "200"]) == 0
    md = out.read_text(encoding="utf-8")
    links = [line[line.rindex("](") + 2:-1] for line in md.splitlines()
             if line.startswith("![")]
    assert links, md
    from urllib.parse import unquote
    for link in links:
        assert not set(link) & set(" ()[]<>")
        assert (tmp_path / unquote(link)).is_file()


# ------------------------------------------------------------------ 2. option values
@pytest.mark.parametrize("option", [["--seed", "-1"], ["--seed", "x"], ["--samples", "1"],
                                    ["--samples", "0"], ["--samples", "-5"],
                                    ["--samples", "2.5"], ["--samples", "1e12"],
                                    ["--max-terms", "-1"], ["--max-terms", "nan"],
                                    ["--max-terms", "0"], ["--timeout", "0"],
                                    ["--timeout", "nan"], ["--timeout", "inf"],
                                    ["--timeout", "-3"]])
def test_bad_option_values_are_usage_errors(tmp_path, capsys, option):
    sheet = tmp_path / "t.eqv"
    sheet.write_text(TOLERANCE, encoding="utf-8")
    assert main(["record", str(sheet), *option]) == 2   # before: internal error or a
    err = _err(capsys)                                    # false "denominator vanishes"
    assert f"argument {option[0]}" in err and "internal" not in err




def test_chunked_monte_carlo_matches_the_whole_sample(monkeypatch):
    """Chunked sampling (bounded memory) gives numpy's mean, standard deviation and
    quantiles of the whole sample (numpy on the concatenated draws as the reference)."""
    import numpy as np
    from derive.analyses import tolerance
    chunks = []

    def draw(form, nominal, box, rng, m, distribution):
        v = rng.normal(5.0, 2.0, m)
        v[rng.random(m) < 0.01] = np.inf          # a few non-finite values
        chunks.append(v.copy())
        return v
    monkeypatch.setattr(tolerance, "_draw", draw)
    monkeypatch.setattr(tolerance, "CHUNK", 1000)
    _v, out = tolerance.monte_carlo(None, {}, {}, samples=5500, seed=3)
    whole = np.concatenate(chunks)
    assert len(chunks) == 6 and whole.size == 5500
    fin = whole[np.isfinite(whole)]
    lo, hi = np.quantile(fin, tolerance.QUANTILES)
    assert out["low"] == pytest.approx(lo, rel=1e-12)
    assert out["high"] == pytest.approx(hi, rel=1e-12)
    assert out["mean"] == pytest.approx(fin.mean(), rel=1e-12)
    assert out["std"] == pytest.approx(fin.std(ddof=1), rel=1e-10)
    assert out["non_finite_samples"] == whole.size - fin.size


def test_library_samples_below_two_is_a_located_error():
    from derive import derive_text
    from derive.errors import SheetError
    with pytest.raises(SheetError) as e:
        derive_text(TOLERANCE, "t.eqv", mc_samples=1)
    assert "at least 2 samples" in str(e.value) and e.value.line == 7


def test_samples_in_exponent_notation_are_accepted(tmp_path, capsys):
    import json
    sheet = tmp_path / "t.eqv"
    sheet.write_text(TOLERANCE, encoding="utf-8")
    assert main(["record", str(sheet), "--samples", "2e3", "--format", "json"]) == 0
    text = capsys.readouterr().out
    assert '"samples": 2000' in text.replace("\n", " ") or \
        '"samples": 2000' in json.dumps(json.loads(text))


# ------------------------------------------------------------------ 3. generated code
GCC = ["gcc", "-std=c99", "-Wall", "-Wextra", "-Werror", "-pedantic"]
CODE_SHEETS = sorted(
    [os.path.join(ROOT, "worked", f) for f in os.listdir(os.path.join(ROOT, "worked"))
     if f.endswith(".eqv")] +
    [os.path.join(CORPUS, f) for f in os.listdir(CORPUS) if f.startswith("code_")])


@pytest.mark.skipif(__import__("shutil").which("gcc") is None, reason="gcc not installed")
@pytest.mark.parametrize("path", CODE_SHEETS, ids=os.path.basename)
def test_generated_c_builds_strictly_and_passes(path, tmp_path, capsys):
    """Every generated C file and its test program compile with strict C99 flags and the
    test passes on its exact vectors (before: M_SQRT2, and parameters named NULL, EOF,
    FP_ZERO, PREFIX_EDIV ... broke the build)."""
    stem = os.path.splitext(os.path.basename(path))[0]
    out = tmp_path / f"{stem}.c"
    assert main(["code", path, "--lang", "c", "-o", str(out), "--with-tests"]) == 0
    src = out.read_text(encoding="utf-8") + (tmp_path / f"{stem}.h").read_text("utf-8")
    assert "M_SQRT" not in src and "M_PI" not in src
    exe = tmp_path / "t"
    subprocess.run(GCC + ["-o", str(exe), str(tmp_path / f"{stem}_test.c"), str(out), "-lm"],
                   check=True, capture_output=True)
    run = subprocess.run([str(exe)], capture_output=True, text=True)
    assert run.returncode == 0, run.stdout
    assert " 0 failures" in run.stdout and not run.stdout.startswith("0 vectors")


@pytest.mark.parametrize("path", [p for p in CODE_SHEETS if "corpus" in p], ids=os.path.basename)
def test_generated_python_passes(path, tmp_path, capsys):
    stem = os.path.splitext(os.path.basename(path))[0]
    out = tmp_path / f"{stem}.py"
    assert main(["code", path, "--lang", "python", "-o", str(out), "--with-tests"]) == 0
    run = subprocess.run([sys.executable, str(tmp_path / f"{stem}_test.py")],
                         capture_output=True, text=True)
    assert run.returncode == 0, run.stdout + run.stderr


def test_c_constants_are_strict_c99():
    import sympy
    from derive.export.code import _CPrinter
    x = sympy.Symbol("x")
    text = _CPrinter().doprint(sympy.sqrt(2) * x + sympy.pi / sympy.sqrt(3))
    assert "M_" not in text and "sqrt(2.0)" in text and "const double" not in text


def test_reserved_parameter_names_are_renamed():
    from derive.export.code_forms import ident
    for name in ("FP_ZERO", "NULL", "EOF", "HUGE_VALF", "math_errhandling", "int", "for",
                 "EDOM", "M_PI", "FP_NAN"):
        new = ident(name)
        assert new != name and not new.startswith("_")
    assert ident("out_error", prefix="out") != "out_error"
    assert ident("OUT_EDIV", prefix="out") != "OUT_EDIV"
    assert ident("R1", prefix="out") == "R1"


def _no_vector_table(monkeypatch, module):
    """A record whose one formula has no test vector (every point undefined)."""
    from derive import derive_text
    rec = derive_text(DIVIDER, "s.eqv")
    monkeypatch.setattr(module, "evaluate", lambda f, inputs: None)
    return rec


@pytest.mark.skipif(__import__("shutil").which("gcc") is None, reason="gcc not installed")
def test_c_test_program_without_vectors_fails(tmp_path, monkeypatch):
    from derive.export import code, code_vectors
    rec = _no_vector_table(monkeypatch, code_vectors)
    header, src = code.render_c(rec, "f", "f.h")
    (tmp_path / "f.h").write_text(header, encoding="utf-8")
    (tmp_path / "f.c").write_text(src, encoding="utf-8")
    files = code_vectors.c_tests(rec, str(tmp_path / "f"), "f.h", "f")
    for p, text in files.items():
        open(p, "w", encoding="utf-8").write(text)
    exe = tmp_path / "t"
    subprocess.run(GCC + ["-o", str(exe), str(tmp_path / "f_test.c"), str(tmp_path / "f.c"),
                          "-lm"], check=True, capture_output=True)
    run = subprocess.run([str(exe)], capture_output=True, text=True)
    assert run.returncode == 1 and "nothing was checked" in run.stdout   # before: exit 0


def test_python_test_program_without_vectors_fails(tmp_path, monkeypatch):
    from derive.export import code, code_vectors
    rec = _no_vector_table(monkeypatch, code_vectors)
    (tmp_path / "f.py").write_text(code.render_python(rec), encoding="utf-8")
    files = code_vectors.py_tests(rec, str(tmp_path / "f"), "f.py")
    for p, text in files.items():
        open(p, "w", encoding="utf-8").write(text)
    run = subprocess.run([sys.executable, str(tmp_path / "f_test.py")], capture_output=True,
                         text=True)
    assert run.returncode == 1 and "nothing was checked" in run.stdout
