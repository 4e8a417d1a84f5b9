"""Regenerate the committed records beside every worked sheet.

    python worked/regenerate.py          # Markdown and PDF
    python worked/regenerate.py --md     # Markdown only (no TeX needed)

Run it after changing a worked sheet or the record's layout, and commit the results; the
test tests/test_worked_records.py fails when a committed Markdown record has drifted.
"""
from __future__ import annotations

import sys
from pathlib import Path

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE.parent))

from derive.cli import main  # noqa: E402


def sheets():
    return sorted(HERE.glob("*.eqv"))


def regenerate(md_only: bool = False) -> int:
    status = 0
    for sheet in sheets():
        for ext in (("md",) if md_only else ("md", "pdf")):
            out = sheet.with_suffix("." + ext)
            rc = main(["record", str(sheet), "-o", str(out)])
            print(f"{out.relative_to(HERE.parent)}: {'ok' if rc == 0 else f'exit {rc}'}")
            status = status or rc
    return status


if __name__ == "__main__":
    sys.exit(regenerate("--md" in sys.argv[1:]))
