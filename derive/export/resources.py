"""Where the package's data lives: ``derive/templates`` in an installed wheel, the
checkout's top-level ``templates/`` when run from source."""
from __future__ import annotations

from pathlib import Path


def template_dir() -> Path:
    here = Path(__file__).resolve().parent
    for candidate in (here.parent / "templates", here.parent.parent / "templates"):
        if candidate.is_dir():
            return candidate
    raise FileNotFoundError("derive's templates folder is missing from the installation")
