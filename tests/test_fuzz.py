"""Fuzzing: whatever text a sheet holds, ``derive record`` either succeeds (exit 0) or
refuses it with ``FILE:LINE:COL: error: ...`` (exit 2). Never a traceback, never exit 1 or
3 (internal error) or anything else.

Two sources of input:

* sheets generated from the sheet grammar itself (``hypothesis.extra.lark.from_lark`` on
  the real parser, with terminals replaced by small pools of names, numbers and strings so
  that generated sheets are mostly well-formed and reach the circuit builder and solver);
* mutations of the worked sheets (deleted, duplicated and swapped lines and tokens, random
  bytes, huge and tiny numbers, deep parentheses, Unicode).

Each example runs ``derive.cli.main`` in-process (with ``--timeout`` as a per-example
guard); a few run through a real subprocess.
"""
from __future__ import annotations

import os
import re
import subprocess
import sys
import tempfile
from pathlib import Path

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from hypothesis.extra.lark import from_lark

from derive.cli import main
from derive.sheet.grammar import get_parser

ROOT = Path(__file__).resolve().parent.parent
WORKED = sorted((ROOT / "worked").glob("*.eqv"))
# Seeds for mutation: the worked sheets whose plain requests run in about a second, with
# the costly statistical requests (sensitivity, tolerance) left out so that a thousand
# mutants fit in the CI budget; those handlers get a few examples of their own below.
_SLOW = re.compile(r"^\s*find\s+(sensitivity|tolerance)\b", re.M)
WORKED_FULL = [p.read_text(encoding="utf-8") for p in WORKED]
_ELEMENT = re.compile(r"^\s*(resistor|capacitor|inductor|voltage|current|opamp|use)\b", re.M)
WORKED_TEXT = [_SLOW.sub("# (left out)", t) for t in WORKED_FULL
               if len(_ELEMENT.findall(t)) <= 7 and "capacitor" not in t]

# FILE:LINE:COL: error: message   (SHEET.md section 3)
LOCATED = re.compile(r"^[^\n]*:\d+:\d+: error: \S")
TIMEOUT_MSG = re.compile(r"^derive: error: gave up after [\d.]+ s \(--timeout\)")
PER_EXAMPLE_TIMEOUT = "4"

_TMP = tempfile.mkdtemp(prefix="derive-fuzz-")
FUZZ = settings(deadline=None, database=None, derandomize=True,
                suppress_health_check=list(HealthCheck))


def run_record(text, capsys, fmt="json", as_bytes=False):
    """Run ``derive record`` on ``text``; assert the exit contract; return (status, err)."""
    path = os.path.join(_TMP, "sheet.eqv")
    mode = "wb" if as_bytes else "w"
    with open(path, mode, **({} if as_bytes else {"encoding": "utf-8", "newline": ""})) as f:
        f.write(text)
    capsys.readouterr()
    status = main(["record", path, "--format", fmt, "--timeout", PER_EXAMPLE_TIMEOUT])
    out, err = capsys.readouterr()
    assert status in (0, 2), f"exit {status} for sheet {text!r}:\n{err}"
    if status == 2:
        assert LOCATED.match(err) or TIMEOUT_MSG.match(err), \
            f"exit 2 without a located message for {text!r}:\n{err}"
        assert "Traceback" not in err
    else:
        assert out.strip(), f"exit 0 but no output for {text!r}"
    return status, err


# ------------------------------------------------------------------ grammar-based sheets
NODES = ["gnd", "a", "b", "c", "out", "top"]
ELEMENTS = ["R1", "R2", "R3", "C1", "V1", "I1", "U1", "E1"]
NAMES = NODES + ELEMENTS + ["P", "p", "q", "beta", "gm", "x.y", "s", "R", "A"]
NUMBERS = ["1", "0", "2.5", "10k", "4k7", "100n", "1e3", "3", "1e400", "1e-400", "0.0",
           "99999999999999999999999", "2R2", "1M5", "10meg", "5K", "1uF", "7V"]
STRINGS = ['"x"', '""', '"a \\" quote"', '"{{ 7*7 }}"', '"$\\\\input{x}$"', '"µΩ ∥ ±"']


def _grammar_strategy():
    parser = get_parser()
    explicit = {}
    for term in parser.terminals:
        pat = term.pattern
        if pat.type == "str" and pat.value.isalpha():      # keywords: keep them apart
            explicit[term.name] = st.just(f" {pat.value} ")
    explicit["NAME"] = st.sampled_from(NAMES).map(lambda n: f" {n} ")
    explicit["NUMBER"] = st.sampled_from(NUMBERS).map(lambda n: f" {n}")
    explicit["STRING"] = st.sampled_from(STRINGS).map(lambda s: f" {s} ")
    explicit["PM"] = st.sampled_from([" ±", " +-"])
    explicit["_NL"] = st.sampled_from(["\n", "\r\n"])
    explicit["PAR"] = st.sampled_from([" || ", " ∥ "])
    return from_lark(parser, explicit=explicit)


GRAMMAR_SHEETS = _grammar_strategy()


@settings(FUZZ, max_examples=700)
@given(GRAMMAR_SHEETS)
def test_grammar_generated_sheets(capsys, text):
    run_record(text, capsys)


# a skeleton that always builds a valid circuit, plus grammar-generated statements after it
BASE = ("voltage source V1 between top and gnd = 5 V\n"
        "resistor R1 between top and out = 1k\n"
        "resistor R2 between out and gnd = 2k\n"
        "port p between out and gnd\n")


@settings(FUZZ, max_examples=500)
@given(GRAMMAR_SHEETS)
def test_grammar_statements_after_a_valid_circuit(capsys, text):
    run_record(BASE + text, capsys)


# ------------------------------------------------------------------ mutations of worked sheets
def _tokens(line):
    return re.findall(r"\S+|\s+", line)


@st.composite
def mutated(draw):
    text = draw(st.sampled_from(WORKED_TEXT))
    lines = text.splitlines(keepends=True)
    for _ in range(draw(st.integers(1, 4))):
        if not lines:
            break
        i = draw(st.integers(0, len(lines) - 1))
        op = draw(st.sampled_from(["delete", "duplicate", "swap_lines", "swap_tokens",
                                   "drop_token", "bytes", "unicode", "huge", "deep",
                                   "truncate", "insert_char"]))
        line = lines[i]
        toks = _tokens(line)
        if op == "delete":
            del lines[i]
        elif op == "duplicate":
            lines.insert(i, line)
        elif op == "swap_lines":
            j = draw(st.integers(0, len(lines) - 1))
            lines[i], lines[j] = lines[j], lines[i]
        elif op == "swap_tokens" and len(toks) > 2:
            a, b = draw(st.integers(0, len(toks) - 1)), draw(st.integers(0, len(toks) - 1))
            toks[a], toks[b] = toks[b], toks[a]
            lines[i] = "".join(toks)
        elif op == "drop_token" and toks:
            del toks[draw(st.integers(0, len(toks) - 1))]
            lines[i] = "".join(toks)
        elif op == "bytes":
            junk = draw(st.binary(min_size=1, max_size=8)).decode("latin-1")
            k = draw(st.integers(0, len(line)))
            lines[i] = line[:k] + junk + line[k:]
        elif op == "unicode":
            junk = draw(st.text(min_size=1, max_size=6))
            k = draw(st.integers(0, len(line)))
            lines[i] = line[:k] + junk + line[k:]
        elif op == "huge":
            big = draw(st.sampled_from(["1e308", "1e400", "1e-400", "0", "0.0", "1" * 400,
                                        "1e99999999", "9" * 30 + "k", "0.000000000000001f"]))
            lines[i] = re.sub(r"(?<![\w.])\d+(\.\d+)?([eE][+-]?\d+)?", big, line, count=1)
        elif op == "deep":
            depth = draw(st.sampled_from([5, 50, 300, 3000]))
            lines[i] = re.sub(r"= ([^±#\n]+)", lambda m: "= " + "(" * depth + m.group(1).strip()
                              + ")" * depth + " ", line, count=1)
        elif op == "truncate":
            lines[i] = line[: draw(st.integers(0, len(line)))]
        elif op == "insert_char":
            ch = draw(st.sampled_from(list('()*,=+-/^|"#±%.\t\x00\r\ufeff\u202e\u00a0Ωµ∥')))
            k = draw(st.integers(0, len(line)))
            lines[i] = line[:k] + ch + line[k:]
    return "".join(lines)


@settings(FUZZ, max_examples=300)
@given(mutated())
def test_mutated_worked_sheets(capsys, text):
    run_record(text, capsys)


@settings(FUZZ, max_examples=150)
@given(st.binary(max_size=300))
def test_random_bytes(capsys, data):
    run_record(data, capsys, as_bytes=True)


@settings(FUZZ, max_examples=60)
@given(mutated())
def test_mutated_sheets_markdown(capsys, text):
    run_record(text, capsys, fmt="md")


# ------------------------------------------------------------------ fixed hard cases
HARD = [
    "",
    "# only a comment\n",
    "\ufeff",
    "\x00",
    "resistor R1 between a and gnd = " + "(" * 5000 + "1" + ")" * 5000 + "\n",
    "resistor R1 between a and gnd = " + "-" * 5000 + "1\n",
    "resistor R1 between a and gnd = 2" + "^2" * 3000 + "\n",
    "resistor R1 between a and gnd = 1e99999999999\n",
    "resistor R1 between a and gnd = 10^10^10\n"
    "voltage source V between a and gnd = 1 V\nport p between a and gnd\nfind rth at p\n",
    "resistor R1 between a and gnd = 1\n" * 3,
    "block b (x)\n" + "use b i (x)\n" + "end\nuse b j (gnd)\n",
    "title \"" + "x" * 100000 + "\"\n",
    # regressions found by these tests (each was exit 3 or a runaway before the fix):
    "voltage source V between a and gnd = 1e400 V\nresistor R1 between a and gnd = 1k\n"
    "port p between a and gnd\nfind thevenin at p\n",                 # float overflow
    "resistor R1 between a and gnd = " + "7" * 5000 + "\n",            # int digit limit
    "resistor R1 between a and gnd = 1e99999999999\n",                # Fraction of 10**1e11
    "resistor R1 between a and gnd = 10^10^10\n",                     # 10**(10**10)
    "resistor R1 between a and gnd = (2^100)^(2^10)\n",
    "voltage source V between a and gnd = 5 V\nresistor R1 between a and b = 0 ohm\n"
    "resistor R2 between b and gnd = 1k\nport p between b and gnd\nfind thevenin at p\n",
]


@pytest.mark.parametrize("text", HARD, ids=range(len(HARD)))
def test_hard_cases(capsys, text):
    run_record(text, capsys)


# ------------------------------------------------------------------ through a real process
@pytest.mark.parametrize("text", [WORKED_TEXT[0].replace("=", "==", 1),
                                  WORKED_TEXT[1] + "find rth at nowhere\n",
                                  "resistor R1 between a and gnd = " + "(" * 3000 + "1"
                                  + ")" * 3000 + "\n",
                                  "\xff\xfe garbage"], ids=range(4))
def test_subprocess_contract(tmp_path, text):
    sheet = tmp_path / "s.eqv"
    sheet.write_bytes(text.encode("utf-8", "surrogateescape") if text.isascii() or
                      "\xff" not in text else text.encode("latin-1"))
    p = subprocess.run([sys.executable, "-m", "derive", "record", str(sheet), "--format",
                        "json"], capture_output=True, text=True, cwd=ROOT, timeout=120,
                       env={**os.environ, "PYTHONPATH": str(ROOT)})
    assert p.returncode == 2, p.stderr
    assert LOCATED.match(p.stderr), p.stderr
    assert "Traceback" not in p.stderr


def test_subprocess_worked_sheet_succeeds():
    p = subprocess.run([sys.executable, "-m", "derive", "record", str(WORKED[0]), "--format",
                        "json"], capture_output=True, text=True, cwd=ROOT, timeout=120,
                       env={**os.environ, "PYTHONPATH": str(ROOT)})
    assert p.returncode == 0, p.stderr
    assert '"results"' in p.stdout


@settings(FUZZ, max_examples=8)
@given(st.sampled_from(range(len(WORKED_FULL))), st.integers(0, 10 ** 6))
def test_full_worked_sheets_one_line_dropped(capsys, which, seed):
    """The worked sheets as they are (with every request kind), one random line dropped."""
    lines = WORKED_FULL[which].splitlines(keepends=True)
    del lines[seed % len(lines)]
    run_record("".join(lines), capsys)
