"""The record's summary as plain text for a terminal (``derive record`` with no ``-o`` when
standard output is a terminal).

No Markdown and no HTML: the title, cautions, notes and each request's answers from the
shared view (:func:`derive.export.view.view`), labels aligned in a column, closed forms in
the record's ``expr`` syntax, and at the end one line saying how to get the full record.
Text from the sheet (title, notes, names) is shown with control characters escaped, so a
sheet cannot send terminal escape sequences.
"""
from __future__ import annotations

import shutil
import textwrap

from derive.errors import escaped
from derive.export.view import view

FORM_WIDTH = 56         # a longer closed form puts its value on the next line
LABEL_WIDTH = 32        # a longer label puts its text on the next line


def _safe(t) -> str:
    return "".join(escaped(ch) for ch in str(t).replace("\r", " ").replace("\n", " "))


def _width() -> int:
    return max(60, min(shutil.get_terminal_size((100, 24)).columns, 120))


def _wrap(text: str, first: str, rest: str, width: int) -> list:
    return textwrap.wrap(text, width, initial_indent=first, subsequent_indent=rest,
                         break_long_words=False, break_on_hyphens=False) or [first.rstrip()]


def _items(items, width: int) -> list:
    """One request's summary: its quantities as ``name = form   = value`` with the values
    in one column, then the labelled lines (``label: text``)."""
    out = []
    plain = [(_safe(i.get("plain", "") if i.get("math") else ""), _safe(i["text"]))
             for i in items if not i["label"]]
    col = max((len(a) for a, _ in plain if len(a) <= FORM_WIDTH), default=0)
    for left, right in plain:
        if len(left) > FORM_WIDTH:
            out += _wrap(left, "  ", "      ", width)
            out += _wrap(right, "      ", "      ", width) if right else []
        else:
            head = "  " + left.ljust(col) + "  "
            out += _wrap(right, head, " " * len(head), width) if right else [head.rstrip()]
    labelled = [(_safe(i["label"]) + ":",
                 " ".join(x for x in (_safe(i.get("plain", "") if i.get("math") else ""),
                                      _safe(i["text"])) if x))
                for i in items if i["label"]]
    lcol = max((len(a) for a, _ in labelled if len(a) <= LABEL_WIDTH), default=0)
    for label, text in labelled:
        if len(label) > LABEL_WIDTH:            # a long label: its text on the next lines
            out += ["  " + label] + _wrap(text, "      ", "      ", width)
            continue
        head = "  " + label.ljust(lcol) + " "
        out += _wrap(text, head, " " * len(head), width) if text else [head.rstrip()]
    return out


def record_text(record, sheet: str = "SHEET") -> str:
    """The plain-text summary of ``record``; ``sheet`` is named in the closing hint."""
    v = view(record)
    width = _width()
    out = [_safe(v["title"]), "=" * min(len(_safe(v["title"])), width)]
    for n in v["notes"]:
        out += _wrap(_safe(n), "", "", width)
    for c in v["cautions"]:
        out += [""] + _wrap(_safe(c), "CAUTION: ", "         ", width)
    for r in v["results"]:
        out += ["", _safe(r["request"])]
        for n in r["notes"]:
            out += _wrap(_safe(n), "  note: ", "        ", width)
        out += _items(r["summary"], width)
    if v["verification"]:
        said = v["verification"].replace("equations displayed below", "equations of the full "
                                         "record").replace("equation displayed below",
                                                           "equation of the full record")
        out += [""] + _wrap(_safe(said), "", "", width)
    name = _safe(sheet)
    # one line, not wrapped (a command to copy)
    out += ["", f"Full record with every step: derive record {name} -o record.pdf (or .md, "
                ".tex, .json), or pipe the output for Markdown."]
    return "\n".join(out) + "\n"
