"""A ``--template`` folder is data, not code: jinja2's immutable sandbox refuses attribute
access to Python internals, so a hostile template cannot run commands (the canary file is
never created) and the error names the template and its line."""
from __future__ import annotations

import pytest

from derive.cli import main

SHEET = """voltage source V between a and gnd = 10 V
resistor R1 between a and b = 1 kohm
resistor R2 between b and gnd = 4 kohm
port out between b and gnd
find thevenin at out
"""

HOSTILE = [
    # the classic escapes: from a literal to object's subclasses, or a helper's globals
    "{{ ''.__class__.__mro__[1].__subclasses__() }}",
    "{{ cycler.__init__.__globals__.os.system('touch CANARY') }}",
    "{{ joiner.__init__.__globals__['os'].system('touch CANARY') }}",
    "{{ lipsum.__globals__['os'].popen('touch CANARY').read() }}",
    "{% set x = record.__class__ %}{{ x }}",
]


@pytest.mark.parametrize("payload", HOSTILE)
def test_hostile_template_is_refused(tmp_path, capsys, monkeypatch, payload):
    monkeypatch.chdir(tmp_path)
    (tmp_path / "s.eqv").write_text(SHEET, encoding="utf-8")
    tpl = tmp_path / "tpl"
    tpl.mkdir()
    (tpl / "record.md.j2").write_text("# A record\n" + payload + "\n", encoding="utf-8")
    code = main(["record", "s.eqv", "--template", str(tpl), "-o", "out.md"])
    err = capsys.readouterr().err
    assert code == 2
    assert not (tmp_path / "CANARY").exists()
    assert not (tmp_path / "out.md").exists()          # nothing half-written
    assert "record.md.j2, line 2" in err, err
    assert "Traceback" not in err


def test_a_plain_user_template_still_works(tmp_path, capsys):
    (tmp_path / "s.eqv").write_text(SHEET, encoding="utf-8")
    tpl = tmp_path / "tpl"
    tpl.mkdir()
    (tpl / "record.md.j2").write_text(
        "{% for r in v.results %}{{ r.request }}\n{% endfor %}", encoding="utf-8")
    assert main(["record", str(tmp_path / "s.eqv"), "--template", str(tpl)]) == 0
    assert "find thevenin at out" in capsys.readouterr().out
