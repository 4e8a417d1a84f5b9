"""``derive record`` without ``-o``: a plain-text summary on a terminal, the Markdown record
when standard output is a pipe or a file (SHEET.md §3); Markdown that escapes only what
CommonMark would read as markup."""
import os
import pathlib
import pty
import re
import subprocess
import sys

import pytest
from markdown_it import MarkdownIt
from mdit_py_plugins.dollarmath import dollarmath_plugin

from derive import cli
from derive.cli import main

ROOT = pathlib.Path(__file__).resolve().parents[1]
# The divider of the README: vth = 10 V * 4k/(1k + 4k) = 8 V, rth = 1k || 4k = 800 ohm.
SHEET = """title "Divider <b>&amp; 5 V"
voltage source V between a and gnd = 10 V
resistor R1 between a and b = 1 kohm ±1%
resistor R2 between b and gnd = 4 kohm ±1%
port out between b and gnd
find thevenin at out
find tolerance of vth at out
"""


def _sheet(tmp_path, text=SHEET):
    p = tmp_path / "div.eqv"
    p.write_text(text)
    return p


def test_terminal_gets_the_plain_summary(tmp_path, capsys, monkeypatch):
    monkeypatch.setattr(cli, "_is_terminal", lambda stream: True)
    p = _sheet(tmp_path)
    assert main(["record", str(p), "--samples", "2000"]) == 0
    out = capsys.readouterr().out
    lines = out.splitlines()
    assert lines[0] == "Divider <b>&amp; 5 V" and set(lines[1]) == {"="}   # the title as typed
    assert "  vth = R2*V/(R1 + R2)   = 8.000 V" in out
    assert "  rth = R1*R2/(R1 + R2)  = 800.0 Ω" in out          # values in one column
    # extremes by hand: 10*3960/4970 = 7.968 V, 10*4040/5030 = 8.032 V
    assert "tolerance band: vth 7.968 V to 8.032 V (extreme values, nominal 8.000 V)" in out
    assert "$" not in out and "\\" not in out and "&#" not in out and "**" not in out
    assert "## " not in out and "| " not in out
    assert "equations of the full record" in out
    assert lines[-1] == (f"Full record with every step: derive record {p} -o record.pdf "
                         "(or .md, .tex, .json), or pipe the output for Markdown.")


def test_terminal_with_format_or_output_keeps_the_asked_format(tmp_path, capsys, monkeypatch):
    monkeypatch.setattr(cli, "_is_terminal", lambda stream: True)
    p = _sheet(tmp_path)
    assert main(["record", str(p), "--samples", "2000", "--format", "md"]) == 0
    assert capsys.readouterr().out.startswith("# Divider")
    out = tmp_path / "r.md"
    assert main(["record", str(p), "--samples", "2000", "-o", str(out)]) == 0
    assert out.read_text().startswith("# Divider")


def test_pipe_gets_markdown(tmp_path, capsys):
    p = _sheet(tmp_path)
    assert main(["record", str(p), "--samples", "2000"]) == 0      # capsys: not a terminal
    assert capsys.readouterr().out.startswith("# Divider")


def test_format_text_on_a_pipe(tmp_path, capsys):
    p = _sheet(tmp_path)
    assert main(["record", str(p), "--samples", "2000", "--format", "text"]) == 0
    assert "  vth = R2*V/(R1 + R2)   = 8.000 V" in capsys.readouterr().out


@pytest.mark.parametrize("timeout", [None, "60"])
def test_a_real_terminal(tmp_path, timeout):
    """Through a pseudo-terminal, in a fresh process (with --timeout the work runs in a
    forked worker whose own standard output is /dev/null: the parent decides)."""
    p = _sheet(tmp_path)
    master, slave = pty.openpty()
    args = [sys.executable, "-m", "derive", "record", str(p), "--samples", "2000"]
    if timeout:
        args += ["--timeout", timeout]
    proc = subprocess.Popen(args, stdout=slave, stderr=subprocess.PIPE, cwd=ROOT,
                            env={**os.environ, "COLUMNS": "100"})
    os.close(slave)
    chunks = []
    while True:
        try:
            data = os.read(master, 1 << 16)
        except OSError:
            break
        if not data:
            break
        chunks.append(data)
    os.close(master)
    assert proc.wait(timeout=120) == 0, proc.stderr.read()
    out = b"".join(chunks).decode("utf-8").replace("\r\n", "\n")
    assert "  vth = R2*V/(R1 + R2)   = 8.000 V" in out and "# Divider" not in out


def test_sheet_text_cannot_send_terminal_escapes(tmp_path, capsys, monkeypatch):
    monkeypatch.setattr(cli, "_is_terminal", lambda stream: True)
    p = _sheet(tmp_path, SHEET.replace('title "Divider <b>&amp; 5 V"',
                                       'title "Divider \x1b[2J bell\x07"'))
    assert main(["record", str(p), "--samples", "2000"]) == 0
    out = capsys.readouterr().out
    assert "\x1b" not in out and "\x07" not in out and "\\x1b[2J" in out


# ------------------------------------------------------------------ Markdown escapes
def _md_parser():
    return MarkdownIt("commonmark").enable("table").use(dollarmath_plugin)


def _prose(md):
    return re.sub(r"\$\$.*?\$\$|\$[^$\n]*\$", "", md, flags=re.S)


@pytest.mark.parametrize("name", sorted(p.stem for p in (ROOT / "worked").glob("*.md")))
def test_worked_markdown_has_no_needless_escapes(name):
    md = (ROOT / "worked" / f"{name}.md").read_text()
    prose = _prose(md)
    # outside tables no backslash before punctuation that CommonMark leaves alone here
    # (hyphens, periods, pipes, underscores inside words such as v_in ...)
    lines = [l for l in prose.splitlines() if not l.lstrip().startswith("|")]
    text = "\n".join(lines)
    assert not re.search(r"\\[-.()'\"!<>&=+:;,|]|(?<=\w)\\_(?=\w)", text), \
        re.findall(r".{20}\\[-.<&|_].{20}", text)
    assert not re.search(r"&#?\w+;", prose)
    # rendered by a CommonMark parser, the numbers of the summary come out as typed
    html = _md_parser().render(md)
    assert "\\" not in re.sub(r'<(span|div) class="math[^"]*">.*?</\1>', "", html, flags=re.S)


def test_markup_in_sheet_text_stays_literal_through_a_commonmark_parser(tmp_path, capsys):
    p = _sheet(tmp_path, SHEET.replace('title "Divider <b>&amp; 5 V"',
                                       'title "1. <b>x</b> &amp; *y* a < b 7.5 V - ok"'))
    assert main(["record", str(p), "--samples", "2000"]) == 0
    md = capsys.readouterr().out
    first = md.splitlines()[0]
    assert first == "# 1. \\<b>x\\</b> \\&amp; \\*y\\* a < b 7.5 V - ok"
    html = _md_parser().render(first)
    assert html.strip() == "<h1>1. &lt;b&gt;x&lt;/b&gt; &amp;amp; *y* a &lt; b 7.5 V - ok</h1>"
