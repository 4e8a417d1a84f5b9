"""The LaTeX and PDF record: escaping, units, compilation."""
import shutil
import subprocess

import pytest

import derive
from derive.export import latex as export_latex
from derive.cli import main

HAVE_TEX = export_latex._tex_tool() is not None and shutil.which("pdftotext") is not None
needs_tex = pytest.mark.skipif(not HAVE_TEX, reason="TeX Live (latexmk/pdflatex) or pdftotext "
                               "not installed: apt-get install texlive-latex-recommended "
                               "texlive-latex-extra texlive-science latexmk poppler-utils")

SHEET = """voltage source V between a and gnd = 10 V
resistor R1 between a and b = 1 kohm
resistor R2 between b and gnd = 4 kohm
port out between b and gnd
find thevenin at out
"""
NASTY = r"\input{/etc/passwd} \write18{touch pwned} $x$ 50% a&b #1 a_b {} <script> ~^"


def test_text_is_escaped():
    t = str(export_latex.text(NASTY))
    assert r"\input" not in t and r"\write18" not in t
    assert r"\textbackslash{}input\{/etc/passwd\}" in t
    for raw, esc in (("%", r"\%"), ("&", r"\&"), ("#", r"\#"), ("$", r"\$"), ("_", r"\_")):
        assert esc in t


def test_si_values():
    assert export_latex.si_value("4.70 kΩ") == r"\SI{4.70}{\kilo\ohm}"
    assert export_latex.si_value("-12.5 mV") == r"\SI{-12.5}{\milli\volt}"
    assert export_latex.si_value("47.4 mV/V") == r"\SI{47.4}{\milli\volt\per\volt}"


def test_tex_source_has_amsmath_siunitx_and_values():
    rec = derive.derive_text(SHEET)
    tex = export_latex.render(rec, "tex")
    assert r"\usepackage{amsmath}" in tex and r"\usepackage{siunitx}" in tex
    assert r"\SI{8.000}{\volt}" in tex and r"\SI{800.0}{\ohm}" in tex   # 10*4/5 V, 1k||4k
    assert r"\begin{aligned}" in tex


@needs_tex
def test_pdf_keeps_user_text_literal(tmp_path):
    sheet = f'title "{NASTY}"\nnote "{NASTY}"\n' + SHEET
    src = tmp_path / "s.eqv"
    src.write_text(sheet)
    out = tmp_path / "r.pdf"
    assert main(["record", str(src), "-o", str(out)]) == 0
    assert not (tmp_path / "pwned").exists()
    text = subprocess.run(["pdftotext", "-layout", str(out), "-"], capture_output=True,
                          text=True, check=True).stdout
    assert "root:" not in text                      # /etc/passwd was not read in
    flat = " ".join(text.split())
    assert r"\input{/etc/passwd}" in flat and r"\write18{touch pwned}" in flat
    assert "50% a&b #1 a_b {} <script>" in flat
    assert "8.000 V" in flat


def test_missing_tex_is_a_clear_error_and_tex_is_written(tmp_path, monkeypatch, capsys):
    src = tmp_path / "s.eqv"
    src.write_text(SHEET)
    monkeypatch.setattr(export_latex, "_tex_tool", lambda: None)
    rc = main(["record", str(src), "-o", str(tmp_path / "r.pdf")])
    err = capsys.readouterr().err
    assert rc == 2 and "TeX Live" in err and "latexmk" in err
    assert (tmp_path / "r.tex").read_text().startswith(r"\documentclass")
    assert not (tmp_path / "r.pdf").exists()


@needs_tex
def test_summary_of_an_impedance_with_s_typesets_ohm(tmp_path):
    """The summary's frequency line writes the DC value of an impedance with its unit (kΩ)
    inside math: it must reach the PDF (it stopped TeX with 'Unicode character Ω')."""
    src = tmp_path / "z.eqv"
    src.write_text("""voltage source Vs between in and gnd = 1 V
resistor Rs between in and a = 50 ohm
inductor L1 between a and b = 100 uH
capacitor C1 between b and gnd = 10 nF
resistor Rl between b and gnd = 10 kohm
port out between b and gnd
find impedance at out
""")
    out = tmp_path / "z.pdf"
    assert main(["record", str(src), "-o", str(out)]) == 0
    text = subprocess.run(["pdftotext", str(out), "-"], capture_output=True, text=True,
                          check=True).stdout
    flat = " ".join(text.split())
    # at DC the inductor shorts, the capacitor opens: Rs || Rl = 50*10000/10050 = 49.75 ohm
    assert "49.75 \u03a9" in flat or "49.75 \u2126" in flat      # Greek omega or ohm sign
