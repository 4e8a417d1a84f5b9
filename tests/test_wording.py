"""Wording of records (issue 12, item 9): one orientation for a source in every step, the
orders of a frequency-dependent result said as they are, part names in one LaTeX style,
"(verified)" set off by a space."""
import pathlib
import re

import derive
from derive.export.printing import latex_name

ROOT = pathlib.Path(__file__).resolve().parents[1]


def _texts(rec):
    return [s.text for r in rec.results for s in r.steps]


def test_a_source_reads_the_same_in_every_reduction_step():
    # Vpack's + end at the pack node, the port at the divider tap: the series step used to
    # say "-Vpack (node gnd relative to node tap)" and the next "Vpack, node tap relative to
    # node gnd" for the same branch
    rec = derive.derive_file(str(ROOT / "worked" / "battery_monitor.eqv"), mc_samples=2000)
    texts = " ".join(_texts(rec))
    assert "open-circuit voltage Vpack (node tap relative to node gnd) behind Rtop" in texts
    assert "open-circuit voltage Vpack, node tap relative to node gnd, behind Rtop" in texts
    assert "-Vpack (node gnd" not in texts
    assert not re.search(r"open-circuit voltage -\w+ \(node", texts)


def test_divider_source_upside_down_is_said_positive():
    # V's + end at gnd: the branch V-R1 seen from node b is -V (b relative to gnd), said
    # as V of gnd relative to b; vth = -V*R2/(R1 + R2) = -8 V with V = 10 V, R1 = 1k, R2 = 4k
    rec = derive.derive_text("voltage source V between gnd and a = 10 V\n"
                             "resistor R1 between a and b = 1 kohm\n"
                             "resistor R2 between b and gnd = 4 kohm\n"
                             "port out between b and gnd\nfind vth at out\n")
    assert rec.results[0].quantities["vth"].value == -8.0
    texts = " ".join(_texts(rec))
    assert "open-circuit voltage -V" not in texts and "open-circuit voltage V" in texts


def test_a_second_order_impedance_is_not_called_first_order():
    # rin of the anti-alias section: (C1 R1 R2 s² + (R1 + R2) s + 1/C2)/(C1 R2 s² + s),
    # numerator and denominator of order 2, the denominator s·(1 + C1 R2 s)
    rec = derive.derive_file(str(ROOT / "worked" / "antialias_filter.eqv"), mc_samples=2000)
    texts = [t for t in _texts(rec) if t.startswith("rin as a rational function")]
    assert texts and "numerator of order 2, denominator of order 2 in s" in texts[0]
    assert "the denominator is s·(1 + a1·s)" in texts[0]
    assert all("first order, corner" not in t for t in _texts(rec))
    gain = [t for t in _texts(rec) if t.startswith("gain as a rational function")][0]
    assert "denominator of order 2 in s; ω0 and Q are read from the second-order" in gain


def test_part_names_in_one_latex_style():
    assert latex_name("R_rtd") == r"R_{\mathrm{rtd}}"
    assert latex_name("Rf1") == r"R_{\mathrm{f1}}"
    assert latex_name("RL") == r"R_{\mathrm{L}}"
    assert latex_name("Rload") == r"R_{\mathrm{load}}" and latex_name("R3") == "R_{3}"
    assert latex_name("Omega2") == r"\Omega_{2}" and latex_name("beta") == r"\beta"
    for md in (ROOT / "worked").glob("*.md"):
        assert r"\mathit{RL}" not in md.read_text() and "Rf_{1}" not in md.read_text()


def test_verified_is_set_off_by_a_space():
    for md in (ROOT / "worked").glob("*.md"):
        text = md.read_text()
        assert text.count("*(verified)*") == text.count(" *(verified)*"), md.name
    tex = derive.derive_file(str(ROOT / "worked" / "strain_bridge.eqv"),
                             mc_samples=2000).to_latex()
    assert tex.count(r"\emph{(verified)}") == tex.count(r"\ \emph{(verified)}") > 0
