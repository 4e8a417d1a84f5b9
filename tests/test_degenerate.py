"""Degenerate circuits give the right answer or the right error, and runaway algebra is
refused with a clear error naming the cause and the remedies.

Expected values are hand calculations (Ohm's law and the divider rule; common practice,
no source)."""
from __future__ import annotations

import re

import pytest
import sympy

import derive
from derive.cli import main
from derive.errors import SheetError, TooLarge

SRC = "voltage source V between a and gnd = 5 V\n"


def q(text, name, i=0):
    return derive.derive_text(text, "d.eqv").results[i].quantities[name]


def refused(text, pattern):
    with pytest.raises(SheetError) as e:
        derive.derive_text(text, "d.eqv")
    assert re.search(pattern, e.value.format()), e.value.format()
    return e.value


def test_port_across_a_voltage_source_has_zero_resistance():
    t = SRC + "resistor R1 between a and gnd = 1k\nport p between a and gnd\nfind thevenin at p\n"
    assert q(t, "vth").expr == sympy.Symbol("V")
    assert q(t, "rth").expr == 0 and q(t, "rth").value == 0


def test_norton_across_a_voltage_source_is_refused_with_the_reason():
    t = SRC + "resistor R1 between a and gnd = 1k\nport p between a and gnd\nfind norton at p\n"
    refused(t, r"4:1: error: .*directly across an ideal voltage source.*resistance is 0")


def test_port_with_nothing_behind_it_says_infinite_resistance():
    t = SRC + ("resistor R1 between a and gnd = 1k\nresistor R2 between b and c = 1k\n"
               "port p between b and gnd\nfind thevenin at p\n")
    e = refused(t, r"3:1: error: node\(s\) b, c are not connected")
    assert "infinite resistance" in e.hint


def test_only_dependent_sources_give_zero_vth():
    t = ("resistor R1 between a and gnd = 1k\ncurrent source G from a to gnd = g*across(a, gnd)\n"
         "nominal g = 1m\nresistor R2 between a and b = 1k\nport p between b and gnd\n"
         "find thevenin at p\n")
    assert q(t, "vth").expr == 0
    # rth = R2 + R1 || (1/g) with the VCCS a conductance g in parallel: 1k + 1k||1k = 1500
    assert q(t, "rth").value == pytest.approx(1500.0)


def test_opamp_without_feedback_is_singular():
    t = SRC + ("resistor R1 between a and b = 1k\nopamp U1 inputs b, gnd output o\n"
               "resistor RL between o and gnd = 1k\nport p between o and gnd\nfind thevenin at p\n")
    refused(t, r"error: the circuit is singular.*op-amp without a feedback path")


def test_floating_section_loop_and_cut_set():
    refused(SRC + "resistor R1 between a and gnd\nresistor R2 between x and y\n",
            r"3:1: error: node\(s\) x, y are not connected")
    refused(SRC + "voltage source W between a and gnd = 2 V\nresistor R1 between a and gnd\n",
            r"2:1: error: loop of voltage sources: V, W")
    refused("current source I from a to gnd = 1 mA\nresistor R1 between a and b\n"
            "resistor R2 between b and a\n", r"1:1: error: cut set of current sources I")


def test_zero_and_infinite_values_by_expression():
    refused(SRC + "resistor R1 between a and gnd = R - R\nnominal R = 1k\n"
            "port p between a and gnd\nfind rth at p\n",
            r"2:1: error: resistor 'R1' has the value 0")
    refused(SRC + "resistor R1 between a and gnd = R/(R - R)\nnominal R = 1k\n",
            r"2:\d+: error: division by zero")
    # an open by expression: conductance 0 leaves the divider unloaded, vth = V
    t = SRC + ("resistor R1 between a and b = 1k\nconductance G2 between b and gnd = G - G\n"
               "nominal G = 1m\nport p between b and gnd\nfind thevenin at p\n")
    assert q(t, "vth").value == pytest.approx(5.0)
    assert q(t, "rth").value == pytest.approx(1000.0)


def test_a_zero_nominal_resistance_still_has_a_value():
    """Regression (fuzzing): a resistor of nominal 0 ohm crashed the value at nominal."""
    t = SRC + ("resistor R1 between a and b = 0 ohm\nresistor R2 between b and gnd = 1k\n"
               "port p between b and gnd\nfind thevenin at p\n")
    assert q(t, "vth").value == pytest.approx(5.0)
    assert q(t, "rth").value == pytest.approx(0.0)


def test_current_source_only_circuit_reduces():
    """Regression (random circuits): a port form whose result is a bare source symbol that
    is substituted to 0 crashed the series-parallel tidy-up."""
    t = ("current source I from gnd to a = 2 mA\nresistor R1 between a and gnd = 1k\n"
         "resistor R2 between a and b = 1k\nport p between b and gnd\nfind thevenin at p\n")
    assert q(t, "vth").value == pytest.approx(2.0)      # 2 mA into 1k, no load current
    assert q(t, "rth").value == pytest.approx(2000.0)


# ------------------------------------------------------------------ runaway algebra
def grid(k, values=False):
    """k x k resistor grid, source at one corner through Rsrc, port at the opposite one."""
    def node(r, c):
        return "gnd" if (r, c) == (k - 1, 0) else f"g{r}_{c}"
    val = " = 1 kohm" if values else ""
    lines = ["voltage source V between vin and gnd = 1 V",
             f"resistor Rsrc between vin and g0_0{val}"]
    for r in range(k):
        for c in range(k):
            if c + 1 < k:
                lines.append(f"resistor Rh{r}_{c} between {node(r, c)} and {node(r, c + 1)}{val}")
            if r + 1 < k:
                lines.append(f"resistor Rv{r}_{c} between {node(r, c)} and {node(r + 1, c)}{val}")
    lines += [f"port out between {node(k - 1, k - 1)} and gnd", "find thevenin at out"]
    return "\n".join(lines) + "\n"


def test_too_large_is_refused_with_cause_and_remedies(tmp_path, capsys):
    path = tmp_path / "g.eqv"
    path.write_text(grid(3), encoding="utf-8")
    status = main(["record", str(path), "--format", "json", "--max-terms", "100"])
    err = capsys.readouterr().err
    assert status == 2
    assert re.match(r"^\S+:\d+:\d+: error: the expanded result would have about \S+ terms", err)
    for remedy in ("numeric", "--symbolic", "--max-terms"):
        assert remedy in err


def test_solver_guard_raises_too_large():
    from derive.analyses import run as analysis
    from derive.forms import select as forms
    c = derive.circuit_of(grid(3), "g.eqv")
    ctx = analysis.Context(c, analysis.Options(max_terms=10))
    with pytest.raises(TooLarge):
        forms.exact_ratio(ctx, c.requests[0], "vth")


def test_numeric_statement_and_symbolic_option_make_it_tractable(tmp_path, capsys):
    text = grid(6, values=True)
    names = [m.group(1) for m in re.finditer(r"resistor (\S+)", text)]
    keep = ["Rsrc", "Rh0_0"]
    numeric = "numeric " + ", ".join(n for n in names if n not in keep) + "\n"
    a = derive.derive_text(text + numeric, "g.eqv").results[0].quantities
    assert a["vth"].expr.free_symbols <= {sympy.Symbol(k) for k in keep + ["V"]}
    path = tmp_path / "g.eqv"
    path.write_text(text, encoding="utf-8")
    assert main(["record", str(path), "--format", "json", "--symbolic", "Rsrc,Rh0_0"]) == 0
    out = capsys.readouterr().out
    assert '"vth"' in out
    # both ways agree at nominal values (all 1 kohm): the same exact number
    b = derive.derive_text(text, "g.eqv", symbolic=keep).results[0].quantities
    assert a["vth"].value == pytest.approx(b["vth"].value)
    assert 0 < a["vth"].value < 1


def test_timeout_gives_a_clean_message(tmp_path, capsys):
    path = tmp_path / "g.eqv"
    path.write_text(grid(9), encoding="utf-8")
    status = main(["record", str(path), "--format", "json", "--timeout", "0.5"])
    err = capsys.readouterr().err
    assert status == 2
    assert err.startswith("derive: error: gave up after 0.5 s (--timeout)")
    assert "--symbolic" in err and "Traceback" not in err
