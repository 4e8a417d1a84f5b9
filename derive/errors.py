"""The one error root of derive.

Every problem with a sheet is a :class:`SheetError`: it carries the file name, the 1-based
line and column, and the offending source line, and prints as

    FILE:LINE:COL: error: message
        the offending line
        ^

so the command line can turn any of them into that message and exit status 2.
"""
from __future__ import annotations


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
        lines = self.source.splitlines()
        if self.line > len(lines):
            return None
        return lines[self.line - 1]

    def format(self) -> str:
        name = self.filename or "<sheet>"
        head = f"{name}:{max(self.line, 1)}:{max(self.col, 1)}: error: {self.message}"
        out = [head]
        text = self.source_line()
        if text is not None:
            shown = text.replace("\t", " ")
            if len(shown) > 200:
                shown = shown[:200] + " ..."
            out.append("    " + shown)
            out.append("    " + " " * max(self.col - 1, 0) + "^")
        if self.hint:
            out.append(f"hint: {self.hint}")
        return "\n".join(out)

    def __str__(self) -> str:
        return self.format()


class NotAvailableYet(SheetError):
    """A request the language accepts but whose analysis is not built yet."""


class TooLarge(SheetError):
    """The algebra would run away (estimated output size above the limit)."""
