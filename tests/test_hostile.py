"""No code execution from input: text in a sheet is data, never code or markup.

A sheet carries Python, format-string tricks, jinja2 syntax, Markdown/HTML and LaTeX
commands in every text position (title, notes, comments). Nothing runs, nothing is
interpreted: the JSON record holds the text exactly, the Markdown record holds it escaped,
the LaTeX source holds it escaped (no live TeX command). Names cannot carry such text: a
sheet that tries is refused with a located error. And the package source never calls
``eval``/``exec``/``compile``/``sympify``/``parse_expr`` at all.
"""
from __future__ import annotations

import ast
import json
import os
import re
from pathlib import Path

import pytest

import derive
from derive.cli import main

ROOT = Path(__file__).resolve().parent.parent
SENTINEL = "/tmp/derive-hostile-sentinel"

PAYLOADS = [
    f"__import__('os').system('touch {SENTINEL}')",
    "{0.__class__.__mro__}",
    "%s %d %(x)s",
    "{{ 7*7 }}",
    "{% for i in range(3) %}LOOP{% endfor %}",
    "{{ ''.__class__.__mro__[1].__subclasses__() }}",
    "<script>alert(1)</script> [x](javascript:alert(1)) **bold** `code`",
    r"\input{/etc/passwd} \write18{touch /tmp/x} \def\x{y} $\frac{1}{0}$ & % # ^ _ ~",
    "\\end{document}",
    "${7*7}",
]


def quoted(s: str) -> str:
    return s.replace("\\", "\\\\").replace('"', '\\"')


def sheet(payload: str) -> str:
    q = quoted(payload)
    return (f'title "{q}"\n'
            f'note "{q}"\n'
            f'note "second {q}"\n'
            f"# a comment: {payload}\n"
            "voltage source V1 between a and gnd = 5 V\n"
            "resistor R1 between a and b = 1 kohm\n"
            "resistor R2 between b and gnd = 1 kohm\n"
            f"port out between b and gnd   # {payload}\n"
            "find thevenin at out\n")


@pytest.fixture(autouse=True)
def _no_sentinel():
    if os.path.exists(SENTINEL):
        os.unlink(SENTINEL)
    yield
    assert not os.path.exists(SENTINEL), "a payload ran"


def _record(tmp_path, text, fmt, capsys):
    path = tmp_path / "hostile.eqv"
    path.write_text(text, encoding="utf-8")
    out = tmp_path / f"record.{fmt}"
    status = main(["record", str(path), "-o", str(out), "--format", fmt])
    err = capsys.readouterr().err
    assert status == 0, err
    return out.read_text(encoding="utf-8")


@pytest.mark.parametrize("payload", PAYLOADS, ids=range(len(PAYLOADS)))
def test_json_holds_text_exactly(tmp_path, capsys, payload):
    data = json.loads(_record(tmp_path, sheet(payload), "json", capsys))
    assert data["title"] == payload
    assert data["notes"] == [payload, "second " + payload]
    # the circuit itself was still derived: vth = 5 V * 1k/(1k+1k) = 2.5 V (hand calculation)
    vth = data["results"][0]["quantities"]["vth"]
    assert vth["value"] == pytest.approx(2.5)


@pytest.mark.parametrize("payload", PAYLOADS, ids=range(len(PAYLOADS)))
def test_markdown_holds_text_escaped(tmp_path, capsys, payload):
    md = _record(tmp_path, sheet(payload), "md", capsys)
    assert "49" not in md.replace("2.5", "")          # neither {{ 7*7 }} nor ${7*7} evaluated
    assert "LOOPLOOP" not in md                        # the jinja2 loop did not run
    assert not re.search(r"(?<!\\)<script>", md)      # HTML is escaped (by a backslash)
    from markdown_it import MarkdownIt                # ... and a CommonMark parser agrees
    assert "<script>" not in MarkdownIt("commonmark").render(md)
    assert "__subclasses__()" not in md or "\\_\\_subclasses" in md
    assert "{0.__class__" not in md                    # not formatted, and escaped
    # the payload is still there, as escaped text: its letters in order
    letters = re.sub(r"[^A-Za-z0-9]", "", payload)
    assert letters and letters in re.sub(r"&#\d+;|[^A-Za-z0-9]", "", md)


@pytest.mark.parametrize("payload", PAYLOADS, ids=range(len(PAYLOADS)))
def test_latex_source_has_no_live_command(tmp_path, capsys, payload):
    try:
        from derive.export import latex as export_latex    # noqa: F401
    except ImportError:
        pytest.skip("LaTeX records not available")
    tex = _record(tmp_path, sheet(payload), "tex", capsys)
    for command in (r"\input{/etc", r"\write18", r"\def\x", r"\frac{1}{0}"):
        assert command not in tex, command
    assert tex.count(r"\end{document}") == 1         # the payload did not close the document
    assert "LOOPLOOP" not in tex and "{{" not in tex.split("\\begin{document}")[-1] or \
        r"\{\{" in tex
    if "\\input" in payload:
        assert r"\textbackslash{}input" in tex


@pytest.mark.parametrize("bad", [
    "resistor __import__('os') between a and gnd = 1k\n",
    "resistor R{0} between a and gnd = 1k\n",
    "resistor R1 between {{a}} and gnd = 1k\n",
    "resistor \\input between a and gnd = 1k\n",
    "resistor R1 between a and gnd = 1k\nport {{x}} between a and gnd\n",
    "resistor R1 between a and gnd = __import__('os').getcwd()\n",
    "resistor R1 between a and gnd = 1k\nfind rth at %s\n",
    "resistor R1 between a and gnd = eval(1)\n",
    "resistor Rä between a and gnd = 1k\n",
])
def test_names_cannot_carry_code(tmp_path, capsys, bad):
    path = tmp_path / "bad.eqv"
    path.write_text(bad, encoding="utf-8")
    status = main(["record", str(path), "--format", "json"])
    err = capsys.readouterr().err
    assert status == 2, err
    assert re.match(r"^[^\n]*:\d+:\d+: error: ", err), err


def test_dunder_names_are_plain_symbols():
    """``R2.__class__`` is a qualified name like ``div1.Rt``: an inert symbol, not an
    attribute access."""
    rec = derive.derive_text("voltage source V between a and gnd = 1 V\n"
                             "resistor R1 between a and gnd = R2.__class__\n"
                             "port p between a and gnd\nfind current through R1\n", "d.eqv")
    (q,) = rec.results[0].quantities.values()
    assert str(q.expr) == "V/R2___class__"


def test_unit_and_number_positions_are_not_evaluated(tmp_path, capsys):
    path = tmp_path / "u.eqv"
    path.write_text("resistor R1 between a and gnd = 1 {{7*7}}\n", encoding="utf-8")
    assert main(["record", str(path)]) == 2
    assert "error" in capsys.readouterr().err


# ------------------------------------------------------------------ the source itself
FORBIDDEN = {"eval", "exec", "sympify", "parse_expr", "__import__", "S"}
FORBIDDEN_BARE = {"compile"}       # re.compile is fine; the builtin is not


def _calls(path):
    tree = ast.parse(path.read_text(encoding="utf-8"), filename=str(path))
    for node in ast.walk(tree):
        if isinstance(node, ast.Call):
            f = node.func
            if isinstance(f, ast.Name) and (f.id in FORBIDDEN or f.id in FORBIDDEN_BARE):
                yield node.lineno, f.id
            elif isinstance(f, ast.Attribute) and f.attr in FORBIDDEN:
                yield node.lineno, f.attr


def test_source_never_evaluates_text():
    hits = [f"{p.relative_to(ROOT)}:{line}: {name}(...)"
            for p in sorted((ROOT / "derive").rglob("*.py")) for line, name in _calls(p)]
    assert not hits, "calls that can evaluate text:\n" + "\n".join(hits)


def test_the_source_scan_can_fail(tmp_path):
    p = tmp_path / "m.py"
    p.write_text("import sympy\nx = sympy.sympify('1+1')\ny = eval('2')\nz = re.compile('a')\n")
    assert [n for _, n in _calls(p)] == ["sympify", "eval"]


def test_grammar_text_is_not_a_template():
    """The jinja2 templates render sheet text through filters; a title containing template
    syntax reaches them as a value (checked above); here the derive_text path."""
    rec = derive.derive_text(sheet("{{ 7*7 }}"), "t.eqv")
    assert rec.circuit.sheet.title == "{{ 7*7 }}"
