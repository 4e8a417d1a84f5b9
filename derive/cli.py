"""The command line: a thin layer that turns the error root into a message and an exit code.

    derive record SHEET [-o FILE] [--format md|tex|pdf|json] [--template DIR]
    derive code   SHEET [--lang c|python] [-o FILE] [--with-tests]
    derive check  SHEET

Exit status: 0 success, 1 a ``check`` claim does not hold (``derive check``), 2 an invalid
sheet (``FILE:LINE:COL: error: ...`` and the line on standard error), 3 an internal error.
"""
from __future__ import annotations

import argparse
import os
import signal
import sys
from typing import Optional

from .errors import DeriveError, SheetError

MAX_SHEET_BYTES = 1_000_000
FORMATS = ("md", "tex", "pdf", "json")


def _parser() -> argparse.ArgumentParser:
    p = argparse.ArgumentParser(prog="derive", description="Exact derivations for linear "
                                "circuits, written up as design-calculation records.")
    sub = p.add_subparsers(dest="command", required=True)

    def common(sp):
        sp.add_argument("sheet", help="the sheet (.eqv), or - for standard input")
        sp.add_argument("--symbolic", metavar="NAMES", default=None,
                        help="keep only these symbols symbolic (comma separated); the others "
                             "take their nominal values")
        sp.add_argument("--max-terms", type=float, default=2e6, metavar="N",
                        help="refuse to expand a determinant estimated above N terms")
        sp.add_argument("--timeout", type=float, default=None, metavar="SECONDS",
                        help="give up after this many seconds")
        sp.add_argument("--samples", type=int, default=100_000, metavar="N",
                        help="Monte Carlo samples of tolerance analyses (default 100000)")
        sp.add_argument("--seed", type=int, default=1, help="Monte Carlo seed (default 1)")
        sp.add_argument("--distribution", choices=("uniform", "normal"), default="uniform",
                        help="parts spread uniformly within tolerance, or normally with the "
                             "tolerance as 3 sigma")

    r = sub.add_parser("record", help="write the design-calculation record")
    common(r)
    r.add_argument("-o", "--output", default=None, help="output file (format from extension)")
    r.add_argument("--format", choices=FORMATS, default=None)
    r.add_argument("--template", default=None, metavar="DIR",
                   help="a folder of templates that override the built-in ones")
    c = sub.add_parser("code", help="requested formulas as C or Python functions")
    common(c)
    c.add_argument("--lang", choices=("c", "python"), default="python")
    c.add_argument("-o", "--output", default=None)
    c.add_argument("--with-tests", action="store_true",
                   help="also write exact test vectors and a test program")
    k = sub.add_parser("check", help="verify the sheet's check claims (exit 1 if one fails)")
    common(k)
    return p


class _Timeout(Exception):
    pass


def _read(path: str) -> tuple[str, str]:
    if path == "-":
        data = sys.stdin.buffer.read(MAX_SHEET_BYTES + 1)
        name = "<stdin>"
    else:
        name = path
        try:
            size = os.path.getsize(path)
        except OSError as e:
            raise SheetError(f"cannot read the sheet: {e.strerror}", 0, 0, filename=path)
        if size > MAX_SHEET_BYTES:
            raise SheetError(f"the sheet is {size} bytes; sheets over {MAX_SHEET_BYTES} bytes "
                             "are refused", 0, 0, filename=path)
        with open(path, "rb") as f:
            data = f.read(MAX_SHEET_BYTES + 1)
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
    if args.format:
        return args.format
    if args.output:
        ext = os.path.splitext(args.output)[1].lower().lstrip(".")
        return {"markdown": "md", "md": "md", "tex": "tex", "pdf": "pdf", "json": "json"}.get(
            ext, "md")
    return "md"


def run(argv: Optional[list] = None) -> int:
    args = _parser().parse_args(argv)
    from . import derive_text
    from .output import write_atomic
    text, name = _read(args.sheet)
    symbolic = [s.strip() for s in args.symbolic.split(",") if s.strip()] \
        if args.symbolic is not None else None
    if args.samples < 1:
        raise SheetError("--samples must be at least 1", 0, 0, filename=name)
    rec = derive_text(text, name, symbolic=symbolic, max_terms=args.max_terms,
                      mc_samples=args.samples, mc_seed=args.seed,
                      mc_distribution=args.distribution)
    if args.command == "record":
        fmt = _format_of(args)
        from .exporters import render
        data = render(rec, fmt, args)
        if args.output:
            if not isinstance(data, (bytes, bytearray)) or fmt != "pdf":
                write_atomic(args.output, data)
        else:
            if isinstance(data, (bytes, bytearray)):
                sys.stdout.buffer.write(data)
            else:
                sys.stdout.write(data)
        return 0
    if args.command == "code":
        from .exporters import render_code
        files = render_code(rec, args.lang, args)
        if args.output:
            for path, content in files.items():
                write_atomic(path, content)
        else:
            sys.stdout.write(next(iter(files.values())))
        return 0
    if args.command == "check":
        from .exporters import check_lines
        lines, ok = check_lines(rec)
        sys.stdout.write("".join(line + "\n" for line in lines))
        return 0 if ok else 1
    return 2


def main(argv: Optional[list] = None) -> int:
    timeout = None
    if argv is None:
        argv = sys.argv[1:]
    if "--timeout" in argv:
        try:
            timeout = float(argv[argv.index("--timeout") + 1])
        except (IndexError, ValueError):
            timeout = None

    def on_alarm(signum, frame):
        raise _Timeout()

    if timeout and hasattr(signal, "SIGALRM"):
        signal.signal(signal.SIGALRM, on_alarm)
        signal.setitimer(signal.ITIMER_REAL, timeout)
    try:
        return run(argv)
    except SheetError as e:
        sys.stderr.write(e.format() + "\n")
        return 2
    except DeriveError as e:
        sys.stderr.write(f"derive: error: {e}\n")
        return 2
    except _Timeout:
        sys.stderr.write(f"derive: error: gave up after {timeout:g} s (--timeout); keep fewer "
                         "symbols symbolic with --symbolic or a 'numeric' line\n")
        return 2
    except RecursionError:
        sys.stderr.write("derive: error: the sheet nests too deeply to be handled\n")
        return 2
    except KeyboardInterrupt:
        return 130
    except BrokenPipeError:
        return 0
    except Exception as e:   # a bug: say so plainly, no traceback unless asked for
        if os.environ.get("DERIVE_DEBUG"):
            raise
        sys.stderr.write(f"derive: internal error: {type(e).__name__}: {e} (please report it; "
                         "set DERIVE_DEBUG=1 for details)\n")
        return 3
    finally:
        if timeout and hasattr(signal, "SIGALRM"):
            signal.setitimer(signal.ITIMER_REAL, 0)
