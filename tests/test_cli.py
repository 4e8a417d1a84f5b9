"""The command line, through its thin main (in process) and once as a real process."""
from __future__ import annotations

import io
import json
import os
import subprocess
import sys
from pathlib import Path

from derive.cli import main

ROOT = Path(__file__).resolve().parent.parent
DIVIDER = """title "Divider"
voltage source V between a and gnd = 10 V
resistor R1 between a and b = 1 kohm ±1%
resistor R2 between b and gnd = 4 kohm
port out between b and gnd
find thevenin at out
"""


def test_record_json_on_stdout(tmp_path, capsys):
    p = tmp_path / "d.eqv"
    p.write_text(DIVIDER)
    assert main(["record", str(p), "--format", "json"]) == 0
    d = json.loads(capsys.readouterr().out)
    assert d["title"] == "Divider"
    assert d["symbols"]["R1"] == {"nominal": 1000.0, "unit": "ohm", "tolerance": 0.01}
    r = d["results"][0]
    assert r["request"] == "find thevenin at out"
    assert r["quantities"]["vth"]["expr"] == "R2*V/(R1 + R2)"
    assert r["quantities"]["vth"]["value"] == 8.0
    assert r["quantities"]["rth"]["unit"] == "ohm"


def test_output_format_follows_extension(tmp_path, capsys):
    p = tmp_path / "d.eqv"
    p.write_text(DIVIDER)
    out = tmp_path / "rec.json"
    assert main(["record", str(p), "-o", str(out)]) == 0
    assert json.loads(out.read_text())["results"][0]["quantities"]["rth"]["value"] == 800.0
    md = tmp_path / "rec.md"
    assert main(["record", str(p), "-o", str(md)]) == 0
    assert md.read_text().startswith("# Divider")


def test_stdin_sheet(monkeypatch, capsys):
    monkeypatch.setattr(sys, "stdin", io.TextIOWrapper(io.BytesIO(DIVIDER.encode())))
    assert main(["record", "-", "--format", "json"]) == 0
    assert "R1*R2/(R1 + R2)" in capsys.readouterr().out


def test_symbolic_option(tmp_path, capsys):
    p = tmp_path / "d.eqv"
    p.write_text(DIVIDER)
    assert main(["record", str(p), "--format", "json", "--symbolic", "R2"]) == 0
    d = json.loads(capsys.readouterr().out)
    assert d["results"][0]["quantities"]["vth"]["expr"] == "10*R2/(R2 + 1000)"


def test_missing_file_is_exit_2(tmp_path, capsys):
    assert main(["record", str(tmp_path / "none.eqv")]) == 2
    assert "error: cannot read the sheet" in capsys.readouterr().err


def test_real_process_and_module_entry(tmp_path):
    p = tmp_path / "d.eqv"
    p.write_text(DIVIDER.replace("between a and b", "between a and"))
    env = dict(os.environ, PYTHONPATH=str(ROOT))
    r = subprocess.run([sys.executable, "-m", "derive", "record", str(p)], capture_output=True,
                       text=True, env=env, cwd=tmp_path)
    assert r.returncode == 2
    assert r.stderr.startswith(f"{p}:3:")
    assert "Traceback" not in r.stderr


def test_monte_carlo_options_reach_the_analysis(tmp_path, capsys):
    p = tmp_path / "d.eqv"
    p.write_text(DIVIDER + "find tolerance of vth at out\n")
    assert main(["record", str(p), "--format", "json", "--samples", "3000", "--seed", "9",
                 "--distribution", "normal"]) == 0
    mc = json.loads(capsys.readouterr().out)["results"][1]["monte_carlo"]
    assert (mc["samples"], mc["seed"], mc["distribution"]) == (3000, 9, "normal")
    # vth = 10*R2/(R1+R2) with R1 = 1k ±1% (3 sigma): mean stays near 8 V
    assert abs(mc["mean"] - 8.0) < 0.01


def test_absolute_tolerance_of_a_nominal_becomes_relative(tmp_path, capsys):
    p = tmp_path / "n.eqv"
    p.write_text("nominal Voff = 2 V ±10 mV\nvoltage source V between a and gnd = Voff\n"
                 "resistor R1 between a and gnd = 1k\nport p between a and gnd\nfind vth at p\n")
    assert main(["record", str(p), "--format", "json"]) == 0
    assert json.loads(capsys.readouterr().out)["symbols"]["Voff"]["tolerance"] == 0.005


def test_check_derives_only_the_claims(tmp_path, capsys):
    """derive check answers its check statements and nothing else: a request elsewhere in
    the sheet that cannot be answered (a sensitivity of an s-dependent gain) stops
    `derive record` but not `derive check`."""
    p = tmp_path / "c.eqv"
    p.write_text("""voltage source V between a and gnd = 10 V
resistor R1 between a and b = 1 kohm
resistor R2 between b and gnd = 4 kohm
capacitor C between b and gnd = 1 nF
port out between b and gnd
find sensitivity of gain from V to out
check rth at out equals R1*R2/(R1 + R2 + s*C*R1*R2)
""")
    assert main(["record", str(p), "--format", "json"]) == 2
    capsys.readouterr()
    assert main(["check", str(p)]) == 0
    out = capsys.readouterr().out
    assert out.startswith("PASS line 7: check rth at out equals")
    import derive
    from derive.export.formats import gives_verdict
    rec = derive.derive_file(str(p), select=gives_verdict)
    assert [r.request.statement for r in rec.results] == ["check"]
