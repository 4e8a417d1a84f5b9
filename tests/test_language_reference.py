"""Every ``sheet`` example of the language reference (docs/language.md) is a complete sheet
that parses and builds; the elements it lists are the element-kind table's."""
from __future__ import annotations

import re
from pathlib import Path

import pytest

import derive
from derive.sheet.kinds import KINDS

DOC = Path(__file__).resolve().parent.parent / "docs" / "language.md"
BLOCKS = re.findall(r"```sheet\n(.*?)```", DOC.read_text(encoding="utf-8"), re.S)


def test_the_reference_has_examples():
    assert len(BLOCKS) >= 8


@pytest.mark.parametrize("i", range(len(BLOCKS)))
def test_example_parses_and_builds(i):
    text = BLOCKS[i]
    c = derive.circuit_of(text, f"language.md example {i + 1}")
    assert c.elements and c.requests


def test_every_kind_of_the_table_is_documented():
    text = DOC.read_text(encoding="utf-8")
    for k in KINDS.values():
        if k.sheet:                     # kinds a sheet line writes (not the inner nullor)
            assert f"`{k.word}`" in text, k.word


def test_the_readme_points_at_the_reference():
    readme = (DOC.parent.parent / "README.md").read_text(encoding="utf-8")
    assert "docs/language.md" in readme
    assert "shared/SHEET.md" not in readme
