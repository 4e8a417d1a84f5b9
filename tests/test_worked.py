"""Every worked sheet derives without error, and its JSON record keeps the contract."""
from __future__ import annotations

import json
import re
from pathlib import Path

import pytest

import derive

WORKED = sorted((Path(__file__).resolve().parent.parent / "worked").glob("*.eqv"))
ALLOWED = re.compile(r"^[A-Za-z0-9_+\-*/(). ]*$")


@pytest.mark.parametrize("path", WORKED, ids=[p.name for p in WORKED])
def test_worked_sheet(path):
    rec = derive.derive_file(str(path))
    d = json.loads(rec.to_json())
    assert len(d["results"]) == len(rec.circuit.requests) > 0
    for r in d["results"]:
        for name, q in r.get("quantities", {}).items():
            assert "expr" in q or "sequence" in q
            if "expr" in q:
                assert ALLOWED.match(q["expr"]), q["expr"]


def test_bridge_worked_values():
    # unbalanced bridge: vth = Vex*(Rb/(Ra+Rb) - Rg/(Rc+Rg)) at nominal values
    # (Wheatstone bridge; common practice, no source)
    rec = derive.derive_file(str(WORKED[0].parent / "strain_bridge.eqv"))
    q = rec.results[0].quantities
    assert abs(q["vth"].value - 5 * (0.5 - 350.7 / 700.7)) < 1e-15
    assert abs(q["rth"].value - (175 + 350 * 350.7 / 700.7)) < 1e-9
