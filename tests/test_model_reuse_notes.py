"""Results computed on a circuit whose instance was replaced by its section model say so.

``replace q1 by model from pin to pmid [compare]`` answers every request on the substituted
circuit. Every result (``find``, ``check``, ``solve``, ``find sensitivity``, ``find
tolerance``) carries a note in the JSON record, the Markdown and LaTeX records and the
``derive check`` lines, and with ``compare`` the model's error against the full circuit.
The full-circuit and model values are checked against nodal solves written here with
numpy.linalg.solve (modified nodal analysis: Ho, Ruehli and Brennan, "The modified nodal
approach to network analysis", IEEE Trans. Circuits and Systems 22 (1975) 504-509).
"""
from __future__ import annotations

import json
import re

import numpy as np
import pytest

import derive
from derive import cli
from derive.export.latex import latex_source

# A common-emitter stage with local feedback Rf (so the model is only approximate), driven
# through Rs and loaded by RL.
SHEET = """
block ce (b, c, ref)
  resistor rpi between b and ref = 2.5 kohm ±1%
  current source G1 from c to ref = gm*across(b, ref)
  resistor Rc between c and ref = 4.7 kohm ±5%
  resistor Rf between c and b = 100 kohm ±5%
end
nominal gm = 40 mS
voltage source Vs between src and gnd = 1 mV
resistor Rs between src and in = 600 ohm ±1%
use ce q1 (in, mid, gnd)
resistor RL between mid and gnd = 10 kohm ±5%
port pin between in and gnd
port pmid between mid and gnd
replace q1 by model from pin to pmid{compare}
find vth at pmid
check rth at pmid equals RL||q1_Rc||q1_Rf
solve vth at pmid for RL
find sensitivity of vth at pmid
find tolerance of vth at pmid
"""
NOM = dict(Vs=1e-3, Rs=600.0, rpi=2500.0, gm=0.04, Rc=4700.0, Rf=100e3, RL=10e3)
KINDS = ["find", "check", "solve", "sensitivity", "tolerance"]


def _record(compare=True):
    return derive.derive_text(SHEET.format(compare=" compare" if compare else ""), "reuse.eqv",
                              mc_samples=2000)


@pytest.fixture(scope="module")
def record():
    return _record()


# ------------------------------------------------------------------ independent nodal solves
def _solve(G, i):
    return np.linalg.solve(np.array(G, float), np.array(i, float))   # reference: numpy


def full_circuit(v, vs, i_mid=0.0):
    """(v_in, v_mid) of the full circuit: unknowns v(in), v(mid); the source node src is
    held at ``vs`` (a grounded voltage source eliminated, as in nodal analysis). KCL, current
    leaving each node: G1 drives gm·v(in) from mid to ground."""
    gs, gpi, gc, gf, gl = (1 / v[k] for k in ("Rs", "rpi", "Rc", "Rf", "RL"))
    G = [[gs + gpi + gf, -gf],
         [v["gm"] - gf, gc + gf + gl]]
    return _solve(G, [gs * vs, i_mid])


def section_model(v):
    """rin, gain, rout of the stage alone (rpi, G1, Rc, Rf) between in and mid: rin and
    gain from 1 A into in with mid open; rout from 1 A into mid with v(in) held at 0."""
    gpi, gc, gf = 1 / v["rpi"], 1 / v["Rc"], 1 / v["Rf"]
    vin, vmid = _solve([[gpi + gf, -gf], [v["gm"] - gf, gc + gf]], [1.0, 0.0])
    rout = 1 / (gc + gf)        # in at 0 V: Rc and Rf to ground, gm·v(in) = 0
    return vin, vmid / vin, rout


def model_circuit(v):
    """vth and rth at pmid of the circuit with the stage replaced by rin, gain·v(in), rout:
    the input divider Rs–rin, then the source behind rout loaded by RL (common practice,
    no source: the cascade of a voltage-amplifier model)."""
    rin, gain, rout = section_model(v)
    vin = v["Vs"] * rin / (v["Rs"] + rin)
    return gain * vin * v["RL"] / (rout + v["RL"]), rout * v["RL"] / (rout + v["RL"])


# ------------------------------------------------------------------ the tests
def test_every_result_carries_the_note_in_json_and_markdown(record):
    d = json.loads(record.to_json())
    md = record.to_markdown()
    assert [r["request"].split()[0] if r["request"].split()[1] not in ("sensitivity",
                                                                       "tolerance")
            else r["request"].split()[1] for r in d["results"]] == KINDS
    for r in d["results"]:
        notes = r.get("notes")
        assert notes, f"no note on {r['request']}"
        assert "substituted circuit" in notes[0] and "q1 replaced by its section model" \
            in notes[0], notes
        assert "not unilateral" in notes[0]
        assert "Model error at nominal values" in notes[0]
        assert r["substitution"][0]["instance"] == "q1"
        assert r["steps"][0]["text"].startswith("q1 is replaced by its model")
        # the Markdown shows the same note under the request's heading
        section = md.split(f"## {_md_escape(r['request'])}\n", 1)[1]
        assert section.lstrip().startswith("> **Note.** Computed on a substituted circuit")
    assert md.count("> **Note.**") == len(KINDS)


def _md_escape(t):
    from derive.export.markdown import md_text
    return md_text(t)


def test_latex_record_shows_the_note(record):
    tex = latex_source(record)
    notes = re.findall(r"\\textbf\{Note\.\}\s*%?\s*Computed on a substituted circuit", tex)
    assert len(notes) == len(KINDS)


def test_model_error_against_independent_nodal_solves(record):
    # Full circuit: vth = v(mid) with Vs on; rth = v(mid) for 1 A into mid with Vs off.
    vth_full = full_circuit(NOM, NOM["Vs"])[1]
    rth_full = full_circuit(NOM, 0.0, 1.0)[1]
    vth_model, rth_model = model_circuit(NOM)
    by = {k: r for k, r in zip(KINDS, record.results)}
    for kind in ("find", "solve", "sensitivity", "tolerance"):
        err = by[kind].extra["model_error"]["vth"]
        assert err["model"] == pytest.approx(vth_model, rel=1e-9)
        assert err["full"] == pytest.approx(vth_full, rel=1e-9)
        assert err["relative"] == pytest.approx((vth_model - vth_full) / vth_full, rel=1e-6)
    err = by["check"].extra["model_error"]["rth"]
    assert err["model"] == pytest.approx(rth_model, rel=1e-9)
    assert err["full"] == pytest.approx(rth_full, rel=1e-9)
    assert abs(err["relative"]) > 1e-2     # Miller effect of Rf, neglected by the model


def test_check_verdict_on_the_model_is_not_presented_as_one_on_the_circuit(record, tmp_path,
                                                                             capsys):
    # rth at pmid of the model is rout || RL = Rc || Rf || RL: the claim holds on the model,
    # but not on the full circuit (its rth is lowered by the feedback through Rf).
    chk = record.results[1]
    assert chk.extra["holds"] is True
    assert chk.extra["full_circuit_holds"] is False
    assert "On the full circuit the claim does not hold." in chk.notes[0]
    sheet = tmp_path / "reuse.eqv"
    sheet.write_text(SHEET.format(compare=" compare"), encoding="utf-8")
    cli.main(["check", str(sheet)])
    out = capsys.readouterr().out.splitlines()
    assert out[0].startswith("PASS line 17: check rth at pmid")
    assert out[1].startswith("  note: Computed on a substituted circuit")
    assert "On the full circuit the claim does not hold." in out[1]


def test_without_compare_the_note_says_the_error_is_not_shown():
    d = json.loads(_record(compare=False).to_json())
    for r in d["results"]:
        assert "substituted circuit" in r["notes"][0]
        assert "error is not shown" in r["notes"][0]
        assert "model_error" not in r and "full_circuit_holds" not in r


def test_circuit_without_replace_has_no_note():
    text = SHEET.format(compare="").replace("replace q1 by model from pin to pmid\n", "")
    d = json.loads(derive.derive_text(text, mc_samples=2000).to_json())
    assert all("notes" not in r and "substitution" not in r for r in d["results"])
