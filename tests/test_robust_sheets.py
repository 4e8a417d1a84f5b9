"""Robustness II, items 3, 4, 6-9: valid sheets that crashed, silent wrong or misleading
answers, the error display. Every sheet here goes through the command line
(``derive record FILE --format json``) and must either answer (exit 0, right values) or
refuse with a located ``FILE:LINE:COL: error: ...`` whose line is right (exit 2); never
exit 3 or a traceback. Each test names the defect it guards against."""
from __future__ import annotations

import json
import re

import pytest

from derive.cli import main

LOCATED = re.compile(r"^(?P<file>[^\n]*):(?P<line>\d+):(?P<col>\d+): error: (?P<msg>[^\n]+)")


def record(tmp_path, capsys, text, fmt="json", name="s.eqv"):
    """(status, parsed JSON or text, stderr) of ``derive record`` on ``text``."""
    p = tmp_path / name
    p.write_text(text, encoding="utf-8", newline="")
    capsys.readouterr()
    status = main(["record", str(p), "--format", fmt])
    out, err = capsys.readouterr()
    assert status in (0, 2), f"exit {status}:\n{err}"
    assert "Traceback" not in err and "internal error" not in err
    if status == 0 and fmt == "json":
        out = json.loads(out)
    return status, out, err


def located(err, line):
    """The located message of ``err``; asserts it names ``line`` and shows that line."""
    m = LOCATED.match(err)
    assert m, err
    assert int(m.group("line")) == line, err
    return m.group("msg"), err.splitlines()


def result(doc, request):
    return next(r for r in doc["results"] if r["request"] == request)


# ------------------------------------------------------------------ 4. silent wrong answers
BLOCK_NOMINAL = """block div (hi, mid, lo)
  nominal R = 10 kohm ±1%
  resistor Rt between hi and mid = R
  resistor Rb between mid and lo = R
end
voltage source V1 between top and gnd = 10 V
use div d1 (top, out, gnd)
port p between out and gnd
find rth at p
"""


def test_nominal_inside_a_block_is_refused_at_its_line(tmp_path, capsys):
    # before: the nominal was ignored (rth value null, R left out of the sensitivities)
    status, _, err = record(tmp_path, capsys, BLOCK_NOMINAL)
    assert status == 2
    msg, lines = located(err, 2)
    assert "nominal" in msg and "'R'" in msg and "top level" in msg
    assert lines[1].strip() == "nominal R = 10 kohm ±1%"


def test_nominal_moved_to_the_top_level_is_honoured(tmp_path, capsys):
    text = BLOCK_NOMINAL.replace("  nominal R = 10 kohm ±1%\n", "") + "nominal R = 10 kohm ±1%\n"
    status, doc, _ = record(tmp_path, capsys, text)
    assert status == 0
    # two equal resistors R in parallel seen from the tap: R/2 = 5 kohm (common practice)
    assert result(doc, "find rth at p")["quantities"]["rth"]["value"] == pytest.approx(5000.0)


SINGULAR = """voltage source V1 between in and gnd = 1 V
resistor R1 between in and out = Ra - Rb
resistor R2 between out and gnd = 1 kohm
nominal Ra = 1 kohm
nominal Rb = 2 kohm
port p between out and gnd
find vth at p
find rth at p
"""


def test_circuit_singular_at_nominal_says_undefined(tmp_path, capsys):
    # vth = R2 V1/(R2 + Ra - Rb): at Ra - Rb = -1 kohm = -R2 the denominator is zero
    # (divider algebra, common practice). before: "inf V" with no warning
    status, doc, _ = record(tmp_path, capsys, SINGULAR)
    assert status == 0
    for req, name in (("find vth at p", "vth"), ("find rth at p", "rth")):
        q = result(doc, req)["quantities"][name]
        assert q["value"] is None
        assert any("unbounded or undefined at nominal" in n for n in q["notes"])
    status, md, _ = record(tmp_path, capsys, SINGULAR, fmt="md")
    assert "inf V" not in md and "inf Ω" not in md
    assert "vth is unbounded or undefined at nominal values" in md


def test_zero_ohm_short_across_the_source_is_not_called_symbolic(tmp_path, capsys):
    # a 0 ohm short across V1: V1 drives an unbounded current (V1/R0 with R0 = 0), while
    # vth is the divider value 10·2/3 V, the short being in parallel with the ideal source
    # (common practice, no source). before: "no value (symbolic)" though all had values
    text = ("voltage source V1 between top and gnd = 10 V\n"
            "resistor R0 between top and gnd = 0 ohm\n"
            "resistor R1 between top and out = 1 kohm\n"
            "resistor R2 between out and gnd = 2 kohm\n"
            "port p between out and gnd\nfind vth at p\nfind current through V1\n")
    status, doc, _ = record(tmp_path, capsys, text)
    assert status == 0
    assert result(doc, "find vth at p")["quantities"]["vth"]["value"] == pytest.approx(20 / 3)
    cur = result(doc, "find current through V1")["quantities"]["current"]
    assert cur["value"] is None and "unbounded" in " ".join(cur["notes"])
    status, md, _ = record(tmp_path, capsys, text, fmt="md")
    assert "no value (symbolic)" not in md and "current is unbounded" in md


def test_pole_inside_the_tolerance_box_is_refused(tmp_path, capsys):
    # vth = R2 V1/(R2 + Ra - Rb) = 1k/(1k + Ra - Rb): at nominal 1k + 1k - 1.9k = 100 ohm > 0,
    # at Ra = 900, Rb = 2090 it is -190 ohm < 0, so the denominator vanishes inside the box
    # (intermediate value theorem). before: finite "extremes" of about ±1e9 V
    text = SINGULAR.replace("nominal Ra = 1 kohm", "nominal Ra = 1 kohm ±10%").replace(
        "nominal Rb = 2 kohm", "nominal Rb = 1900 ohm ±10%").replace(
        "find rth at p\n", "find tolerance of vth at p\n")
    status, _, err = record(tmp_path, capsys, text)
    assert status == 2
    msg, lines = located(err, 8)
    assert "unbounded on the box" in msg and "changes sign" in msg
    assert lines[1].strip() == "find tolerance of vth at p"


def test_box_without_pole_still_gives_extremes(tmp_path, capsys):
    # same circuit with Rb = 500 ohm ±10%: the denominator 1k + Ra - Rb stays >= 1k + 900 - 550
    # > 0; vth is decreasing in Ra and increasing in Rb, so the extremes are the corners
    # 1000/(1000+1100-450) and 1000/(1000+900-550) (hand algebra)
    text = SINGULAR.replace("nominal Ra = 1 kohm", "nominal Ra = 1 kohm ±10%").replace(
        "nominal Rb = 2 kohm", "nominal Rb = 500 ohm ±10%").replace(
        "find rth at p\n", "find tolerance of vth at p\n")
    status, doc, _ = record(tmp_path, capsys, text)
    assert status == 0
    sp = result(doc, "find tolerance of vth at p")["spread"]
    assert sp["low"] == pytest.approx(1000 / 1650) and sp["high"] == pytest.approx(1000 / 1350)


# ------------------------------------------------------------------ 3. valid sheets that crashed
def test_model_of_a_lone_series_resistor(tmp_path, capsys):
    # a series resistor R1 between the ports: with the output open no current flows, so rin
    # is infinite; gain 1; rout = R1 with the input held at zero (common practice, no
    # source). before: internal error (AttributeError) on the loaded input resistance
    text = ("voltage source Vs between in and gnd = 1 V\n"
            "resistor R1 between in and out = 1 kohm\n"
            "port pin between in and gnd\nport pout between out and gnd\n"
            "find model from pin to pout\n")
    status, doc, _ = record(tmp_path, capsys, text)
    assert status == 0
    r = result(doc, "find model from pin to pout")
    assert r["quantities"]["gain"]["value"] == pytest.approx(1.0)
    assert r["quantities"]["rout"]["value"] == pytest.approx(1000.0)
    assert "rin" not in r["quantities"] and r["infinite"] == ["rin"]
    assert r["loaded_rin"]["open"] is None


def test_square_root_value_in_an_op_amp_circuit(tmp_path, capsys):
    # non-inverting amplifier: gain = 1 + Rf/Rg = 1 + sqrt(4e6)/1e3 = 3 (handbook form of the
    # ideal non-inverting stage). before: "internal check failed" (the random-point check
    # could not evaluate sqrt at a rational point)
    text = ("voltage source Vin between inp and gnd = 1 V\n"
            "opamp U1 inputs inp, inn output out\n"
            "resistor Rf between out and inn = sqrt(x)\n"
            "resistor Rg between inn and gnd = 1 kohm\n"
            "nominal x = 4 Mohm\nport p between out and gnd\nfind gain from Vin to p\n")
    status, doc, _ = record(tmp_path, capsys, text)
    assert status == 0
    r = result(doc, "find gain from Vin to p")
    assert r["quantities"]["gain"]["value"] == pytest.approx(3.0)
    assert all(st["verified"] for st in r["steps"])


@pytest.mark.parametrize("value, gain", [
    ("sqrt(a*b)", 1 + 2000 / 1000),             # sqrt(4k*1k) = 2k
    ("sqrt(a + b)", 1 + 5000 ** 0.5 / 1000),
    ("sqrt(a) + sqrt(a*b)", 1 + (4000 ** 0.5 + 2000) / 1000)])
def test_compound_square_roots_in_an_op_amp_circuit(tmp_path, capsys, value, gain):
    # gain = 1 + Rf/Rg (ideal non-inverting stage, handbook form), a = 4k, b = 1k
    text = ("voltage source Vin between inp and gnd = 1 V\n"
            "opamp U1 inputs inp, inn output out\n"
            f"resistor Rf between out and inn = {value}\n"
            "resistor Rg between inn and gnd = 1 kohm\n"
            "nominal a = 4 kohm\nnominal b = 1 kohm\nport p between out and gnd\n"
            "find gain from Vin to p\n")
    status, doc, _ = record(tmp_path, capsys, text)
    assert status == 0
    r = result(doc, "find gain from Vin to p")
    assert r["quantities"]["gain"]["value"] == pytest.approx(gain)
    assert all(st["verified"] for st in r["steps"])


def test_check_rth_at_a_port_across_a_voltage_source(tmp_path, capsys):
    # rth across an ideal voltage source is 0 (sources zeroed: a short). before: internal
    # error (ValueError "infinite result") while wording the diagnosis of the false claim
    text = ("voltage source V1 between a and gnd = 5 V\n"
            "resistor R1 between a and b = 1 kohm\nresistor R2 between b and gnd = 1 kohm\n"
            "port p between a and gnd\n"
            "check rth at p equals 0\ncheck rth at p equals R1\n")
    status, doc, _ = record(tmp_path, capsys, text)
    assert status == 0
    assert result(doc, "check rth at p equals 0")["holds"] is True
    false = result(doc, "check rth at p equals R1")
    assert false["holds"] is False and "identically 0" in false["diagnosis"]
    assert false["counterexample"]["quantity"] == 0.0
    assert false["counterexample"]["claim"] == pytest.approx(1000.0)


def test_solve_where_the_nominal_value_is_infinite():
    # vth = R2 V1/(R2 + Ra - Rb) is infinite at Ra - Rb = -R2 (nominal); solving
    # vth (R2 + Ra - Rb) = R2 V1 for R2 gives R2 = vth (Ra - Rb)/(V1 - vth) (hand algebra).
    # before: internal error (TypeError: complex to float)
    import sympy
    from derive import derive_text
    text = SINGULAR.replace("find vth at p\nfind rth at p\n", "solve vth at p for R2\n")
    rec = derive_text(text, "s.eqv")
    r = rec.results[0]
    vth, V1, Ra, Rb = sympy.symbols("vth V1 Ra Rb")
    assert sympy.simplify(r.quantities["R2"].expr - vth * (Ra - Rb) / (V1 - vth)) == 0
    assert r.extra["measured"]["value"] is None
    assert any("no finite real value" in n for n in r.notes)


def test_solve_for_a_symbol_under_a_square_root_is_located(tmp_path, capsys):
    # before: internal error (PolynomialError)
    text = ("voltage source V1 between in and gnd = 1 V\n"
            "resistor R1 between in and out = sqrt(x)\n"
            "resistor R2 between out and gnd = 1 kohm\n"
            "nominal x = 1 Mohm\nport p between out and gnd\nsolve vth at p for x\n")
    status, _, err = record(tmp_path, capsys, text)
    assert status == 2
    msg, lines = located(err, 6)
    assert "not a rational function of x" in msg
    assert lines[1].strip() == "solve vth at p for x"


def test_series_capacitors_whose_values_sum_to_zero(tmp_path, capsys):
    # C1 in series with C2 = -C1: C1 C2/(C1 + C2) is infinite, the pair is a short, so the
    # normalised frequency form has no value at nominal; the record still answers.
    # before: internal error (LinAlgError in the roots at nominal values)
    text = ("voltage source V1 between in and gnd = 1 V\n"
            "capacitor C1 between in and m = 1 uF\ncapacitor C2 between m and out = -1 uF\n"
            "resistor R1 between out and gnd = 1 kohm\nport p between out and gnd\n"
            "find vth at p\nfind gain from V1 to p\n")
    status, doc, _ = record(tmp_path, capsys, text)
    assert status == 0
    f = result(doc, "find vth at p")["frequency"]["vth"]
    assert f["poles_value"] is None


def test_value_imaginary_at_nominal_is_located(tmp_path, capsys):
    # sqrt(-1 Mohm) is 1000j: not a resistance. before: internal error (complex to float)
    text = ("voltage source V1 between in and gnd = 1 V\n"
            "resistor R1 between in and out = sqrt(x)\n"
            "resistor R2 between out and gnd = 1 kohm\n"
            "nominal x = -1 Mohm\nport p between out and gnd\nfind vth at p\n"
            "find sensitivity of vth at p\n")
    status, _, err = record(tmp_path, capsys, text)
    assert status == 2
    msg, lines = located(err, 2)
    assert "not a real number at nominal values" in msg
    assert lines[1].strip() == "resistor R1 between in and out = sqrt(x)"


def test_false_claim_whose_counterexample_is_not_real(tmp_path, capsys):
    # V1 sqrt(-R1/R2) is imaginary at every positive point, the divider's vth = 2/3 V real:
    # the counterexample gives the claim as [real, imaginary] = [0, sqrt(1/2)] at nominal.
    # before: internal error (formatting None)
    text = ("voltage source V1 between in and gnd = 1 V\n"
            "resistor R1 between in and out = 1 kohm\nresistor R2 between out and gnd = 2 kohm\n"
            "port p between out and gnd\ncheck vth at p equals V1*sqrt(-R1/R2)\n")
    status, doc, _ = record(tmp_path, capsys, text)
    assert status == 0
    r = result(doc, "check vth at p equals V1*sqrt(-R1/R2)")
    c = r["counterexample"]
    assert r["holds"] is False and c["claim"] is None
    assert c["quantity"] == pytest.approx(2 / 3)
    assert c["claim_complex"] == pytest.approx([0.0, 0.5 ** 0.5])
    status, md, _ = record(tmp_path, capsys, text, fmt="md")
    assert "(not real)" in md


# ------------------------------------------------------------------ 6. the error display
BASE = ("voltage source V1 between a and gnd = 5 V\n"
        "resistor R1 between a and gnd = 1k\nport p between a and gnd\n")


@pytest.mark.parametrize("sep", ["\u2028", "\u2029", "\x85", "\x0b", "\x0c", "\x1c", "\x1d",
                                 "\x1e"])
def test_unicode_line_separators_do_not_shift_the_caret(tmp_path, capsys, sep):
    # the lexer ends a line only at \n: a separator inside a comment is part of the
    # comment, so the bad request is on line 5. before: the line shown was line 5 of
    # str.splitlines, which counts the separator as a line break (one line off)
    text = f"# a{sep}b\n" + BASE + "find vth at q\n"
    status, _, err = record(tmp_path, capsys, text)
    assert status == 2
    msg, lines = located(err, 5)
    assert "unknown port 'q'" in msg
    assert lines[1] == "    find vth at q" and lines[2] == "    " + " " * 12 + "^"
    assert sep not in err


def test_lone_carriage_return_is_not_a_line_break(tmp_path, capsys):
    status, _, err = record(tmp_path, capsys, "# a\rb\n" + BASE + "find vth at p\n")
    assert status == 2
    msg, lines = located(err, 1)
    assert "carriage return" in msg and "\r" not in err
    assert lines[1] == "    # a\\x0db" and lines[2] == "       ^"


def test_control_characters_are_shown_escaped(tmp_path, capsys):
    status, _, err = record(tmp_path, capsys, BASE + "find vth at p\x1b[31mRED\x07\n")
    assert status == 2
    msg, lines = located(err, 4)
    assert not any(ord(c) < 32 and c != "\n" for c in err)      # nothing raw
    assert "\\x1b" in msg
    assert lines[1] == "    find vth at p\\x1b[31mRED\\x07"
    assert lines[2].index("^") == lines[1].index("\\x1b")        # caret under the escape


def test_a_very_long_line_is_shown_as_a_window_around_the_column(tmp_path, capsys):
    text = BASE + 'note "' + "y" * 3000 + '" $ zz\n'
    status, _, err = record(tmp_path, capsys, text)
    assert status == 2
    msg, lines = located(err, 4)
    assert "'$'" in msg
    shown, caret = lines[1], lines[2]
    assert len(shown) < 200 and shown.startswith("    ...")
    assert shown[caret.index("^")] == "$"
    # a long token in the message is cut too
    status, _, err = record(tmp_path, capsys, BASE + "find vth at p " + "x" * 5000 + "\n")
    assert status == 2 and len(err.splitlines()[0]) < 200


@pytest.mark.parametrize("digit", ["\u0665", "\u06f5", "\uff15", "\u0b6b"])
def test_digits_other_than_ascii_are_not_numbers(tmp_path, capsys, digit):
    # Arabic-Indic, extended Arabic-Indic, full-width and Oriya five. before: read as 5 V
    for value in (digit, "5" + digit):
        text = f"voltage source V1 between a and gnd = {value} V\n" + BASE.split("\n", 1)[1] \
            + "find vth at p\n"
        status, _, err = record(tmp_path, capsys, text)
        assert status == 2
        msg, lines = located(err, 1)
        assert "ASCII 0-9" in msg
        assert lines[2].index("^") - 4 == lines[1].index(digit) - 4


# ------------------------------------------------------------------ 7. PDF
def _have_tex():
    import shutil
    from derive.export import latex
    return latex._tex_tool() is not None and shutil.which("pdftotext") is not None


PDF_SHEET = ('title "Bad \x7f title \x85 here \x9b end"\n'
             "voltage source V1 between a and gnd = 5 V\n"
             "resistor pi between a and b = 1k\nresistor R2 between b and gnd = _\n"
             "nominal _ = 2k\nport p between b and gnd\nfind vth at p\n")


def test_latex_of_pi_and_underscore_symbols():
    import sympy
    from derive.export.printing import latex_name, to_latex
    assert latex_name("pi") == r"\mathit{pi}" and "\\pi" not in latex_name("Pi")
    assert latex_name("_") == r"\mathit{\_}"
    assert latex_name("beta") == r"\beta"                  # other Greek names stay Greek
    assert to_latex(sympy.pi * sympy.Symbol("pi")) == r"\pi \mathit{pi}"   # the constant is π


def test_latex_text_drops_del_and_c1_controls():
    from derive.export.latex import text
    assert str(text("a\x7fb\x85c\x9bd")) == "a?b?c?d"


@pytest.mark.skipif(not _have_tex(), reason="TeX Live or pdftotext not installed")
def test_pdf_with_control_characters_pi_and_underscore_builds(tmp_path, capsys):
    import subprocess
    src = tmp_path / "s.eqv"
    src.write_text(PDF_SHEET, encoding="utf-8")
    out = tmp_path / "r.pdf"
    # before: TeX "Text line contains an invalid character" (DEL, C1 in the title) and a
    # bare "_" in math mode
    assert main(["record", str(src), "-o", str(out)]) == 0
    text = subprocess.run(["pdftotext", "-layout", str(out), "-"], capture_output=True,
                          text=True, check=True).stdout
    assert "Bad ? title ? here ? end" in " ".join(text.split())
    assert "π" not in text
    # divider: 5 V * 2k/(1k + 2k) = 3.333 V (common practice)
    assert "3.333 V" in text


# ------------------------------------------------------------------ 8. step text
def test_source_transformation_quotient_is_unambiguous():
    # V behind x, x to ground: Thevenin V/2 behind x/2; plus R3 = x in series: V/2 behind
    # 3x/2, which the next move turns into a current source (V/2)/(3x/2). vth across R4 = y
    # is then V*y/(3x + 2y) (divider algebra, common practice)
    import sympy
    from derive import derive_text
    text = ("voltage source V between a and gnd\nresistor R1 between a and b = x\n"
            "resistor R2 between b and gnd = x\nresistor R3 between b and c = x\n"
            "resistor R4 between c and gnd = y\nport p between c and gnd\nfind vth at p\n")
    rec = derive_text(text, "s.eqv")
    r = rec.results[0]
    steps = " ".join(st.text for st in r.steps)
    assert "current source (V/2)/(3*x/2)" in steps
    assert "V/2/3*x/2" not in steps           # before: read as ((V/2)/3)*x/2
    V, x, y = sympy.symbols("V x y")
    assert sympy.simplify(r.quantities["vth"].expr - V * y / (3 * x + 2 * y)) == 0


def test_square_root_value_in_a_bridge_solved_by_nodal_analysis(tmp_path, capsys):
    # a bridge (no series-parallel reduction): Ra = sqrt(x) = 1 kohm. before: "internal
    # check failed" on the Cramer determinants (the random-point check met sqrt)
    import numpy as np
    text = ("voltage source V1 between t and gnd = 1 V\n"
            "resistor Ra between t and l = sqrt(x)\nresistor Rb between l and gnd = 1k\n"
            "resistor Rc between t and r = 1k\nresistor Rd between r and gnd = 2k\n"
            "resistor Rm between l and r = 3k\nnominal x = 1 Mohm\nport p between l and r\n"
            "find vth at p\nfind current through Rm\n")
    status, doc, _ = record(tmp_path, capsys, text)
    assert status == 0
    # reference: a nodal solve written here (numpy), nodes l and r
    Ra, Rb, Rc, Rd, Rm = 1e3, 1e3, 1e3, 2e3, 3e3
    G = np.array([[1 / Ra + 1 / Rb + 1 / Rm, -1 / Rm], [-1 / Rm, 1 / Rc + 1 / Rd + 1 / Rm]])
    vl, vr = np.linalg.solve(G, np.array([1 / Ra, 1 / Rc]))
    r = result(doc, "find vth at p")
    assert r["quantities"]["vth"]["value"] == pytest.approx(vl - vr)
    assert all(st["verified"] for st in r["steps"])
    cur = result(doc, "find current through Rm")["quantities"]["current"]["value"]
    assert cur == pytest.approx((vl - vr) / Rm)


# ------------------------------------------------------------------ the corpus
import os  # noqa: E402

CORPUS = os.path.join(os.path.dirname(os.path.abspath(__file__)), "corpus")
ROBUST = sorted(f for f in os.listdir(CORPUS) if f.startswith("robust_"))
_EXPECT = re.compile(r"^# expect: (0|2 line (\d+))$")


@pytest.mark.parametrize("name", ROBUST)
def test_corpus_sheet_keeps_the_exit_contract(name, capsys):
    """Every tests/corpus/robust_*.eqv says on its first line what it must give: exit 0,
    or exit 2 located at a given line (the sheets of the defects above, as files)."""
    path = os.path.join(CORPUS, name)
    with open(path, encoding="utf-8", newline="") as f:
        first = f.readline().rstrip("\n")
    m = _EXPECT.match(first)
    assert m, f"{name}: first line must be '# expect: 0' or '# expect: 2 line N'"
    capsys.readouterr()
    status = main(["record", path, "--format", "json", "--samples", "2000"])
    out, err = capsys.readouterr()
    assert "Traceback" not in err and "internal error" not in err
    if m.group(2) is None:
        assert status == 0, err
        json.loads(out)
    else:
        assert status == 2
        located(err, int(m.group(2)))
