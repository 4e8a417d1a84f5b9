"""Load the sheet grammar and build the (cached) lark parser.

The grammar lives in ``derive/grammar/sheet.lark`` inside an installed package and in the
repository's top-level ``grammar/sheet.lark`` in a source checkout; the first one found wins.
"""
from __future__ import annotations

from functools import lru_cache
from pathlib import Path

from lark import Lark

GRAMMAR_NAME = "sheet.lark"


def grammar_path() -> Path:
    """The path of ``sheet.lark``: the packaged copy first, else the source checkout's."""
    here = Path(__file__).resolve().parent
    try:  # the installed package (importlib.resources also covers zipped installs)
        from importlib import resources
        candidate = resources.files("derive").joinpath("grammar", GRAMMAR_NAME)
        if candidate.is_file():
            return Path(str(candidate))
    except (ModuleNotFoundError, TypeError, AttributeError, NotADirectoryError):
        pass
    for candidate in (here.parent / "grammar" / GRAMMAR_NAME, here.parent.parent / "grammar" / GRAMMAR_NAME):
        if candidate.is_file():
            return candidate
    raise FileNotFoundError(f"cannot find the sheet grammar {GRAMMAR_NAME} near {here}")


@lru_cache(maxsize=None)
def grammar_text() -> str:
    return grammar_path().read_text(encoding="utf-8")


@lru_cache(maxsize=None)
def get_parser() -> Lark:
    """The sheet parser, built once: LALR with the contextual lexer and positions."""
    return Lark(grammar_text(), parser="lalr", lexer="contextual", propagate_positions=True,
                maybe_placeholders=False)


# ------------------------------------------------------------------ syntax errors in words
_READABLE = {
    "NAME": "a name", "NUMBER": "a number", "STRING": "a string in double quotes",
    "_NL": "the end of the line", "$END": "the end of the sheet", "PM": "'±'",
    "PAR": "'||'", "EQUAL": "'='", "COMMA": "','", "LPAR": "'('", "RPAR": "')'",
    "PERCENT": "'%'", "PLUS": "'+'", "MINUS": "'-'", "STAR": "'*'", "SLASH": "'/'",
    "CARET": "'^'",
}
_STATEMENT_WORDS = ("title", "note", "ground", "resistor", "conductance", "capacitor",
                    "inductor", "impedance", "admittance", "voltage source", "current source",
                    "opamp", "nominal", "port", "block", "use", "find", "solve", "check",
                    "numeric")
_OPERATORS = {"PLUS", "MINUS", "STAR", "SLASH", "CARET", "PAR"}
_EXPR_START = {"NAME", "NUMBER", "LPAR", "MINUS"}
# a single expected keyword and what it follows, for the common slips
_AFTER = {"AND": "expected 'and' after the first node",
          "BETWEEN": "expected 'between' after the name",
          "FROM": "expected 'from' after the name",
          "SOURCE": "expected 'source' (write 'voltage source' or 'current source')",
          "INPUTS": "expected 'inputs' after the op-amp name",
          "OUTPUT": "expected 'output' after the two inputs",
          "OF": "expected 'of' after the analysis word",
          "EQUALS": "expected 'equals' after the quantity",
          "FOR": "expected 'for' after the quantity"}


def _terminal_words(names, parser: Lark) -> list[str]:
    out = []
    for name in sorted(names):
        if name in _READABLE:
            out.append(_READABLE[name])
            continue
        try:
            pattern = parser.get_terminal(name).pattern
            out.append(f"'{pattern.value}'" if pattern.type == "str" else name.lower())
        except KeyError:
            out.append(name.lower())
    # a stable, readable order: words first, then symbols, end of line last
    out = sorted(set(out), key=lambda w: (w.startswith("the end"), not w[1:2].isalpha(), w))
    return out


def _join(words: list[str]) -> str:
    if len(words) <= 1:
        return "".join(words)
    return ", ".join(words[:-1]) + " or " + words[-1]


def _found(token) -> str:
    kind = token.type
    if kind in ("_NL", "$END"):
        return _READABLE[kind]
    text = str(token) if len(str(token)) <= 40 else str(token)[:37] + "..."
    if kind == "NUMBER":
        return f"the number {text}"
    if kind == "STRING":
        return f"the string {text}"
    return f"'{text}'"


def describe_syntax_error(e, source: str, parser: Lark):
    """A lark parse error as a :class:`SheetError` with a message in plain words."""
    from lark.exceptions import UnexpectedCharacters, UnexpectedEOF, UnexpectedToken

    from derive.errors import SheetError, lexer_lines

    lines = lexer_lines(source)
    if isinstance(e, UnexpectedToken) and e.token.type != "$END":
        tok, expected = e.token, set(e.expected)
        try:    # the LALR state may only be able to reduce: ask what really can follow
            if e.interactive_parser is not None:
                expected = set(e.interactive_parser.accepts()) or expected
        except Exception:  # pragma: no cover - best effort only
            pass
        line, col = tok.line, tok.column
        if tok.type == "_NL":       # point just after the last thing on the line
            line = tok.line
            col = len(lines[line - 1].split("#")[0].rstrip()) + 1 if line <= len(lines) else 1
        found = _found(tok)
        hint = None
        if {"RESISTOR", "FIND", "TITLE"} <= expected:
            if tok.type == "NAME":
                message = f"unknown statement '{tok}'"
            else:
                message = f"expected a statement, found {found}"
            hint = "a line starts with one of: " + ", ".join(_STATEMENT_WORDS)
            return SheetError(message, line, col, hint=hint)
        if {"RESISTOR", "END"} <= expected:
            word = str(tok)
            if word in ("title", "note", "ground", "port", "block", "find", "solve", "check",
                        "numeric"):
                message = f"'{word}' is not allowed inside a block"
            elif tok.type == "NAME":
                message = f"unknown statement '{word}'"
            else:
                message = f"expected a statement or 'end', found {found}"
            return SheetError(message, line, col, hint="inside a block: elements, op-amps, "
                              "'nominal', 'use', and 'end' to close it")
        if "STAR" in expected and tok.type in ("NAME", "NUMBER", "LPAR"):
            return SheetError(f"missing '*' before {found}", line, col,
                              hint="write a product with '*', e.g. 2*R or (a+b)*(c+d)")
        if _EXPR_START <= expected:
            return SheetError(f"expected a value or an expression, found {found}", line, col)
        if len(expected) == 1 and next(iter(expected)) in _AFTER:
            message = f"{_AFTER[next(iter(expected))]}, found {found}"
            return SheetError(message, line, col)
        words = _terminal_words(expected - {"PM"} if expected & _OPERATORS else expected,
                                parser)
        if expected & _OPERATORS and "_NL" in expected:
            words = [w for w in words if w not in {_READABLE[o] for o in _OPERATORS}]
            words.insert(0, "an operator")
        return SheetError(f"expected {_join(words)}, found {found}", line, col, hint=hint)
    if isinstance(e, (UnexpectedEOF, UnexpectedToken)):
        line = max(len(lines), 1)
        opened = [i for i, l in enumerate(lines, 1) if l.split("#")[0].split()[:1] == ["block"]]
        if opened:
            message = "a block is not closed: expected 'end'"
            line = opened[-1]
        else:
            message = "the sheet ends in the middle of a statement"
        return SheetError(message, line, 1)
    if isinstance(e, UnexpectedCharacters):
        char = e.char
        line, col = e.line, e.column
        if char == '"':
            return SheetError("unterminated string: a string ends with '\"' on the same line",
                              line, col)
        if char == "|":
            return SheetError("unexpected '|': the parallel operator is written '||'", line, col)
        if char == "=" and lexer_lines(source)[line - 1][col - 1:col + 1] == "==":
            return SheetError("unexpected '==': use 'check Q equals EXPR' for a claim", line, col)
        if char == "\r":
            return SheetError("a carriage return (CR) alone is not a line break", line, col,
                              hint="end lines with LF or CR LF")
        if char.isdigit() and not ("0" <= char <= "9"):
            return SheetError(f"unexpected character '{char}': a digit other than ASCII 0-9 "
                              "is not a number", line, col, hint="write numbers with the "
                              "digits 0-9")
        allowed = set(e.allowed or ())
        message = f"unexpected character '{char}'"
        if allowed and len(allowed) <= 6:
            message += f"; expected {_join(_terminal_words(allowed, parser))}"
        return SheetError(message, line, col)
    return SheetError(str(e), getattr(e, "line", 0) or 0, getattr(e, "column", 0) or 0)
