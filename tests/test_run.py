"""The run of a sheet (derive.analyses.run): one handler table, one solver per circuit, the
PDF written in one place."""
from __future__ import annotations

import pytest

import derive
from derive.analyses import ports, run as runner
from derive.cli import main
from derive.solver import determinant

BRIDGE = """voltage source V between a and gnd = 10 V
resistor R1 between a and b = 1 kohm
resistor R2 between b and gnd = 2 kohm
resistor R3 between a and c = 3 kohm
resistor R4 between c and gnd = 4 kohm
resistor R5 between b and c = 5 kohm
port out between b and c
"""


def counted(monkeypatch):
    calls = []
    real = determinant.det

    def det(m):
        calls.append(m.n)
        return real(m)
    monkeypatch.setattr(determinant, "det", det)
    return calls


def test_thevenin_of_a_bridge_takes_three_determinants(monkeypatch):
    """vth = -det[[A, b], [u^T, 0]]/det A and rth = -det[[A, u], [u^T, 0]]/det A (Cramer's
    rule with bordered determinants; the vth = isc·rth cross-check and the Cramer step of the
    derivation reuse them): det A, the bordered det with b and the bordered det with u are
    all that is needed, so at most 3 (it was 12 with one solver per quantity)."""
    calls = counted(monkeypatch)
    rec = derive.derive_text(BRIDGE + "find thevenin at out\n", "b.eqv")
    assert len(calls) <= 3, calls
    # the answer is still right: vth of the bridge, V·(R2/(R1+R2) - R4/(R3+R4)) with R5 loading
    # it, checked here against the numbers (two dividers, Thevenin of each side: from memory)
    va, ra = 10 * 2 / 3, 1000 * 2000 / 3000
    vc, rc = 10 * 4 / 7, 3000 * 4000 / 7000
    rth = 5000 * (ra + rc) / (5000 + ra + rc)
    assert rec.results[0].quantities["vth"].value == pytest.approx((va - vc) * rth / (ra + rc))
    assert rec.results[0].quantities["rth"].value == pytest.approx(rth)


def test_requests_on_one_circuit_share_the_determinants(monkeypatch):
    calls = counted(monkeypatch)
    derive.derive_text(BRIDGE + "find thevenin at out\nfind norton at out\n"
                       "find vth at out\n", "b.eqv")
    assert len(calls) <= 3, calls


def test_the_handler_table_is_plain():
    """No wrapper, no registration: the table holds the modules' own functions."""
    assert runner.HANDLERS["thevenin"] is ports.answer
    assert runner.HANDLERS["power"].__module__ == "derive.analyses.power"
    assert all(fn.__module__.startswith("derive.analyses.") and not hasattr(fn, "__wrapped__")
               for fn in runner.HANDLERS.values())


@pytest.mark.parametrize("line,shown,kind", [
    ("find noise at out from 10 Hz to 1 kHz", "find noise", "noise"),
    ("find stress", "find stress", "stress")])
def test_a_kind_without_handler_is_refused_by_the_lookup(monkeypatch, line, shown, kind):
    """Every request kind of the language has a handler today; one taken out of the table is
    refused at the table, with the request's location (the lookup fails closed)."""
    c = derive.circuit_of(BRIDGE + line + "\n", "b.eqv")
    runner.handler_of(c.requests[0])                      # in the table: found
    monkeypatch.delitem(runner.HANDLERS, kind)
    with pytest.raises(derive.SheetError) as e:
        runner.handler_of(c.requests[0])
    assert f"'{shown}' requests are not supported by this version" in str(e.value)
    assert (e.value.line, e.value.col) == (8, 1)


def test_frequency_annotation_is_a_post_step_of_the_run():
    text = ("voltage source V between a and gnd = 1 V\nresistor R1 between a and b = 1 kohm\n"
            "capacitor C1 between b and gnd = 1 uF\nport out between b and gnd\n"
            "find vth at out\n")
    c = derive.circuit_of(text, "rc.eqv")
    ctx = runner.Context(c, runner.Options())
    bare = runner.HANDLERS["vth"](ctx, c.requests[0])
    assert "frequency" not in bare.extra              # the handler alone: no annotation
    ran = derive.derive_text(text, "rc.eqv").results[0]
    # the RC low-pass 1/(1 + sRC): one pole at -1/(RC) (textbook)
    assert ran.extra["frequency"]["vth"]["poles"]


def test_pdf_is_written_by_the_command_line_only(tmp_path, monkeypatch):
    """export.latex.render gives the PDF's bytes; the command line writes them (one place)."""
    from derive.export import latex
    monkeypatch.setattr(latex, "compile_pdf", lambda source, workdir: b"%PDF-1.5 test\n")
    sheet = tmp_path / "s.eqv"
    sheet.write_text(BRIDGE + "find vth at out\n", encoding="utf-8")
    out = tmp_path / "s.pdf"

    class Args:
        output = str(out)
        template = None
    rec = derive.derive_file(str(sheet))
    assert latex.render(rec, "pdf", Args()) == b"%PDF-1.5 test\n"
    assert not out.exists()
    assert main(["record", str(sheet), "--format", "pdf", "-o", str(out)]) == 0
    assert out.read_bytes() == b"%PDF-1.5 test\n"
