"""Whole-file writes and oversized input.

An output is written to a temporary file beside its target and renamed into place
(``derive.export.files.write_atomic``): a failing run leaves neither the output nor a temporary
file, and a failing write leaves an existing output untouched. Sheets over the size limit
are refused before anything is parsed."""
from __future__ import annotations

import os
import re

import pytest

from derive import cli
from derive.cli import main
from derive.export.files import write_atomic

GOOD = ("voltage source V between a and gnd = 5 V\nresistor R1 between a and b = 1k\n"
        "resistor R2 between b and gnd = 1k\nport p between b and gnd\nfind thevenin at p\n")


def test_failing_record_leaves_no_file(tmp_path, capsys):
    bad = tmp_path / "bad.eqv"
    bad.write_text(GOOD + "find rth at nowhere\n", encoding="utf-8")
    out = tmp_path / "out.json"
    assert main(["record", str(bad), "-o", str(out)]) == 2
    assert re.match(r"^\S+:6:\d+: error: ", capsys.readouterr().err)
    assert sorted(os.listdir(tmp_path)) == ["bad.eqv"]      # no out.json, no temp file


def test_failing_record_keeps_the_previous_output(tmp_path, capsys):
    bad = tmp_path / "bad.eqv"
    bad.write_text("resistor R1 between a and\n", encoding="utf-8")
    out = tmp_path / "out.json"
    out.write_text("previous", encoding="utf-8")
    assert main(["record", str(bad), "-o", str(out)]) == 2
    assert out.read_text(encoding="utf-8") == "previous"
    assert sorted(os.listdir(tmp_path)) == ["bad.eqv", "out.json"]


def test_successful_record_writes_whole_file(tmp_path, capsys):
    good = tmp_path / "good.eqv"
    good.write_text(GOOD, encoding="utf-8")
    out = tmp_path / "out.json"
    assert main(["record", str(good), "-o", str(out)]) == 0
    import json
    data = json.loads(out.read_text(encoding="utf-8"))
    assert data["results"][0]["quantities"]["vth"]["value"] == pytest.approx(2.5)
    assert sorted(os.listdir(tmp_path)) == ["good.eqv", "out.json"]


def test_write_atomic_interrupted_leaves_nothing(tmp_path):
    target = tmp_path / "t.txt"
    target.write_text("old", encoding="utf-8")

    class Exploding:       # not str/bytes: the write itself fails half way
        def __len__(self):
            return 1
    with pytest.raises(TypeError):
        write_atomic(str(target), Exploding())
    assert target.read_text(encoding="utf-8") == "old"
    assert os.listdir(tmp_path) == ["t.txt"]


def test_write_atomic_bytes_and_text(tmp_path):
    write_atomic(str(tmp_path / "a.bin"), b"\x00\x01")
    write_atomic(str(tmp_path / "b.txt"), "Ω µ")
    assert (tmp_path / "a.bin").read_bytes() == b"\x00\x01"
    assert (tmp_path / "b.txt").read_text(encoding="utf-8") == "Ω µ"
    assert sorted(os.listdir(tmp_path)) == ["a.bin", "b.txt"]


def test_ten_megabyte_sheet_is_refused_quickly(tmp_path, capsys):
    big = tmp_path / "big.eqv"
    line = "resistor R1 between a and gnd = 1k   # padding padding padding padding\n"
    big.write_text(line * (10 * 1024 * 1024 // len(line) + 1), encoding="utf-8")
    assert big.stat().st_size > 10 * 1024 * 1024
    out = tmp_path / "out.md"
    assert main(["record", str(big), "-o", str(out)]) == 2
    err = capsys.readouterr().err
    assert re.match(r"^\S+big\.eqv:1:1: error: the sheet is \d+ bytes; sheets over "
                    rf"{cli.MAX_SHEET_BYTES} bytes are refused", err), err
    assert not out.exists()


def test_oversized_standard_input_is_refused(monkeypatch, capsys):
    import io
    data = b"# x\n" * (cli.MAX_SHEET_BYTES // 4 + 10)

    class In:
        buffer = io.BytesIO(data)
    monkeypatch.setattr("sys.stdin", In)
    assert main(["record", "-"]) == 2
    assert re.match(r"^<stdin>:1:1: error: the sheet is over \d+ bytes and is refused",
                    capsys.readouterr().err)


def test_not_utf8_is_located(tmp_path, capsys):
    p = tmp_path / "x.eqv"
    p.write_bytes(b"resistor R1 between a and gnd = 1k\nnote \"\xff\"\n")
    assert main(["record", str(p)]) == 2
    assert re.match(r"^\S+:2:7: error: the sheet is not valid UTF-8", capsys.readouterr().err)


@pytest.mark.parametrize("umask", [0o022, 0o077, 0o002])
def test_new_output_mode_follows_umask(tmp_path, umask):
    # issue 12, item 6: a new output gets 0o666 & ~umask, as open(path, "w") gives (POSIX)
    old = os.umask(umask)
    try:
        write_atomic(str(tmp_path / "new.md"), "x")
        with open(tmp_path / "plain.txt", "w") as f:        # the reference: ordinary open
            f.write("x")
    finally:
        os.umask(old)
    got = os.stat(tmp_path / "new.md").st_mode & 0o777
    assert got == 0o666 & ~umask == os.stat(tmp_path / "plain.txt").st_mode & 0o777


def test_replaced_output_keeps_its_mode(tmp_path):
    target = tmp_path / "r.md"
    target.write_text("old")
    os.chmod(target, 0o640)
    write_atomic(str(target), b"new")
    assert os.stat(target).st_mode & 0o777 == 0o640 and target.read_bytes() == b"new"


def test_cli_output_mode_follows_umask(tmp_path):
    src = tmp_path / "s.eqv"
    src.write_text(GOOD)
    old = os.umask(0o022)
    try:
        assert main(["record", str(src), "-o", str(tmp_path / "r.json")]) == 0
    finally:
        os.umask(old)
    assert os.stat(tmp_path / "r.json").st_mode & 0o777 == 0o644
