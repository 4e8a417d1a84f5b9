"""``--digits N`` / ``derive_text(digits=N)``: computed values in every rendering with N
significant figures (engineering notation, SI prefix, unit); entered values as entered."""
import json

import pytest

from derive import derive_text
from derive.cli import main

# A divider: Vs = 10 V, R1 = 1 kΩ ±1 %, R2 = 4 kΩ ±1 %, vth = Vs·R2/(R1 + R2) = 8 V.
# Worked by hand: dvth/dR1 = -Vs·R2/(R1+R2)² = -1.6e-3 V/Ω, times R1·t = 10 Ω: 16 mV;
# dvth/dR2 = Vs·R1/(R1+R2)² = 0.4e-3 V/Ω, times R2·t = 40 Ω: 16 mV. Linear worst case
# ±32 mV (7.968 V to 8.032 V), RSS ±16·√2 mV = ±22.6274 mV. True extremes (vth falls with R1,
# rises with R2): 10·3960/4970 = 7.967807 V and 10·4040/5030 = 8.031809 V.
SHEET = """voltage source Vs between a and gnd = 10 V
resistor R1 between a and b = 1 kohm ±1%
resistor R2 between b and gnd = 4 kohm ±1%
port out between b and gnd
find vth at out
find tolerance of vth at out
"""


def _md(digits):
    return derive_text(SHEET, "d.eqv", digits=digits, mc_samples=2000).to_markdown()


def test_six_digits_reach_prose_summary_and_tables():
    md = _md(6)
    assert "7.96800 V to 8.03200 V" in md              # linear worst case
    assert "± 22.6274 mV" in md                        # RSS
    assert "7.96781 V to 8.03181 V" in md              # true extremes, prose and summary
    assert "= 8.00000 V" in md                         # the value in the summary
    assert "| R1 | 1 kΩ |" in md and "| R2 | 4 kΩ |" in md   # entered values as entered


def test_default_is_four_digits_and_entered_values_stay():
    md = _md(4)
    assert "7.968 V to 8.032 V" in md and "± 22.63 mV" in md
    assert "7.968 V to 8.032 V (extreme values, nominal 8.000 V)" in md
    assert "| R1 | 1 kΩ |" in md
    assert ":.6g" not in md and "7.96781 V" not in md


def test_two_digits():
    md = _md(2)
    assert "= 8.0 V" in md and "± 23 mV" in md and "8.000 V" not in md


@pytest.mark.parametrize("bad", [0, -1, 16, 2.5, "4", True])
def test_api_refuses_a_bad_number_of_digits(bad):
    with pytest.raises(ValueError, match="significant figures"):
        derive_text(SHEET, digits=bad)


@pytest.mark.parametrize("bad", ["0", "-3", "2.5", "16", "many"])
def test_cli_refuses_a_bad_number_of_digits(tmp_path, capsys, bad):
    p = tmp_path / "d.eqv"
    p.write_text(SHEET)
    assert main(["record", str(p), "--digits", bad]) == 2
    err = capsys.readouterr().err
    assert "--digits" in err and ("significant figures" in err or "whole number" in err)


def test_cli_digits_in_record_and_json_unchanged(tmp_path, capsys):
    p = tmp_path / "d.eqv"
    p.write_text(SHEET)
    assert main(["record", str(p), "--digits", "6", "--samples", "2000"]) == 0
    assert "7.96781 V to 8.03181 V" in capsys.readouterr().out
    out = tmp_path / "r.json"
    assert main(["record", str(p), "--digits", "2", "--samples", "2000", "-o", str(out)]) == 0
    spread = [r for r in json.loads(out.read_text())["results"] if "spread" in r][0]["spread"]
    assert spread["low"] == pytest.approx(39600 / 4970, rel=1e-12)   # JSON: full floats


def test_code_comment_follows_digits(tmp_path, capsys):
    sheet = ("voltage source Vin between a and gnd = 1 V\n"
             "resistor R1 between a and n = 10 kohm ±1%\n"
             "resistor R2 between n and out = 100 kohm ±1%\n"
             "opamp U1 inputs gnd, n output out gain A\n"
             "nominal A = 100000 ±50%\n"
             "port o between out and gnd\n"
             "find gain from Vin to o approximately within 1%\n")
    p = tmp_path / "a.eqv"
    p.write_text(sheet)
    assert main(["code", str(p), "--digits", "2"]) == 0
    two = [l for l in capsys.readouterr().out.splitlines() if "relative error at most" in l]
    assert main(["code", str(p), "--digits", "5"]) == 0
    five = [l for l in capsys.readouterr().out.splitlines() if "relative error at most" in l]
    assert two and five and two != five
    # by hand: -R2/R1 over the exact -R2/R1/(1 + (R1 + R2)/(A R1)) is off by (1 + R2/R1)/A,
    # largest at A = 50000, R2/R1 = 101k/9.9k: 11.20202/50000 = 0.02240404 %; rounded up
    # to 2 and 5 figures so that it stays a bound
    assert "at most 0.023 %" in two[0] and "at most 0.022405 %" in five[0]   # rounded up


def test_plot_marks_follow_digits(monkeypatch, tmp_path):
    """The Bode plot's f0 mark: 1/(2π·sqrt(R1 R2 C1 C2)) of the Sallen-Key low-pass of
    tests/test_response.py (from memory) = 1565.164 Hz, at 3 and 6 figures."""
    import math

    import matplotlib.axes

    sheet = ("voltage source Vin between in and gnd = 1 V\n"
             "resistor R1 between in and a = 10 kohm\nresistor R2 between a and p = 22 kohm\n"
             "capacitor C1 between a and out = 10 nF\ncapacitor C2 between p and gnd = 4.7 nF\n"
             "opamp U1 inputs p, out output out\nport o between out and gnd\n"
             "find gain from Vin to o\n")
    f0 = 1 / (2 * math.pi * math.sqrt(10e3 * 22e3 * 10e-9 * 4.7e-9))
    seen = []
    real = matplotlib.axes.Axes.annotate

    def spy(self, text, *a, **k):
        seen.append(text)
        return real(self, text, *a, **k)
    monkeypatch.setattr(matplotlib.axes.Axes, "annotate", spy)
    src = tmp_path / "sk.eqv"
    src.write_text(sheet)
    for digits in ("3", "6"):          # the figures drawn beside the Markdown record
        assert main(["record", str(src), "-o", str(tmp_path / f"r{digits}.md"),
                     "--digits", digits]) == 0
        assert (tmp_path / f"r{digits}-bode_find_gain_from_Vin_to_o_gain.png").exists() or \
            list(tmp_path.glob(f"r{digits}-*.png"))
    assert f"f0 = {f0 / 1e3:.2f} kHz" in seen and f"f0 = {f0 / 1e3:.5f} kHz" in seen
