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

import errno
import io
import os
import stat
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
        self.on_error: set = set()


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


class OutputError(OSError):
    """An output path that cannot be written (a folder, a missing folder, the sheet itself);
    ``filename`` is the path as given."""


def _target(path: str) -> str:
    """Where a write to ``path`` lands: symbolic links followed (the link itself stays)."""
    return os.path.realpath(path) if os.path.islink(path) else path


def _is_special(path: str) -> bool:
    """``path`` exists and is neither a regular file nor a folder (a device, a FIFO, a
    socket): written in place, never replaced."""
    try:
        st = os.stat(path)
    except OSError:
        return False
    return not (stat.S_ISREG(st.st_mode) or stat.S_ISDIR(st.st_mode))


def check_output(path: str, protect=()) -> None:
    """Refuse an output path that cannot be written as a file, with ``OutputError``: an
    existing folder, a missing folder, or the same file as one of ``protect`` (the sheet)."""
    target = _target(path)
    if os.path.isdir(target):
        raise OutputError(errno.EISDIR, "it is a folder, not a file", path)
    folder = os.path.dirname(os.path.abspath(target)) or "."
    if not os.path.isdir(folder):
        raise OutputError(errno.ENOENT, f"the folder {folder} does not exist", path)
    for p in protect:
        try:
            same = os.path.samefile(target, p)
        except OSError:
            same = False
        if same:
            raise OutputError(errno.EEXIST, f"it is the sheet {p}; derive never overwrites "
                              "its input", path)


def _new_mode(target: str) -> int:
    """The permission bits of a replaced file (those of the file it replaces, or the usual
    0666 less the umask for a new one)."""
    try:
        return stat.S_IMODE(os.stat(target).st_mode)
    except OSError:
        mask = os.umask(0)
        os.umask(mask)
        return 0o666 & ~mask


def _prepare(path: str, data) -> tuple:
    """Write ``data`` to a temporary file beside ``path``'s target: (temporary, target)."""
    target = _target(path)
    check_output(path)
    mode = "wb" if isinstance(data, (bytes, bytearray)) else "w"
    folder = os.path.dirname(os.path.abspath(target)) or "."
    try:
        fd, tmp = tempfile.mkstemp(prefix=".derive-", suffix=".tmp", dir=folder)
    except OSError as e:
        raise OutputError(e.errno, e.strerror, path) from None
    try:
        with os.fdopen(fd, mode, **({} if mode == "wb" else {"encoding": "utf-8"})) as f:
            f.write(data)
        os.chmod(tmp, _new_mode(target))
    except BaseException as e:
        try:
            os.unlink(tmp)
        except OSError:
            pass
        if isinstance(e, OSError):
            raise OutputError(e.errno, e.strerror, path) from None
        raise
    return tmp, target


def _write_in_place(path: str, data) -> None:
    """A device, FIFO or socket: opened and written like a shell redirection, never replaced."""
    raw = data.encode("utf-8") if isinstance(data, str) else bytes(data)
    try:
        with open(path, "wb") as f:
            f.write(raw)
    except OSError as e:
        raise OutputError(e.errno, e.strerror, path) from None


def write_atomic(path: str, data, on_error: bool = False) -> None:
    """Write ``data`` (str or bytes) to ``path`` whole or not at all (inside :func:`capture`:
    remember it for :func:`commit`; ``on_error`` files are written also when the work then
    fails). A symbolic link is followed; a device or FIFO is written in place, not replaced;
    a folder or a missing folder raises :class:`OutputError`."""
    if _active is not None:
        if not isinstance(data, (str, bytes, bytearray)):
            raise TypeError(f"write_atomic needs str or bytes, not {type(data).__name__}")
        key = os.path.abspath(path)
        _active.files[key] = bytes(data) if isinstance(data, bytearray) else data
        if on_error:
            _active.on_error.add(key)
        return
    write_all({path: data})


def write_all(files: dict, protect=()) -> None:
    """Write every file of ``files`` (path -> str or bytes) or, where one cannot be
    written, none: each goes to a temporary file first and all are renamed into place
    together. Devices and FIFOs are written last, in place. Raises :class:`OutputError`."""
    for path in files:
        check_output(path, protect)
    for path, data in files.items():
        if not isinstance(data, (str, bytes, bytearray)):
            raise TypeError(f"write_atomic needs str or bytes, not {type(data).__name__}")
    done, special = [], []
    try:
        for path, data in files.items():
            if _is_special(_target(path)):
                special.append((path, data))
            else:
                done.append(_prepare(path, data))
    except BaseException:
        for tmp, _t in done:
            try:
                os.unlink(tmp)
            except OSError:
                pass
        raise
    for k, (tmp, target) in enumerate(done):
        try:
            os.replace(tmp, target)
        except OSError as e:
            for t2, _t in done[k:]:
                try:
                    os.unlink(t2)
                except OSError:
                    pass
            raise OutputError(e.errno, e.strerror, target) from None
    for path, data in special:
        _write_in_place(path, data)


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


def commit(captured: Captured, failed: bool = False, protect=()) -> None:
    """Write the files of ``captured``, all or none (:func:`write_all`); standard output is
    left to the caller. With ``failed`` only the files marked ``on_error`` are written (a
    failed run leaves no figures behind). No file may be one of ``protect`` (the sheet).
    Raises ``OSError`` (with ``filename`` set) if a file cannot be written."""
    global _active
    previous, _active = _active, None
    try:
        files = {p: d for p, d in captured.files.items()
                 if not failed or p in getattr(captured, "on_error", ())}
        write_all(files, protect)
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
