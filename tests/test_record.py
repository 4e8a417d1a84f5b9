"""Derivation steps and the Markdown record."""
import json
import re

import pytest
import sympy
from markdown_it import MarkdownIt
from mdit_py_plugins.dollarmath import dollarmath_plugin

import derive
from derive.derivation.steps import equal

LADDER = """title "Ladder"
voltage source Vs between a and gnd = 10 V
resistor R1 between a and b = 1 kohm
resistor R2 between b and gnd = 2 kohm
resistor R3 between b and c = 3 kohm
resistor R4 between c and gnd = 6 kohm
port out between c and gnd
find thevenin at out
find resistance at out
"""

BRIDGE = """voltage source Vx between top and gnd = 5 V
resistor Ra between top and l = 350 ohm
resistor Rb between l and gnd = 350 ohm
resistor Rc between top and r = 350 ohm
resistor Rg between r and gnd = 351 ohm
port out between l and r
find thevenin at out
find current through Ra
"""


def test_series_parallel_sheet_shows_reduction_moves_and_verifies():
    rec = derive.derive_text(LADDER)
    steps = rec.results[0].steps
    kinds = [s.kind for s in steps]
    assert kinds.count("reduction") >= 3 and "nodal" not in kinds
    assert all(s.verified for s in steps)
    texts = " ".join(s.text for s in steps)
    assert "Source transformation" in texts and "in series" in texts
    # the last reduction result agrees with the hand value: vth = 10*(2/3)*6/(2/3k+3k+6k)...
    # Thevenin of Vs,R1,R2: 20/3 V behind 2/3 kohm; then R3 in series, R4 across:
    # vth = (20/3)*6/(2/3 + 3 + 6) = 40/(29/3) = 120/29 V (hand calculation, common practice)
    assert rec.results[0].quantities["vth"].value == pytest.approx(120 / 29)
    rsteps = rec.results[1].steps
    assert "short circuit" in rsteps[0].text and "Vs" in rsteps[0].text


def test_bridge_shows_nodal_equations_and_cramer():
    rec = derive.derive_text(BRIDGE)
    steps = rec.results[0].steps
    kinds = [s.kind for s in steps]
    assert "reduction" not in kinds
    assert kinds.count("cramer") == 2 and "matrix" in kinds and "check" in kinds
    kcl = next(s for s in steps if s.kind == "nodal")
    assert len(kcl.equations) == 3            # nodes top, l, r
    assert [r[0] for r in kcl.table[1:]] == ["top", "l", "r"]
    assert all(s.verified for s in steps)
    assert all(s.verified for s in rec.results[1].steps)
    # each KCL equation holds at the exact node voltages: the bridge's left node sits at
    # Vx*Rb/(Ra+Rb) = 2.5 V (voltage divider, common practice, no source)
    v = {sympy.Symbol("v_top"): 5, sympy.Symbol("v_l"): sympy.Rational(5, 2)}
    eq_l = kcl.equations[1]
    vals = {sympy.Symbol(k): v for k, v in {"Ra": 350, "Rb": 350}.items()}
    assert (eq_l.lhs - eq_l.rhs).xreplace(v).xreplace(vals) == 0


def test_failing_equation_is_not_verified():
    from derive.derivation.steps import Equation, Step
    a, b = sympy.symbols("a b")
    st = Step("wrong", [Equation(sympy.Symbol("x"), a * b / (a + b), check=a + b)])
    assert st.verify() is False


def test_json_carries_verified_steps():
    d = json.loads(derive.derive_text(LADDER).to_json())
    steps = d["results"][0]["steps"]
    assert steps and all(s["verified"] is True for s in steps)
    assert any("=" in e for s in steps for e in s["equations"])


def _md():
    return MarkdownIt("commonmark").enable("table").use(dollarmath_plugin)


NASTY = [r"\input{/etc/passwd}", r"\write18{rm -rf x}", "$x$", "50%", "a & b", "#1", "a_b",
         "{}", "<script>alert(1)</script>", "*em* [l](u)"]


def test_user_text_stays_literal_in_markdown():
    title = " ".join(NASTY)
    sheet = f'title "{title}"\nnote "{NASTY[0]} {NASTY[8]}"\n' + BRIDGE
    md = derive.derive_text(sheet).to_markdown()
    tokens = _md().parse(md)
    inline = [t for t in tokens if t.type == "inline"]
    heading = inline[0]
    text = "".join(c.content for c in heading.children if c.type == "text")
    assert text == title              # literal, character for character
    html = _md().render(md)
    assert "<script>" not in html and "<em>em</em>" not in html and "href" not in html
    # no math span made of user text
    maths = [c.content for t in inline for c in (t.children or []) if c.type.startswith("math")]
    assert not any("passwd" in m for m in maths)


def test_markdown_has_sections_and_summary():
    md = derive.derive_text(LADDER).to_markdown()
    assert md.index("## Results") < md.index("## Circuit") < md.index("## find thevenin")
    assert "Modelling assumptions" in md and "verified" in md
    assert "| R3 | resistor | b, c |" in md


def test_caution_for_high_voltage_only():
    hv = derive.derive_text(LADDER.replace("= 10 V", "= 230 V")).to_markdown()
    lv = derive.derive_text(LADDER).to_markdown()
    assert "Caution" in hv and "local electrical codes" in hv
    assert "Caution" not in lv


def test_template_dir_override(tmp_path):
    (tmp_path / "record.md.j2").write_text("LETTERHEAD {{ v.title | md }}\n")
    out = derive.derive_text(LADDER).to_markdown(str(tmp_path))
    assert out == "LETTERHEAD Ladder\n"


def test_markdown_prose_is_not_over_escaped():
    # issue 12, item 5: hyphens, periods and apostrophes in prose stay plain; no HTML
    # entities except for "<"; the rendered text is still the literal text
    md = derive.derive_text('title "Strain-gauge bridge, ch. 2"\nnote "Kirchhoff\'s law - 5 V."\n'
                            + LADDER.split("\n", 1)[1]).to_markdown()
    assert "# Strain-gauge bridge, ch. 2\n" in md
    assert "Kirchhoff's law - 5 V." in md
    prose = re.sub(r"\$\$.*?\$\$|\$[^$]*\$", "", md, flags=re.S)     # outside the math
    assert "\\-" not in prose and "\\." not in prose and "&#39;" not in prose
    body = md.split("## Circuit")[0]
    assert not re.search(r"&#\d+;", body)


def test_markdown_line_start_markup_still_escaped():
    from derive.export.markdown import md_text
    html = _md().render(md_text("# x") + "\n\n" + md_text("- y") + "\n\n" + md_text("1. z") +
                        "\n\n" + md_text("> q") + "\n\n" + md_text("<b>x</b> *e* [l](u)"))
    assert "<h1>" not in html and "<li>" not in html and "<blockquote>" not in html
    assert "<b>" not in html and "<em>" not in html and "href" not in html
