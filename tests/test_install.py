"""The wheel ships the grammar and templates; installed *with its declared dependencies* into a
clean virtual environment made from the base interpreter (no system or outer-venv site
packages), it runs from any directory. A dependency missing from pyproject fails here."""
from __future__ import annotations

import json
import os
import re
import shutil
import subprocess
import sys
import zipfile
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent

# pip's wording when the package index cannot be reached (then the test is skipped: a fresh
# machine without network cannot install anything; any other install failure is a failure)
OFFLINE = re.compile(r"NewConnectionError|Temporary failure in name resolution|Network is "
                     r"unreachable|No route to host|Failed to establish a new connection|"
                     r"ProxyError|ConnectTimeoutError|Read timed out|SSLError")

# (Rn + d) || (Rn - d) = (Rn^2 - d^2)/(2 Rn) is not monotone in d over a box containing
# d = 0. With two such parts (d and e) in series the exact one-variable path does not apply,
# so the true extremes need the bounded interior search (scipy) of tolerance.py.
# rth = Rn - (d^2 + e^2)/(2 Rn): maximum at d = e = 0, Rn = 1010 ohm (1010 ohm); minimum at
# d = 60 ohm, e = 120 ohm, Rn = 990 ohm (990 - 18000/1980 ohm). Closed forms, worked by hand.
NON_MONOTONE = """nominal Rn = 1 kohm ±1%
nominal d = 10 ohm ±500%
nominal e = 20 ohm ±500%
resistor R1 between a and b = Rn + d
resistor R2 between a and b = Rn - d
resistor R3 between b and gnd = Rn + e
resistor R4 between b and gnd = Rn - e
port p between a and gnd
find tolerance of resistance at p
"""


def base_python() -> str:
    """The interpreter this one's virtual environment (if any) was made from."""
    exe = getattr(sys, "_base_executable", None)
    if exe and os.path.exists(exe):
        return exe
    for name in ("python3", "python"):
        exe = os.path.join(sys.base_prefix, "bin", name)
        if os.path.exists(exe):
            return exe
    return sys.executable


def _clean_env(**extra):
    env = {k: v for k, v in os.environ.items()
           if k not in ("PYTHONPATH", "PYTHONHOME", "VIRTUAL_ENV", "PYTHONSTARTUP")}
    env.update(extra)
    return env


def _skip_if_offline(r, what):
    if r.returncode != 0 and OFFLINE.search(r.stdout + r.stderr):
        pytest.skip(f"{what}: the package index is not reachable: {r.stderr[-300:]}")


@pytest.fixture(scope="module")
def wheel(tmp_path_factory):
    out = tmp_path_factory.mktemp("wheel")
    r = subprocess.run([sys.executable, "-m", "pip", "wheel", "--no-deps", "-q", "-w", str(out),
                        str(ROOT)], capture_output=True, text=True, env=_clean_env())
    _skip_if_offline(r, "building the wheel (the build backend comes from the index)")
    assert r.returncode == 0, r.stderr[-2000:]
    return next(out.glob("derive-*.whl"))


@pytest.fixture(scope="module")
def installed(wheel, tmp_path_factory):
    """A venv from the base interpreter with the wheel and its dependencies installed."""
    venv = tmp_path_factory.mktemp("venv") / "env"
    r = subprocess.run([base_python(), "-m", "venv", str(venv)], capture_output=True,
                       text=True, env=_clean_env())
    assert r.returncode == 0, r.stderr[-2000:]
    py = venv / "bin" / "python"
    # no system site packages: the dependencies must come from the wheel's metadata
    r = subprocess.run([str(py), "-c", "import sys; print(sys.prefix != sys.base_prefix); "
                        "import importlib.util as u; print(u.find_spec('sympy') is None)"],
                       capture_output=True, text=True, env=_clean_env())
    assert r.stdout.split() == ["True", "True"], (r.stdout, r.stderr)
    r = subprocess.run([str(py), "-m", "pip", "install", "-q", "--disable-pip-version-check",
                        str(wheel)], capture_output=True, text=True, env=_clean_env())
    _skip_if_offline(r, "installing the dependencies")
    assert r.returncode == 0, r.stderr[-2000:]
    return venv


def test_wheel_contains_grammar_and_templates(wheel):
    names = zipfile.ZipFile(wheel).namelist()
    assert "derive/grammar/sheet.lark" in names
    assert "derive/templates/record.md.j2" in names
    assert any(n.endswith("entry_points.txt") for n in names)


def test_fresh_venv_runs_from_another_directory(installed, tmp_path):
    venv = installed
    work = tmp_path / "elsewhere"
    work.mkdir()
    shutil.copy(ROOT / "worked" / "strain_bridge.eqv", work / "bridge.eqv")
    env = _clean_env(TMPDIR=str(tmp_path))
    derive = str(venv / "bin" / "derive")
    # the worked bridge with every request it has, find tolerance included
    r = subprocess.run([derive, "record", "bridge.eqv", "--format", "json", "--samples",
                        "5000"], cwd=work, capture_output=True, text=True, env=env)
    assert r.returncode == 0, r.stderr
    rec = json.loads(r.stdout)
    vth = rec["results"][0]["quantities"]["vth"]["value"]
    # Wheatstone bridge, left minus right divider (handbook):
    # Vex*(Rb/(Ra+Rb) - Rg/(Rc+Rg)) with 5 V, 350, 350, 350, 350.7 ohm
    assert vth == pytest.approx(5 * (350 / 700 - 350.7 / 700.7), rel=1e-12)
    kinds = [res["request"] for res in rec["results"]]
    assert any(k.startswith("find tolerance") for k in kinds), kinds
    # the Markdown record with its figures, written beside it
    r = subprocess.run([derive, "record", "bridge.eqv", "-o", "bridge.md", "--samples",
                        "5000"], cwd=work, capture_output=True, text=True, env=env)
    assert r.returncode == 0, r.stderr
    assert any(p.suffix == ".png" for p in work.iterdir())
    # a non-monotone tolerance: the interior search runs (scipy at run time)
    (work / "nm.eqv").write_text(NON_MONOTONE, encoding="utf-8")
    r = subprocess.run([derive, "record", "nm.eqv", "--format", "json", "--samples", "2000",
                        "--timeout", "600"], cwd=work, capture_output=True, text=True, env=env)
    assert r.returncode == 0, r.stderr
    spread = json.loads(r.stdout)["results"][0]["spread"]
    assert "interior search" in spread["method"]
    # the closed forms above
    assert spread["high"] == pytest.approx(1010.0, rel=1e-9)
    assert spread["low"] == pytest.approx(990 - 18000 / 1980, rel=1e-9)
    # the installed copy is the one that ran, not the checkout
    r = subprocess.run([str(venv / "bin" / "python"), "-c",
                        "import derive; print(derive.__file__)"], cwd=work,
                       capture_output=True, text=True, env=env)
    assert str(venv) in r.stdout
