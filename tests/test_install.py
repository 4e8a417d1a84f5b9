"""A non-editable install ships the grammar and templates and runs from anywhere."""
from __future__ import annotations

import os
import shutil
import subprocess
import sys
import zipfile
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent


@pytest.fixture(scope="module")
def wheel(tmp_path_factory):
    out = tmp_path_factory.mktemp("wheel")
    r = subprocess.run([sys.executable, "-m", "pip", "wheel", "--no-deps", "-q", "-w", str(out),
                        str(ROOT)], capture_output=True, text=True)
    if r.returncode != 0:
        pytest.skip(f"could not build a wheel here (no build backend reachable?): {r.stderr[-300:]}")
    return next(out.glob("derive-*.whl"))


def test_wheel_contains_grammar_and_templates(wheel):
    names = zipfile.ZipFile(wheel).namelist()
    assert "derive/grammar/sheet.lark" in names
    assert "derive/templates/record.md.j2" in names
    assert any(n.endswith("entry_points.txt") for n in names)


def test_fresh_venv_runs_from_another_directory(wheel, tmp_path):
    venv = tmp_path / "venv"
    subprocess.run([sys.executable, "-m", "venv", "--system-site-packages", str(venv)], check=True)
    py = venv / "bin" / "python"
    subprocess.run([str(py), "-m", "pip", "install", "-q", "--no-deps", str(wheel)], check=True)
    work = tmp_path / "elsewhere"
    work.mkdir()
    shutil.copy(ROOT / "worked" / "strain_bridge.eqv", work / "bridge.eqv")
    env = {k: v for k, v in os.environ.items() if k != "PYTHONPATH"}
    r = subprocess.run([str(venv / "bin" / "derive"), "record", "bridge.eqv", "--format", "json"],
                       cwd=work, capture_output=True, text=True, env=env)
    assert r.returncode == 0, r.stderr
    assert '"vth"' in r.stdout
    # the installed copy is the one that ran, not the checkout
    r = subprocess.run([str(py), "-c", "import derive, sys; print(derive.__file__)"], cwd=work,
                       capture_output=True, text=True, env=env)
    assert str(venv) in r.stdout
