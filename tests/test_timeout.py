"""``--timeout`` stops the work in every phase, also inside compiled code.

The work runs in a forked worker (its own process group) that the parent kills at the
deadline; only the parent writes files and standard output. A Python signal handler in the
same process (the previous design) only runs at a bytecode boundary, so it could not stop a
python-flint polynomial gcd, which holds the interpreter lock for the whole call.
"""
from __future__ import annotations

import json
import os
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import pytest

from derive.cli import main

ROOT = Path(__file__).resolve().parent.parent
TIMEOUT_PREFIX = "derive: error: gave up after "

DIVIDER = """title "Divider"
voltage source V between a and gnd = 10 V
resistor R1 between a and b = 1 kohm ±1%
resistor R2 between b and gnd = 4 kohm
port out between b and gnd
find thevenin at out
"""


def heavy_sheet() -> str:
    """An all-symbolic 12x12 resistor grid fed through Rs (264 resistors): far beyond what
    answers in a minute here (the node-elimination form and its exact checks ran past 30 s;
    the earlier heavy sheet, a complete network whose vth = isc*rth check took one long
    python-flint gcd, now answers in under a second since that check evaluates at points)."""
    n = 12
    name = lambda i, j: "gnd" if (i, j) == (n - 1, n - 1) else f"g{i}_{j}"   # noqa: E731
    lines = ["voltage source V between vin and gnd = 1 V", "resistor Rs between vin and g0_0"]
    for i in range(n):
        for j in range(n):
            if i + 1 < n:
                lines.append(f"resistor Ra{i}_{j} between {name(i, j)} and {name(i + 1, j)}")
            if j + 1 < n:
                lines.append(f"resistor Rb{i}_{j} between {name(i, j)} and {name(i, j + 1)}")
    lines += [f"port out between g0_{n - 1} and gnd", "find thevenin at out"]
    return "\n".join(lines) + "\n"


# The deadline must fall inside the long gcd for this to test the compiled-code case, and the
# imports and parsing before it took up to ~2.5 s on a loaded machine: hence 4 s, not 1 s.
HEAVY_TIMEOUT = "4"
# Generous: the deadline plus four seconds. The old in-process alarm returned only after the
# gcd, 10-30 s here.
HEAVY_BOUND = float(HEAVY_TIMEOUT) + 4.0


def _no_process_mentions(text: str) -> bool:
    if not os.path.isdir("/proc"):
        return True
    for pid in os.listdir("/proc"):
        if not pid.isdigit() or int(pid) == os.getpid():
            continue
        try:
            with open(f"/proc/{pid}/cmdline", "rb") as f:
                if text.encode() in f.read():
                    return False
        except OSError:
            pass
    return True


def test_timeout_stops_a_compiled_gcd_and_writes_nothing(tmp_path):
    work = tmp_path / "work"
    work.mkdir()
    sheet = work / "heavy.eqv"
    sheet.write_text(heavy_sheet(), encoding="utf-8")
    out = work / "out.json"
    out.write_text("previous", encoding="utf-8")
    tmpdir = tmp_path / "tmp"
    tmpdir.mkdir()
    env = {**os.environ, "PYTHONPATH": str(ROOT), "TMPDIR": str(tmpdir)}
    t0 = time.monotonic()
    p = subprocess.run([sys.executable, "-m", "derive", "record", str(sheet), "-o", str(out),
                        "--max-terms", "1e30", "--timeout", HEAVY_TIMEOUT],
                       capture_output=True, text=True, env=env, timeout=300)
    elapsed = time.monotonic() - t0
    assert p.returncode == 2, p.stderr
    assert p.stderr.startswith(TIMEOUT_PREFIX + f"{HEAVY_TIMEOUT} s (--timeout)"), p.stderr
    assert "Traceback" not in p.stderr
    assert p.stdout == ""
    assert elapsed < HEAVY_BOUND, f"returned after {elapsed:.1f} s"
    assert out.read_text(encoding="utf-8") == "previous"
    assert sorted(os.listdir(work)) == ["heavy.eqv", "out.json"]    # no temporary file
    assert os.listdir(tmpdir) == []                                  # worker's TMPDIR removed
    assert _no_process_mentions(str(sheet)), "the worker outlived the deadline"


def test_timeout_in_process_keeps_stdout_clean(tmp_path, capsys):
    """cli.main(argv) in-process with --timeout (the worker is a fork of the test process)."""
    sheet = tmp_path / "heavy.eqv"
    sheet.write_text(heavy_sheet(), encoding="utf-8")
    t0 = time.monotonic()
    status = main(["record", str(sheet), "--format", "json", "--max-terms", "1e30",
                   f"--timeout={HEAVY_TIMEOUT}"])
    elapsed = time.monotonic() - t0
    out, err = capsys.readouterr()
    assert status == 2
    assert err.startswith(TIMEOUT_PREFIX + f"{HEAVY_TIMEOUT} s (--timeout)"), err
    assert out == ""
    assert elapsed < HEAVY_BOUND, f"returned after {elapsed:.1f} s"
    assert sorted(os.listdir(tmp_path)) == ["heavy.eqv"]


@pytest.mark.parametrize("value", ["-1", "0", "nan", "inf", "-inf", "ten", "", "1e400"])
def test_bad_timeout_is_a_usage_error(tmp_path, capsys, value):
    sheet = tmp_path / "d.eqv"
    sheet.write_text(DIVIDER, encoding="utf-8")
    assert main(["record", str(sheet), f"--timeout={value}"]) == 2
    out, err = capsys.readouterr()
    assert "argument --timeout" in err and "usage:" in err
    assert out == ""


def _both(tmp_path, capsys, argv, files=()):
    """Run ``argv`` in-process without and with a (generous) --timeout, each in its own
    folder; return [(status, stdout, stderr, {name: bytes})] for the two runs."""
    runs = []
    for mode in ("plain", "timeout"):
        d = Path(tempfile.mkdtemp(prefix=mode + "-", dir=tmp_path))
        cwd = os.getcwd()
        os.chdir(d)
        try:
            for name, text in files:
                Path(name).write_text(text, encoding="utf-8")
            capsys.readouterr()
            status = main(argv + (["--timeout", "600"] if mode == "timeout" else []))
            out, err = capsys.readouterr()
            made = {p.name: p.read_bytes() for p in sorted(d.iterdir())}
        finally:
            os.chdir(cwd)
        runs.append((status, out, err, made))
    return runs


def test_worker_passes_stdout_through(tmp_path, capsys):
    (a, b) = _both(tmp_path, capsys, ["record", "d.eqv", "--format", "json"],
                   [("d.eqv", DIVIDER)])
    assert a == b
    assert a[0] == 0
    # divider: vth = V*R2/(R1+R2) = 10*4/5 = 8 V, rth = R1||R2 = 800 ohm (handbook forms)
    q = json.loads(b[1])["results"][0]["quantities"]
    assert q["vth"]["value"] == pytest.approx(8.0) and q["rth"]["value"] == pytest.approx(800.0)


def test_worker_writes_record_and_figures_like_the_plain_path(tmp_path, capsys):
    sheet = (ROOT / "worked" / "strain_bridge.eqv").read_text(encoding="utf-8")
    a, b = _both(tmp_path, capsys, ["record", "s.eqv", "-o", "rec.md", "--samples", "2000"],
                 [("s.eqv", sheet)])
    assert a[0] == b[0] == 0, (a[2], b[2])
    assert a[1] == b[1] == ""
    assert a[3] == b[3]
    pngs = [n for n in b[3] if n.endswith(".png")]
    assert pngs, sorted(b[3])          # the sensitivity and tolerance figures
    for n in pngs:
        assert b[3][n].startswith(b"\x89PNG\r\n\x1a\n")
        assert n.encode() in b[3]["rec.md"]
    assert not [n for n in b[3] if n.startswith(".derive-")]


def test_worker_writes_code_files_like_the_plain_path(tmp_path, capsys):
    a, b = _both(tmp_path, capsys, ["code", "d.eqv", "--lang", "c", "-o", "f.c",
                                    "--with-tests"], [("d.eqv", DIVIDER)])
    assert a == b
    assert a[0] == 0
    assert {"f.c", "f.h"} <= set(a[3])


def test_worker_passes_exit_1_and_located_errors_through(tmp_path, capsys):
    wrong = DIVIDER + "check rth at out equals R1 + R2\n"      # rth is R1||R2, not R1+R2
    a, b = _both(tmp_path, capsys, ["check", "w.eqv"], [("w.eqv", wrong)])
    assert a == b
    assert a[0] == 1
    bad = DIVIDER + "find rth at nowhere\n"
    a, b = _both(tmp_path, capsys, ["record", "b.eqv", "-o", "r.json"], [("b.eqv", bad)])
    assert a == b
    assert a[0] == 2
    assert a[2].startswith("b.eqv:7:")
    assert sorted(a[3]) == ["b.eqv"]


def test_worker_reads_the_sheet_from_stdin(tmp_path):
    p = subprocess.run([sys.executable, "-m", "derive", "record", "-", "--format", "json",
                        "--timeout", "600"], input=DIVIDER, capture_output=True, text=True,
                       cwd=tmp_path, env={**os.environ, "PYTHONPATH": str(ROOT)}, timeout=300)
    assert p.returncode == 0, p.stderr
    assert json.loads(p.stdout)["results"][0]["quantities"]["vth"]["value"] == \
        pytest.approx(8.0)


def test_stdin_that_never_ends_still_times_out(tmp_path):
    """The sheet read from a pipe nobody closes: the deadline covers reading it too."""
    t0 = time.monotonic()
    with subprocess.Popen([sys.executable, "-m", "derive", "record", "-", "--timeout", "1"],
                          stdin=subprocess.PIPE, stdout=subprocess.PIPE,
                          stderr=subprocess.PIPE, cwd=tmp_path,
                          env={**os.environ, "PYTHONPATH": str(ROOT)}) as p:
        p.stdin.write(b"# a sheet that never ends\n")
        p.stdin.flush()
        status = p.wait(timeout=60)          # standard input stays open meanwhile
        elapsed = time.monotonic() - t0
        out, err = p.stdout.read(), p.stderr.read().decode()
        p.stdin.close()
    assert status == 2
    assert err.startswith(TIMEOUT_PREFIX + "1 s (--timeout)"), err
    assert out == b""
    assert elapsed < 8.0


def test_timeout_kills_the_tex_build_and_its_children(tmp_path):
    """The PDF phase: a latexmk that never finishes (a stand-in script on PATH) is killed
    with the worker's process group; no PDF and no fallback .tex are written."""
    fake = tmp_path / "fakebin"
    fake.mkdir()
    # each tool starts a child of its own (the way latexmk runs pdflatex), which is what a
    # plain kill of the tool would leave running
    scripts = {"latexmk": f"/bin/sh {fake / 'child'}\n", "pdflatex": f"/bin/sh {fake / 'child'}\n",
               "child": "sleep 120\n"}
    for tool, body in scripts.items():
        script = fake / tool
        script.write_text("#!/bin/sh\n" + body, encoding="utf-8")
        script.chmod(0o755)
    work = tmp_path / "work"
    work.mkdir()
    (work / "d.eqv").write_text(DIVIDER, encoding="utf-8")
    env = {**os.environ, "PYTHONPATH": str(ROOT), "PATH": f"{fake}{os.pathsep}"
           f"{os.environ.get('PATH', '')}", "TMPDIR": str(tmp_path)}
    t0 = time.monotonic()
    p = subprocess.run([sys.executable, "-m", "derive", "record", "d.eqv", "-o", "r.pdf",
                        "--timeout", "2"], capture_output=True, text=True, cwd=work, env=env,
                       timeout=300)
    elapsed = time.monotonic() - t0
    assert p.returncode == 2, p.stderr
    assert p.stderr.startswith(TIMEOUT_PREFIX + "2 s (--timeout)"), p.stderr
    assert p.stdout == ""
    assert elapsed < 10.0
    assert sorted(os.listdir(work)) == ["d.eqv"]
    assert sorted(os.listdir(tmp_path)) == ["fakebin", "work"]     # TeX work folder removed
    time.sleep(0.2)     # let the killed ones be reaped
    assert _no_process_mentions(str(fake)), "latexmk or its child outlived the deadline"
