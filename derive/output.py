"""Whole-file writes: an output is written to a temporary file beside its target and renamed
into place, so an error never leaves a partial file."""
from __future__ import annotations

import os
import tempfile


def write_atomic(path: str, data) -> None:
    """Write ``data`` (str or bytes) to ``path`` whole or not at all."""
    mode = "wb" if isinstance(data, (bytes, bytearray)) else "w"
    folder = os.path.dirname(os.path.abspath(path)) or "."
    fd, tmp = tempfile.mkstemp(prefix=".derive-", suffix=".tmp", dir=folder)
    try:
        with os.fdopen(fd, mode, **({} if mode == "wb" else {"encoding": "utf-8"})) as f:
            f.write(data)
        os.replace(tmp, path)
    except BaseException:
        try:
            os.unlink(tmp)
        except OSError:
            pass
        raise
