"""Every worked sheet: all steps verified, committed Markdown up to date, PDF with results."""
import re
import shutil
import subprocess
from pathlib import Path

import pytest
from markdown_it import MarkdownIt
from mdit_py_plugins.dollarmath import dollarmath_plugin

import derive
from derive.export import latex as export_latex
from derive.export.markdown import record_markdown
from derive.export.view import view

WORKED = Path(__file__).resolve().parent.parent / "worked"
SHEETS = sorted(WORKED.glob("*.eqv"))
HAVE_TEX = export_latex._tex_tool() is not None and shutil.which("pdftotext") is not None
needs_tex = pytest.mark.skipif(not HAVE_TEX, reason="TeX Live (latexmk/pdflatex) or pdftotext "
                               "not installed: apt-get install texlive-latex-recommended "
                               "texlive-latex-extra texlive-science latexmk poppler-utils")
_cache = {}


def record(sheet):
    if sheet not in _cache:
        _cache[sheet] = derive.derive_file(str(sheet))
    return _cache[sheet]


def test_there_are_worked_sheets():
    assert len(SHEETS) >= 4


@pytest.mark.parametrize("sheet", SHEETS, ids=lambda p: p.stem)
def test_every_step_verifies(sheet):
    rec = record(sheet)
    steps = [s for r in rec.results for s in r.steps if not isinstance(s, dict)]
    assert steps
    for s in steps:
        assert s.verify(), f"{sheet.name}: step not verified: {s.text}"
    assert view(rec)["all_verified"]


@pytest.mark.parametrize("sheet", SHEETS, ids=lambda p: p.stem)
def test_committed_markdown_is_current(sheet, tmp_path):
    committed = sheet.with_suffix(".md")
    assert committed.exists(), f"{committed.name} missing: run python worked/regenerate.py"
    fresh = record_markdown(record(sheet), None, str(tmp_path / committed.name))
    assert fresh == committed.read_text(encoding="utf-8"), (
        f"{committed.name} has drifted from what derive now writes: run "
        "`python worked/regenerate.py` and review and commit the changed records")


def _math_spans(md):
    md_parser = MarkdownIt("commonmark").enable("table").use(dollarmath_plugin)
    out = []

    def walk(tokens):
        for t in tokens:
            if t.type.startswith("math"):
                out.append((t.type, t.content))
            if t.children:
                walk(t.children)
    walk(md_parser.parse(md))
    return out


def test_markdown_math_spans_found():
    spans = _math_spans(SHEETS[0].with_suffix(".md").read_text(encoding="utf-8"))
    assert any(k == "math_block" for k, _ in spans) and any(k == "math_inline" for k, _ in spans)


@needs_tex
def test_every_math_span_compiles(tmp_path):
    body = []
    for sheet in SHEETS:
        for kind, content in _math_spans(sheet.with_suffix(".md").read_text(encoding="utf-8")):
            body.append(f"\\[{content}\\]" if kind == "math_block" else f"${content}$\n\n")
    assert len(body) > 50
    doc = ("\\documentclass{article}\\usepackage{amsmath,amssymb}\\begin{document}\n" +
           "\n".join(body) + "\n\\end{document}\n")
    (tmp_path / "m.tex").write_text(doc)
    p = subprocess.run(["pdflatex", "-no-shell-escape", "-interaction=nonstopmode",
                        "-halt-on-error", "m.tex"], cwd=tmp_path, capture_output=True,
                       text=True)
    assert p.returncode == 0, [l for l in p.stdout.splitlines() if l.startswith("!")]


def _norm(t):
    t = t.replace("\u2212", "-").replace("\u03bc", "\u00b5").replace("\u2126", "\u03a9")
    return " ".join(t.split())


@needs_tex
@pytest.mark.parametrize("sheet", SHEETS, ids=lambda p: p.stem)
def test_pdf_contains_every_result(sheet, tmp_path):
    rec = record(sheet)
    pdf = export_latex.render(rec, "pdf")
    out = tmp_path / "r.pdf"
    out.write_bytes(pdf)
    text = _norm(subprocess.run(["pdftotext", str(out), "-"], capture_output=True,
                                text=True, check=True).stdout)
    values = [q["value"] or "no value (symbolic)" for r in view(rec)["results"]
              for q in r["quantities"]]
    assert values
    for v in values:
        assert _norm(v) in text, f"{sheet.name}: {v} not in the PDF"
