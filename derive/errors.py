"""The one error root of derive.

Every problem with a sheet is a :class:`SheetError`: it carries the file name, the 1-based
line and column, and the offending source line, and prints as

    FILE:LINE:COL: error: message
        the offending line
        ^

so the command line can turn any of them into that message and exit status 2.
"""
from __future__ import annotations

import unicodedata

WINDOW = 160        # a longer source line is shown as a window of this many characters


def lexer_lines(source: str) -> list:
    """The source's lines as the sheet lexer counts them: only ``\n`` ends a line (a
    ``\r`` before it belongs to the line break). U+2028, NEL, VT, FF, FS or a lone CR do
    not start a new line, unlike :meth:`str.splitlines`."""
    lines = source.split("\n")
    if lines and lines[-1] == "" and len(lines) > 1:
        lines.pop()
    return [l[:-1] if l.endswith("\r") else l for l in lines]


def escaped(ch: str) -> str:
    """How one character of the sheet is shown on a terminal: control, format and
    separator characters as escapes (never raw), a tab as a space, others as they are."""
    if ch == "\t":
        return " "
    if unicodedata.category(ch) in ("Cc", "Cf", "Zl", "Zp", "Cs", "Co", "Cn"):
        o = ord(ch)
        return f"\\x{o:02x}" if o < 0x100 else f"\\u{o:04x}" if o < 0x10000 else f"\\U{o:08x}"
    return ch


def _width(text: str) -> int:
    """Terminal columns of ``text`` (wide East Asian characters take two, combining marks
    none)."""
    return sum(0 if unicodedata.combining(c) else
               2 if unicodedata.east_asian_width(c) in ("W", "F") else 1 for c in text)


def shown_line(text: str, col: int) -> tuple:
    """(displayed line, caret indent in columns) of source line ``text`` with the caret at
    1-based character column ``col``: characters escaped, and a long line cut to a window
    around the column with ``...`` at the cut ends."""
    col = max(1, min(col, len(text) + 1))
    start, end = 0, len(text)
    if len(text) > WINDOW:
        start = max(0, min(col - 1 - WINDOW // 2, len(text) - WINDOW))
        end = min(len(text), start + WINDOW)
    pre = "..." if start > 0 else ""
    post = "..." if end < len(text) else ""
    before = "".join(escaped(c) for c in text[start:col - 1])
    rest = "".join(escaped(c) for c in text[col - 1:end])
    return pre + before + rest + post, _width(pre + before)


def escape_text(text: str) -> str:
    """A message with any control characters of the sheet escaped."""
    return "".join(c if c == "\n" else escaped(c) if c != "\t" else "\\t" for c in text)


class DeriveError(Exception):
    """Root of every error derive raises on purpose."""


class SheetError(DeriveError):
    """A sheet is invalid: syntax, unknown name, singular circuit, ...

    >>> e = SheetError("unknown node 'x'", line=2, col=5, source="a\\nfoo x bar\\n", filename="s.eqv")
    >>> print(e.format())
    s.eqv:2:5: error: unknown node 'x'
        foo x bar
            ^
    """

    def __init__(self, message: str, line: int = 0, col: int = 0, source: str | None = None,
                 filename: str | None = None, hint: str | None = None):
        super().__init__(message)
        self.message = message
        self.line = line
        self.col = col
        self.source = source
        self.filename = filename
        self.hint = hint

    def with_context(self, source: str | None = None, filename: str | None = None) -> "SheetError":
        if self.source is None and source is not None:
            self.source = source
        if self.filename is None and filename is not None:
            self.filename = filename
        return self

    def source_line(self) -> str | None:
        if self.source is None or self.line < 1:
            return None
        lines = lexer_lines(self.source)
        if self.line > len(lines):
            return None
        return lines[self.line - 1]

    def format(self) -> str:
        name = self.filename or "<sheet>"
        head = (f"{escape_text(name)}:{max(self.line, 1)}:{max(self.col, 1)}: error: "
                f"{escape_text(self.message)}")
        out = [head]
        text = self.source_line()
        if text is not None:
            shown, indent = shown_line(text, self.col)
            out.append("    " + shown)
            out.append("    " + " " * indent + "^")
        if self.hint:
            out.append(f"hint: {escape_text(self.hint)}")
        return "\n".join(out)

    def __str__(self) -> str:
        return self.format()


class NotAvailableYet(SheetError):
    """A request the language accepts but whose analysis is not built yet."""


class TooLarge(SheetError):
    """The algebra would run away (estimated output size above the limit)."""
