"""The notebook face of the public API: short reprs, Jupyter display methods, every format
the command line writes, and ``derive --version``."""
from __future__ import annotations

import base64
import re
import shutil
import subprocess
import sys
import tomllib
from pathlib import Path

import pytest
from markdown_it import MarkdownIt
from mdit_py_plugins.dollarmath import dollarmath_plugin

import derive
from derive.cli import main

ROOT = Path(__file__).resolve().parent.parent

# Divider with a sensitivity figure: vth = V*R2/(R1 + R2) = 10*4/5 = 8 V,
# rth = R1*R2/(R1 + R2) = 800 ohm (handbook voltage-divider closed forms, worked by hand).
DIVIDER = """title "Divider"
voltage source V between a and gnd = 10 V
resistor R1 between a and b = 1 kohm ±1%
resistor R2 between b and gnd = 4 kohm ±1%
port out between b and gnd
find thevenin at out
find sensitivity of vth at out
"""


@pytest.fixture(scope="module")
def record():
    return derive.derive_text(DIVIDER, "divider.eqv")


def test_reprs_are_short_and_name_what_was_asked(record):
    r = repr(record)
    assert len(r) < 300
    assert "Divider" in r and "find thevenin at out" in r and "2 result(s)" in r
    res = repr(record.results[0])
    assert "vth" in res and "rth" in res and len(res) < 200
    q = repr(record.results[0].quantities["vth"])
    assert "R2*V/(R1 + R2)" in q and "8" in q


def test_quantity_latex_shows_the_value(record):
    tex = record.results[0].quantities["rth"]._repr_latex_()
    assert tex.startswith("$") and tex.endswith("$")
    assert r"\frac{R_{1} R_{2}}{R_{1} + R_{2}}" in tex
    assert "800" in tex            # 1 k * 4 k / 5 k = 800 ohm, worked by hand above


def test_record_markdown_renders_with_inline_figures(record):
    md = record._repr_markdown_()
    html = MarkdownIt("commonmark").enable("table").use(dollarmath_plugin).render(md)
    assert "<table>" in html
    uris = re.findall(r"data:image/png;base64,([A-Za-z0-9+/=]+)", md)
    assert uris, "the sensitivity figure is embedded"
    for u in uris:
        assert base64.b64decode(u)[:8] == b"\x89PNG\r\n\x1a\n"
    # the request result displays itself too
    part = record.results[0]._repr_markdown_()
    assert "find thevenin at out" in MarkdownIt("commonmark").use(dollarmath_plugin).render(part)


def test_api_writes_code_that_computes_the_closed_form(record):
    src = record.to_code("python")
    scope: dict = {}
    exec(compile(src, "generated.py", "exec"), scope)     # our own generated module
    fns = {k: v for k, v in scope.items() if callable(v) and k.startswith("vth")}
    assert fns, src
    (fn,) = fns.values()
    # vth = V*R2/(R1 + R2), arguments by name
    assert fn(V=12.0, R1=2000.0, R2=1000.0) == pytest.approx(4.0)
    assert "double" in record.to_code("c")


def test_api_latex_and_pdf(record):
    tex = record.to_latex()
    assert r"\begin{document}" in tex and "Divider" in tex
    if not (shutil.which("latexmk") or shutil.which("pdflatex")):
        pytest.skip("TeX Live is not installed")
    pdf = record.to_pdf()
    assert pdf[:5] == b"%PDF-"


def test_version_matches_the_project(capsys):
    with open(ROOT / "pyproject.toml", "rb") as f:
        version = tomllib.load(f)["project"]["version"]
    assert derive.__version__ == version
    assert main(["--version"]) == 0
    assert capsys.readouterr().out.strip() == f"derive {version}"
    r = subprocess.run([sys.executable, "-m", "derive", "--version"], capture_output=True,
                       text=True, cwd=ROOT)
    assert r.returncode == 0 and r.stdout.strip() == f"derive {version}"
