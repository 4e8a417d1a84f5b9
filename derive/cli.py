"""The command line: a thin layer that turns the error root into a message and an exit code.

    derive record SHEET [-o FILE] [--format md|tex|pdf|json|text] [--template DIR] [--digits N]
    derive code   SHEET [--lang c|python] [-o FILE] [--with-tests] [--digits N]
    derive check  SHEET

``record`` without ``-o`` writes Markdown to standard output, or the plain-text summary
(:mod:`derive.export.terminal`) where standard output is a terminal.

Exit status: 0 success, 1 a ``check`` claim does not hold or a ``find stress`` limit is
exceeded (``derive check``), 2 an invalid
sheet (``FILE:LINE:COL: error: ...`` and the line on standard error), a usage error, a missing
package or ``--timeout`` reached, 3 an internal error.

The work never writes an output file or standard output itself: it runs inside
:func:`derive.export.files.capture`, and :func:`main` writes what it produced once it has finished.
With ``--timeout`` the work runs in a forked worker process (in its own process group, so
that TeX and compilers it starts go with it); the worker sends its outputs back through a
pipe, and the parent kills the whole group when the deadline passes -- which works also
while the worker is inside compiled code (python-flint holds the interpreter lock for a
whole polynomial gcd, so a signal handler in the same process would only run after it).
"""
from __future__ import annotations

import argparse
import math
import os
import pickle
import select
import shutil
import signal
import sys
import tempfile
import time
from dataclasses import dataclass, field
from typing import Optional

from derive.errors import DeriveError, SheetError

MAX_SHEET_BYTES = 1_000_000
FORMATS = ("md", "tex", "pdf", "json", "text")

# Import names whose distribution (what ``pip install`` takes) is spelt differently.
DISTRIBUTIONS = {"flint": "python-flint", "yaml": "pyyaml", "PIL": "pillow",
                 "sklearn": "scikit-learn", "mpl_toolkits": "matplotlib",
                 "markdown_it": "markdown-it-py", "mdit_py_plugins": "mdit-py-plugins"}


def _seconds(text: str) -> float:
    """``--timeout``: a positive, finite number of seconds."""
    try:
        value = float(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"not a number of seconds: {text!r}") from None
    if not math.isfinite(value) or value <= 0:
        raise argparse.ArgumentTypeError(f"must be a positive, finite number of seconds, "
                                         f"not {text!r}")
    return value


MAX_SAMPLES = 10**9


def _whole(text: str, what: str, low: int, high: Optional[int] = None) -> int:
    """A whole number from ``text`` (digits, or exponent notation such as ``1e6`` that
    names a whole number), ``low`` or more (and at most ``high``)."""
    t = text.strip().replace("_", "")
    value = None
    try:
        value = int(t, 10)
    except ValueError:
        import re
        m = re.fullmatch(r"([+-]?\d+)[eE]\+?(\d{1,3})", t)
        if m:
            value = int(m.group(1)) * 10 ** int(m.group(2))
    if value is None:
        raise argparse.ArgumentTypeError(f"not a whole number: {text!r}")
    if value < low or (high is not None and value > high):
        bound = f"from {low} to {high}" if high is not None else f"at least {low}"
        raise argparse.ArgumentTypeError(f"{what} must be {bound}, not {text!r}")
    return value


def _samples(text: str) -> int:
    """``--samples``: a spread needs at least 2 samples."""
    return _whole(text, "the number of samples", 2, MAX_SAMPLES)


def _seed(text: str) -> int:
    """``--seed``: a non-negative whole number (numpy's seeds)."""
    return _whole(text, "the seed", 0)


def _digits(text: str) -> int:
    """``--digits``: significant figures of computed values, 1 to 15."""
    from derive.sheet.units import MAX_DIGITS
    return _whole(text, "the number of significant figures", 1, MAX_DIGITS)


def _terms(text: str) -> float:
    """``--max-terms``: a positive number (``inf`` lifts the limit)."""
    try:
        value = float(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"not a number: {text!r}") from None
    if math.isnan(value) or value <= 0:
        raise argparse.ArgumentTypeError(f"must be a positive number, not {text!r}")
    return value


def _parser() -> argparse.ArgumentParser:
    p = argparse.ArgumentParser(prog="derive", description="Exact derivations for linear "
                                "circuits, written up as design-calculation records.")
    from derive import __version__
    p.add_argument("--version", action="version", version=f"derive {__version__}")
    sub = p.add_subparsers(dest="command", required=True)

    def common(sp):
        sp.add_argument("sheet", help="the sheet (.eqv), or - for standard input")
        sp.add_argument("--symbolic", metavar="NAMES", default=None,
                        help="keep only these symbols symbolic (comma separated); the others "
                             "take their nominal values")
        sp.add_argument("--max-terms", type=_terms, default=2e6, metavar="N",
                        help="refuse to expand a determinant estimated above N terms")
        sp.add_argument("--timeout", type=_seconds, default=None, metavar="SECONDS",
                        help="give up after this many seconds (every phase, including TeX "
                             "and compiled algebra); nothing is written then")
        sp.add_argument("--samples", type=_samples, default=100_000, metavar="N",
                        help="Monte Carlo samples of tolerance analyses (default 100000)")
        sp.add_argument("--seed", type=_seed, default=1, help="Monte Carlo seed (default 1)")
        sp.add_argument("--distribution", choices=("uniform", "normal"), default="uniform",
                        help="parts spread uniformly within tolerance, or normally with the "
                             "tolerance as 3 sigma")
        sp.add_argument("--digits", type=_digits, default=4, metavar="N",
                        help="significant figures of computed values (1 to 15, default 4); "
                             "entered values stay as entered")
        sp.add_argument("--profile", action="store_true",
                        help="print where the time went, phase by phase (startup, parse, solve, "
                             "forms, verification, frequency, export), on standard error")

    r = sub.add_parser("record", help="write the design-calculation record")
    common(r)
    r.add_argument("-o", "--output", default=None, help="output file (format from extension)")
    r.add_argument("--format", choices=FORMATS, default=None,
                   help="md, tex, pdf, json, or text (the plain summary); default: from -o, "
                        "else Markdown -- on a terminal the plain summary")
    r.add_argument("--template", default=None, metavar="DIR",
                   help="a folder of templates that override the built-in ones")
    c = sub.add_parser("code", help="requested formulas as C or Python functions")
    common(c)
    c.add_argument("--lang", choices=("c", "python"), default="python")
    c.add_argument("-o", "--output", default=None)
    c.add_argument("--with-tests", action="store_true",
                   help="also write exact test vectors and a test program")
    k = sub.add_parser("check", help="verify the sheet's check claims and stress limits (exit 1 if one fails)")
    common(k)
    return p


class _Timeout(Exception):
    pass


class _Stopped(Exception):
    """The supervising process got SIGTERM/SIGHUP."""

    def __init__(self, signum):
        super().__init__(signum)
        self.signum = signum


def _read(path: str, stdin_data: Optional[bytes] = None) -> tuple[str, str]:
    if path == "-":
        data = stdin_data if stdin_data is not None else \
            sys.stdin.buffer.read(MAX_SHEET_BYTES + 1)
        name = "<stdin>"
    else:
        name = path
        if os.path.isdir(path):
            raise SheetError("cannot read the sheet: it is a folder, not a file", 0, 0,
                             filename=path)
        try:
            size = os.path.getsize(path)
        except OSError as e:
            raise SheetError(f"cannot read the sheet: {e.strerror}", 0, 0, filename=path)
        if size > MAX_SHEET_BYTES:
            raise SheetError(f"the sheet is {size} bytes; sheets over {MAX_SHEET_BYTES} bytes "
                             "are refused", 0, 0, filename=path)
        try:
            with open(path, "rb") as f:
                data = f.read(MAX_SHEET_BYTES + 1)
        except OSError as e:
            raise SheetError(f"cannot read the sheet: {e.strerror}", 0, 0, filename=path)
    if len(data) > MAX_SHEET_BYTES:
        raise SheetError(f"the sheet is over {MAX_SHEET_BYTES} bytes and is refused", 0, 0,
                         filename=name)
    try:
        text = data.decode("utf-8")
    except UnicodeDecodeError as e:
        line = data[: e.start].count(b"\n") + 1
        col = e.start - (data.rfind(b"\n", 0, e.start) + 1) + 1
        raise SheetError("the sheet is not valid UTF-8", line, col, filename=name)
    return text, name


def _format_of(args) -> str:
    """The format of ``derive record``: ``--format``, else the extension of ``-o``, else
    Markdown on standard output -- or, where standard output is a terminal (``args.tty``,
    decided by :func:`main` before any work), the plain-text summary."""
    if args.format:
        return args.format
    if not args.output and getattr(args, "tty", False):
        return "text"
    if args.output:
        ext = os.path.splitext(args.output)[1].lower().lstrip(".")
        return {"markdown": "md", "md": "md", "tex": "tex", "pdf": "pdf", "json": "json"}.get(
            ext, "md")
    return "md"


def _run(args, stdin_data: Optional[bytes] = None) -> int:
    """The work of one command; outputs go through :mod:`derive.export.files`."""
    from derive import derive_text
    from derive.clock import phase, running
    from derive.export.files import (OutputError, check_output, figures_captured,
                                     write_atomic, write_stdout)
    text, name = _read(args.sheet, stdin_data)
    output = getattr(args, "output", None)
    if output:
        try:
            check_output(output, _protected(args))
        except OutputError as e:
            raise DeriveError(f"cannot write {e.filename}: {e.strerror}") from None
    symbolic = [s.strip() for s in args.symbolic.split(",") if s.strip()] \
        if args.symbolic is not None else None
    select = None
    if args.command == "check":               # only the work the verdicts need
        from derive.export.formats import gives_verdict as select
    rec = derive_text(text, name, symbolic=symbolic, max_terms=args.max_terms,
                      mc_samples=args.samples, mc_seed=args.seed,
                      mc_distribution=args.distribution, select=select, digits=args.digits)
    if args.command == "record":
        fmt = _format_of(args)
        from derive.export.formats import render
        figures = any(r.extra.get("figures") for r in rec.results)
        with running(rec.clock), phase("export"):
            if fmt == "md" and args.output and figures:
                with figures_captured():  # the figures are drawn beside the record
                    data = render(rec, fmt, args)
            else:
                data = render(rec, fmt, args)
        if getattr(args, "profile", False):
            sys.stderr.write(rec.clock.line() + "\n")
        if args.output:
            write_atomic(args.output, data)       # every format, the PDF too: written here only
        else:
            write_stdout(data)
        return 0
    if args.command == "code":
        from derive.export.formats import render_code
        files = render_code(rec, args.lang, args)
        if args.output:
            for path, content in files.items():
                write_atomic(path, content)
        else:
            write_stdout(next(iter(files.values())))
        return 0
    if args.command == "check":
        from derive.export.formats import check_lines
        lines, ok = check_lines(rec)
        write_stdout("".join(line + "\n" for line in lines))
        return 0 if ok else 1
    return 2


def _protected(args) -> list:
    """Files no output may replace: the sheet."""
    return [args.sheet] if args.sheet != "-" and os.path.isfile(args.sheet) else []


def run(argv: Optional[list] = None) -> int:
    """Parse ``argv`` and do the work, writing outputs directly; errors propagate."""
    return _run(_parser().parse_args(argv))


# ------------------------------------------------------------------ results and messages
@dataclass
class _Result:
    """What a finished piece of work hands to :func:`_deliver`."""
    code: int
    stdout: list = field(default_factory=list)
    stderr: str = ""
    files: dict = field(default_factory=dict)
    on_error: set = field(default_factory=set)    # files written also by a failed run


def _missing_package(exc: BaseException) -> Optional[str]:
    """An install hint if ``exc`` (or an exception it was raised while handling) is a failed
    import of a third-party module."""
    seen = set()
    e = exc
    while e is not None and id(e) not in seen:
        seen.add(id(e))
        if isinstance(e, ImportError) and e.name:
            top = e.name.split(".")[0]
            if top != "derive" and top not in getattr(sys, "stdlib_module_names", ()):
                dist = DISTRIBUTIONS.get(top, top)
                if isinstance(e, ModuleNotFoundError):
                    return (f"derive needs the package {dist} (module {top!r} is not "
                            f"installed): pip install {dist}")
                return (f"derive cannot use the installed {dist} ({e}): "
                        f"pip install --upgrade {dist}")
        e = e.__cause__ or e.__context__
    return None


def _timeout_message(timeout: float) -> str:
    return (f"derive: error: gave up after {timeout:g} s (--timeout); keep fewer symbols "
            "symbolic with --symbolic or a 'numeric' line\n")


def _execute(args, stdin_data: Optional[bytes] = None, in_worker: bool = False) -> _Result:
    """Do the work of ``args`` with its outputs captured; every error becomes a message."""
    from derive.export.files import capture
    with capture() as cap:
        try:
            code, err = _run(args, stdin_data), ""
        except SheetError as e:
            code, err = 2, e.format() + "\n"
        except DeriveError as e:
            hint = _missing_package(e)
            code, err = 2, f"derive: error: {hint or e}\n"
        except RecursionError:
            code, err = 2, "derive: error: the sheet nests too deeply to be handled\n"
        except MemoryError:
            code, err = 2, ("derive: error: ran out of memory; keep fewer symbols symbolic "
                            "with --symbolic or a 'numeric' line\n")
        except Exception as e:   # a bug or a broken install: say so plainly
            hint = _missing_package(e)
            if hint:
                code, err = 2, f"derive: error: {hint}\n"
            elif os.environ.get("DERIVE_DEBUG"):
                if not in_worker:
                    raise
                import traceback
                code, err = 3, "".join(traceback.format_exception(e))
            else:
                code, err = 3, (f"derive: internal error: {type(e).__name__}: {e} (please "
                                "report it; set DERIVE_DEBUG=1 for details)\n")
    return _Result(code, cap.stdout, err, cap.files, cap.on_error)


def _deliver(res: _Result, protect=()) -> int:
    """Write the files and standard output of a finished piece of work; its exit status.
    A failed run (status 2 or 3) writes only its ``on_error`` files; no file may replace
    one of ``protect`` (the sheet)."""
    from derive.export.files import commit, write_stdout
    try:
        commit(res, failed=res.code >= 2, protect=protect)
    except OSError as e:
        sys.stderr.write(res.stderr + f"derive: error: cannot write {e.filename}: "
                                      f"{e.strerror or e}\n")
        return 2
    try:
        for chunk in res.stdout:
            write_stdout(chunk)          # outside a capture: straight to standard output
        sys.stdout.flush()
    except BrokenPipeError:
        try:   # nothing more can reach the reader; keep the interpreter's exit quiet
            os.dup2(os.open(os.devnull, os.O_WRONLY), sys.stdout.fileno())
        except (OSError, ValueError, AttributeError):
            pass
        return 0 if res.code == 0 else res.code
    if res.stderr:
        sys.stderr.write(res.stderr)
    return res.code


# ------------------------------------------------------------------ the deadline
def _read_stdin_until(deadline: float) -> Optional[bytes]:
    """Standard input (up to just over the size limit), read before the deadline; ``None``
    where standard input is not a real file descriptor (the worker then reads it)."""
    try:
        fd = sys.stdin.fileno()
    except (AttributeError, OSError, ValueError):
        return None
    buf = bytearray()
    while len(buf) <= MAX_SHEET_BYTES:
        left = deadline - time.monotonic()
        if left <= 0:
            raise _Timeout()
        ready, _, _ = select.select([fd], [], [], left)
        if not ready:
            continue
        chunk = os.read(fd, 1 << 16)
        if not chunk:
            break
        buf += chunk
    return bytes(buf)


def _kill_group(pid: int) -> None:
    try:
        os.killpg(pid, signal.SIGKILL)
    except OSError:
        try:
            os.kill(pid, signal.SIGKILL)
        except OSError:
            pass


def _die_with_parent() -> None:
    """Linux: the worker gets SIGKILL if the supervising process dies."""
    try:
        import ctypes
        libc = ctypes.CDLL(None, use_errno=True)
        libc.prctl(1, signal.SIGKILL, 0, 0, 0)      # PR_SET_PDEATHSIG
    except Exception:
        pass


def _worker(args, stdin_data, r: int, w: int, parent: int, tmp: str) -> None:
    """The forked worker: do the work, send the pickled :class:`_Result`, exit. Never
    returns and never writes an output file or standard output."""
    status = 0
    try:
        try:
            os.setpgid(0, 0)
        except OSError:
            pass
        os.close(r)
        _die_with_parent()
        if os.getppid() != parent:
            os._exit(1)
        null = os.open(os.devnull, os.O_RDWR)
        os.dup2(null, 1)                 # stray prints of libraries go nowhere
        tempfile.tempdir = tmp           # TeX's work folders: removed by the parent
        os.environ["TMPDIR"] = tmp
        try:
            res = _execute(args, stdin_data, in_worker=True)
        except BaseException as e:
            res = _Result(3, [], f"derive: internal error: {type(e).__name__}: {e} (please "
                                 "report it; set DERIVE_DEBUG=1 for details)\n")
        payload = pickle.dumps(res, protocol=pickle.HIGHEST_PROTOCOL)
        view = memoryview(payload)
        while view:
            view = view[os.write(w, view):]
        os.close(w)
    except BaseException:
        status = 1
    finally:
        os._exit(status)


_warm = False


def _warm_up() -> None:
    """Import the modules every run needs and build the grammar's parser in this process,
    so that forked workers inherit them instead of importing them again. Done (once) for
    in-process callers of :func:`main` with many runs (the test suite); a one-shot command
    leaves all of it to its worker, inside the deadline."""
    global _warm
    if _warm:
        return
    import importlib
    for mod in ("sheet.parser", "circuit.build", "solver.well_posed", "analyses.run",
                "export.formats", "export.json_record", "export.markdown"):
        try:
            importlib.import_module(f"derive.{mod}")
        except ImportError:          # reported by the worker, with an install hint
            return
    from derive.sheet.grammar import get_parser
    get_parser()
    _warm = True


def _supervised(args, timeout: float, warm: bool = False) -> _Result:
    """Run the work in a forked worker; kill its process group when ``timeout`` passes."""
    deadline = time.monotonic() + timeout
    try:
        stdin_data = _read_stdin_until(deadline) if args.sheet == "-" else None
    except _Timeout:
        return _Result(2, [], _timeout_message(timeout))
    if warm:
        try:
            _warm_up()
        except Exception:
            pass                     # the worker meets (and reports) the same problem
        if time.monotonic() >= deadline:
            return _Result(2, [], _timeout_message(timeout))
    tmp = tempfile.mkdtemp(prefix="derive-work-")
    r, w = os.pipe()
    for stream in (sys.stdout, sys.stderr):
        try:
            stream.flush()
        except (OSError, ValueError):
            pass
    parent = os.getpid()
    pid = os.fork()
    if pid == 0:
        _worker(args, stdin_data, r, w, parent, tmp)   # never returns
    os.close(w)
    try:
        os.setpgid(pid, pid)
    except OSError:
        pass
    previous = {}

    def on_signal(signum, frame):
        raise _Stopped(signum)

    try:
        for sig in (signal.SIGTERM, signal.SIGHUP):
            previous[sig] = signal.signal(sig, on_signal)
    except ValueError:           # not the main thread: no handlers, the group still dies
        pass
    chunks, finished = [], False
    try:
        while True:
            left = deadline - time.monotonic()
            if left <= 0:
                break
            ready, _, _ = select.select([r], [], [], left)
            if ready:
                chunk = os.read(r, 1 << 20)
                if not chunk:
                    finished = True
                    break
                chunks.append(chunk)
    finally:
        os.close(r)
        _kill_group(pid)        # on time-out, and stragglers (TeX, gcc) of a finished run
        _, status = os.waitpid(pid, 0)
        for sig, handler in previous.items():
            signal.signal(sig, handler)
        shutil.rmtree(tmp, ignore_errors=True)
    if not finished:
        return _Result(2, [], _timeout_message(timeout))
    try:
        return pickle.loads(b"".join(chunks))
    except Exception:
        how = (f"was ended by signal {os.WTERMSIG(status)}" if os.WIFSIGNALED(status)
               else f"exited with status {os.WEXITSTATUS(status)}")
        return _Result(3, [], f"derive: internal error: the worker process {how} without an "
                              "answer (out of memory?) (please report it)\n")


def _is_terminal(stream) -> bool:
    try:
        return bool(stream.isatty())
    except (AttributeError, OSError, ValueError):
        return False


def main(argv: Optional[list] = None) -> int:
    in_process = argv is not None        # called from Python, perhaps many times
    if argv is None:
        argv = sys.argv[1:]
    try:
        args = _parser().parse_args(list(argv))
    except SystemExit as e:          # usage error (message already printed) or --help
        return e.code if isinstance(e.code, int) else (0 if e.code is None else 2)
    args.tty = _is_terminal(sys.stdout)      # decided here: a worker's stdout is /dev/null
    try:
        if args.timeout is not None and hasattr(os, "fork"):
            res = _supervised(args, args.timeout, warm=in_process)
        else:
            res = _execute(args)
        return _deliver(res, _protected(args))
    except KeyboardInterrupt:
        return 130
    except _Stopped as e:
        return 128 + e.signum
