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


HAVE_PDFFONTS = shutil.which("pdffonts") is not None


@needs_tex
@pytest.mark.parametrize("sheet", SHEETS, ids=lambda p: p.stem)
def test_pdf_typesetting(sheet, tmp_path):
    """Issue 12, item 1: vector fonts only, no line past the margin (an overfull box over
    5 pt in the LaTeX log), and every character of the record's text reaches the PDF."""
    rec = record(sheet)
    source = export_latex.latex_source(rec, figures_dir=str(tmp_path))
    export_latex.compile_pdf(source, str(tmp_path))
    log = (tmp_path / "record.log").read_text(encoding="utf-8", errors="replace")
    over = [float(n) for n in re.findall(r"Overfull \\hbox \(([\d.]+)pt too wide\)", log)]
    assert not [n for n in over if n > 5], f"{sheet.name}: overfull boxes {over}"
    assert "?" not in source.split(r"\begin{document}")[1].replace("?)", ")"), \
        "a character was replaced by '?'"
    pdf = tmp_path / "record.pdf"
    text = subprocess.run(["pdftotext", str(pdf), "-"], capture_output=True, text=True,
                          check=True).stdout
    # every non-ASCII character of the steps' prose is in the PDF's text layer
    wanted = {ch for r in view(rec)["results"] for s in r["steps"] for ch in s["text"]
              if ord(ch) > 127 and not ch.isspace()}
    norm = _norm(text)
    # a superscript digit is set as a raised digit, which the text layer gives as the digit
    sup = {"²": "2", "³": "3"}
    missing = {ch for ch in wanted if _norm(sup.get(ch, ch)) not in norm}
    assert not missing, f"{sheet.name}: {sorted(missing)} not in the PDF text"
    if not HAVE_PDFFONTS:
        pytest.skip("pdffonts (poppler-utils) not installed: font types not checked")
    fonts = subprocess.run(["pdffonts", str(pdf)], capture_output=True, text=True,
                           check=True).stdout
    assert "Type 3" not in fonts, fonts


def test_greek_and_symbols_are_typeset_not_replaced():
    # characters the records' prose uses (issue 12): none may become "?"
    for ch in "ωΣ→∞±µΩαβΔθπτφ−√∂":
        t = str(export_latex.text(ch))
        assert "?" not in t and t != ch, ch


def test_long_equations_are_broken():
    # the preamp's gain has a 12-term factor in its denominator: every displayed line of it
    # is short enough to fit the page (printing.visual_len, calibrated on A4 at 11 pt)
    from derive.export.printing import visual_len
    rec = record(WORKED / "preamp_stage.eqv")
    lines = [l for r in view(rec)["results"] for q in r["quantities"] for l in q["lines"]]
    assert len(lines) > 10
    assert max(visual_len(l) for l in lines) < 90


def test_large_matrix_is_listed_by_entries():
    # a six-node resistor ladder with bridging resistors (so it does not reduce by series
    # and parallel steps): its nodal matrix is shown as its nonzero entries, one a line
    text = "voltage source V1 between n0 and gnd = 1 V\n" + "".join(
        f"resistor Ra{k} between n{k} and n{k + 1} = 1k\nresistor Rb{k} between n{k + 1} "
        f"and gnd = 2k\nresistor Rx{k} between n{k} and n{k + 2} = 3k\n"
        for k in range(5)) + "resistor Ra5 between n5 and n6 = 1k\n" \
        "resistor Rb5 between n6 and gnd = 2k\nport p between n6 and gnd\n" \
        "find thevenin at p\n"
    rec = derive.derive_text(text)
    eqs = [e for r in view(rec)["results"] for s in r["steps"] for e in s["equations"]
           if any(r"\mathbf{A}" in l for l in e["lines"])]
    assert eqs, "no matrix equation listed by entries"
    lines = eqs[0]["lines"]
    assert not any(r"\begin{matrix}" in l for l in lines)
    # 7 node rows with at least 3 entries each, and the source's border row and column
    assert sum(l.startswith("A_{") for l in lines) >= 23


_ENTERED = re.compile(r"^\s*(?:voltage source|current source|resistor|capacitor|inductor)\s+"
                      r"(\w+)\b.*?=\s*(-?[0-9.]+)\s*([fpnumkMGT]?)(?:ohm|V|A|F|H)\b", re.M)


@pytest.mark.parametrize("sheet", SHEETS, ids=lambda p: p.stem)
def test_element_table_keeps_entered_digits(sheet):
    """Issue 12, item 2: the element table shows each value as the sheet enters it (the
    reference is the sheet's own text: a 350.7 ohm gauge is 350.7 Ω, not 351 Ω)."""
    entered = {m.group(1): (m.group(2), m.group(3).replace("u", "µ"))
               for m in _ENTERED.finditer(sheet.read_text(encoding="utf-8"))}
    rows = {e["name"].split(".")[-1]: e["nominal"] for e in view(record(sheet))["elements"]
            if "." not in e["name"]}
    checked = 0
    for name, (number, prefix) in entered.items():
        if name not in rows:
            continue
        shown = rows[name]
        assert shown.split(" ")[0] == number and shown.split(" ")[1][:len(prefix)] == prefix, \
            f"{sheet.name}: {name} entered as {number} {prefix}…, shown as {shown}"
        checked += 1
    assert checked


def test_bridge_gauge_shown_as_entered():
    rows = {e["name"]: e["nominal"] for e in view(record(WORKED / "strain_bridge.eqv"))["elements"]}
    assert rows["Rg"] == "350.7 Ω" and rows["Vex"] == "5 V"


def test_summary_carries_every_answer():
    """Issue 12, item 3: the Results summary (first page) holds the tolerance band, the
    three largest sensitivities, the inverted formula, each verdict and f0/Q."""
    thermistor = view(record(WORKED / "thermistor_stage.eqv"))
    items = {r["request"]: r["summary"] for r in thermistor["results"]}
    verdicts = [i["text"] for k, v in items.items() if k.startswith("check") for i in v]
    # rth = Rpu || Rt holds exactly; vth = Vref*Rt/Rpu does not (hand calculation)
    assert verdicts[0].startswith("holds") and verdicts[1].startswith("does not hold")
    solve = items["solve vth at divider for Rt"]
    assert solve[0]["label"] == "inverted formula" and "10.00 kΩ" in solve[0]["text"]
    bridge = {r["request"]: r["summary"] for r in view(record(WORKED / "strain_bridge.eqv"))
              ["results"]}
    band = bridge["find tolerance of vth at out"][0]["text"]
    assert "mV" in band and "e-" not in band
    sens = bridge["find sensitivity of vth at out"][0]["text"]
    assert len(sens.split(",")) == 3
    # Sallen-Key unity-gain low pass: f0 = 1/(2*pi*sqrt(R1*R2*C1*C2)) (textbook closed
    # form), 4.7k, 4.7k, 10n, 4.7n -> computed here independently
    import math
    f0 = 1 / (2 * math.pi * math.sqrt(4.7e3 * 4.7e3 * 10e-9 * 4.7e-9))
    aa = view(record(WORKED / "antialias_filter.eqv"))["results"][0]["summary"]
    freq = [i["math"] for i in aa if i["label"] == "frequency response"][0]
    assert f"{f0 / 1e3:.3f} kHz" in freq and "Q = " in freq


def test_tolerance_prose_in_engineering_notation():
    rec = record(WORKED / "strain_bridge.eqv")
    texts = [s["text"] for r in view(rec)["results"] for s in r["steps"]
             if "worst case" in s["text"] or "sum-square" in s["text"]]
    assert texts
    for t in texts:
        assert not re.search(r"\d e[+-]?\d|\de-\d|0\.00\d", t), t
