"""Whole-file writes: an output is written to a temporary file beside its target and renamed
into place, so an error never leaves a partial file.

The command line runs the work inside :func:`capture`: every :func:`write_atomic` and
:func:`write_stdout` of the work is then collected instead of done, and the command line
writes the collected outputs itself once the work has finished (:func:`commit`). That is what
lets ``--timeout`` run the work in a separate process that can be killed at any moment
(also inside compiled code) without leaving half a file behind: only the process that owns
the deadline ever touches the output files or standard output.
"""
from __future__ import annotations

import io
import os
import sys
import tempfile
from contextlib import contextmanager
from typing import Optional


class Captured:
    """Outputs of a piece of work: ``files`` (path -> str or bytes, in write order) and
    ``stdout`` (a list of str and bytes chunks)."""

    def __init__(self):
        self.files: dict = {}
        self.stdout: list = []


_active: Optional[Captured] = None


@contextmanager
def capture():
    """Collect the writes of the enclosed work in a :class:`Captured` instead of doing them.

    >>> with capture() as c:
    ...     write_atomic("never-written.txt", "x")
    ...     write_stdout("hello")
    >>> sorted(os.path.basename(p) for p in c.files), c.stdout, os.path.exists("never-written.txt")
    (['never-written.txt'], ['hello'], False)
    """
    global _active
    previous, _active = _active, Captured()
    try:
        yield _active
    finally:
        _active = previous


def _mode_for(path: str) -> int:
    """The mode an ordinary ``open(path, "w")`` gives: an existing file keeps its mode, a new
    one gets 0o666 less the umask (mkstemp alone would leave 0o600)."""
    try:
        return os.stat(path).st_mode & 0o7777
    except OSError:
        umask = os.umask(0)
        os.umask(umask)
        return 0o666 & ~umask


def write_atomic(path: str, data) -> None:
    """Write ``data`` (str or bytes) to ``path`` whole or not at all (inside :func:`capture`:
    remember it for :func:`commit`)."""
    if _active is not None:
        if not isinstance(data, (str, bytes, bytearray)):
            raise TypeError(f"write_atomic needs str or bytes, not {type(data).__name__}")
        _active.files[os.path.abspath(path)] = bytes(data) if isinstance(data, bytearray) \
            else data
        return
    mode = "wb" if isinstance(data, (bytes, bytearray)) else "w"
    folder = os.path.dirname(os.path.abspath(path)) or "."
    fd, tmp = tempfile.mkstemp(prefix=".derive-", suffix=".tmp", dir=folder)
    try:
        with os.fdopen(fd, mode, **({} if mode == "wb" else {"encoding": "utf-8"})) as f:
            f.write(data)
        os.chmod(tmp, _mode_for(path))
        os.replace(tmp, path)
    except BaseException:
        try:
            os.unlink(tmp)
        except OSError:
            pass
        raise


def write_stdout(data) -> None:
    """Write ``data`` (str or bytes) to standard output (inside :func:`capture`: remember it)."""
    if _active is not None:
        _active.stdout.append(bytes(data) if isinstance(data, bytearray) else data)
        return
    if isinstance(data, (bytes, bytearray)):
        sys.stdout.flush()
        sys.stdout.buffer.write(data)
        sys.stdout.buffer.flush()
    else:
        sys.stdout.write(data)


def commit(captured: Captured) -> None:
    """Write the files of ``captured`` (each whole, by :func:`write_atomic`); standard output
    is left to the caller. Raises ``OSError`` (with ``filename`` set) if a file cannot be
    written; the files before it are written, none is left half-written."""
    global _active
    previous, _active = _active, None
    try:
        for path, data in captured.files.items():
            try:
                write_atomic(path, data)
            except OSError as e:
                if not e.filename:
                    e.filename = path
                raise
    finally:
        _active = previous


@contextmanager
def figures_captured():
    """Inside :func:`capture`, matplotlib figures saved to a path (``Figure.savefig(path)``)
    are rendered to memory and remembered like :func:`write_atomic`; elsewhere this does
    nothing. Used around the Markdown record, whose figures are drawn beside the output."""
    if _active is None:
        yield
        return
    from matplotlib.figure import Figure
    original = Figure.savefig

    def savefig(self, fname, *args, **kwargs):
        if _active is None or not isinstance(fname, (str, os.PathLike)):
            return original(self, fname, *args, **kwargs)
        path = os.fspath(fname)
        if "format" not in kwargs:
            ext = os.path.splitext(path)[1].lstrip(".").lower()
            if ext:
                kwargs["format"] = ext
        buf = io.BytesIO()
        original(self, buf, *args, **kwargs)
        write_atomic(path, buf.getvalue())

    Figure.savefig = savefig
    try:
        yield
    finally:
        Figure.savefig = original
