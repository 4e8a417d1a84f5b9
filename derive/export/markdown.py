"""The Markdown record, rendered by jinja2 from ``templates/record.md.j2``.

User text (titles, notes, names) goes through :func:`md_text`, so it can never become
Markdown or HTML markup; mathematics is written in ``$…$`` and ``$$…$$``.
"""
from __future__ import annotations

import os
import re
from typing import Optional
from urllib.parse import quote

import jinja2
from jinja2.sandbox import ImmutableSandboxedEnvironment

from derive.export import plots
from derive.export.view import digits_of, view
from derive.export.resources import template_dir
from derive.sheet.units import DEFAULT_DIGITS, format_value


def environment(extra_dir: Optional[str] = None,
                digits: int = DEFAULT_DIGITS) -> jinja2.Environment:
    """The template environment: sandboxed (a template, which may be a user's ``--template``
    folder shared by a colleague, can read the record's view but cannot reach Python
    internals, change objects or run code; jinja2's immutable sandbox) and strict (an
    undefined name is an error, not an empty string)."""
    dirs = ([extra_dir] if extra_dir else []) + [str(template_dir())]
    env = ImmutableSandboxedEnvironment(
        loader=jinja2.FileSystemLoader(dirs), undefined=jinja2.StrictUndefined,
        autoescape=False, keep_trailing_newline=True, trim_blocks=True, lstrip_blocks=True)
    env.filters["eng"] = lambda v, unit=None: "—" if v is None else format_value(v, unit, digits)
    env.filters["md"] = md_text
    env.filters["txt"] = md_text
    env.filters["inline"] = lambda t: md_text(t, line_start=False)    # not at a line's start
    env.filters["celltxt"] = lambda t: md_text(t, line_start=False, cell=True)  # table cell
    env.filters["cell"] = lambda t: str(t).replace("|", r"\vert ")
    return env


_INLINE = set("\\`*[]$~")
# what opens a block at the start of a line: a heading, a quote, a bullet, a thematic break,
# a setext underline, an ordered-list number ("1." or "1)" followed by a space)
_LINE_START = re.compile(r"^(\s*)(#{1,6}(?=\s|$)|>|[+*-](?=\s|$)|(?:-[ \t]*){3,}$|=+\s*$"
                         r"|\d{1,9}(?=[.)](?:\s|$)))")
_TAG_START = re.compile(r"<(?=[A-Za-z/!?])")      # a raw HTML tag, comment or autolink
_ENTITY = re.compile(r"&(?=#?[A-Za-z0-9]+;)")      # an entity or character reference


def md_text(t, line_start: bool = True, cell: bool = False) -> str:
    r"""User or generated text as literal Markdown: only what CommonMark (with tables, math
    and strikethrough) could read as markup is escaped, by a backslash, and nothing else:
    ``<`` only where it would open an HTML tag or an autolink, ``&`` only where it would
    start an entity, a digit's period only where it would start a list, ``_`` only where it
    is not inside a word (``v_in`` stays), ``|`` only in a table ``cell``. Hyphens, periods,
    quotes and comparisons in running text stay as they are; no HTML entity is written.

    >>> md_text("a_b _x_ <script> $x$ - 2.5 V, it's, a < b & c, |x|")
    "a_b \\_x\\_ \\<script> \\$x\\$ - 2.5 V, it's, a < b & c, |x|"
    >>> md_text("|x|", cell=True)
    '\\|x\\|'

    >>> md_text("# not a heading"), md_text("1. not a list"), md_text("7.968 V to 8.032 V")
    ('\\# not a heading', '1\\. not a list', '7.968 V to 8.032 V')
    >>> md_text("&amp; is not an entity here")
    '\\&amp; is not an entity here'
    """
    out = []
    t = str(t)
    for k, ch in enumerate(t):
        if ch in _INLINE or (ch == "|" and cell):
            out.append("\\" + ch)
        elif ch == "_" and not (0 < k < len(t) - 1 and t[k - 1].isalnum()
                                and t[k + 1].isalnum()):
            out.append("\\_")             # intraword underscores never make emphasis
        elif ch in "\r\n":
            out.append(" ")
        else:
            out.append(ch)
    text = _ENTITY.sub(r"\\&", _TAG_START.sub(r"\\<", "".join(out)))
    m = _LINE_START.match(text) if line_start else None
    if m:
        lead, mark = m.group(1), m.group(2)
        if mark.isdigit():
            # "1." / "1)" at the start would open an ordered list
            k = len(lead) + len(mark)
            text = text[:k] + "\\" + text[k:]
        else:
            text = lead + "\\" + text[len(lead):]
    return text


def _inline(figure, digits: int = DEFAULT_DIGITS) -> str:
    """``figure`` drawn as a PNG ``data:`` URI (for a notebook, which has no file beside it)."""
    import base64
    import tempfile
    with tempfile.TemporaryDirectory(prefix="derive-fig-") as work:
        path = os.path.join(work, "figure.png")
        plots.draw(figure, path, digits)
        with open(path, "rb") as fh:
            return "data:image/png;base64," + base64.b64encode(fh.read()).decode("ascii")


def _figures(record, output: Optional[str], inline: bool = False):
    """Draw figures as PNG files beside ``output`` (or inline as data URIs); a dict per
    figure for the template."""
    out = {}
    for i, r in enumerate(record.results):
        figs = []
        for f in r.extra.get("figures") or []:
            path = None
            if inline and plots.can_draw(f):
                path = _inline(f, digits_of(record))
            elif output and plots.can_draw(f):
                stem = os.path.splitext(os.path.basename(output))[0]
                name = "".join(ch if ch.isalnum() or ch in "-_" else "-" for ch in f.name)
                file = f"{stem}-{name}.png"
                plots.draw(f, os.path.join(os.path.dirname(os.path.abspath(output)), file),
                           digits_of(record))
                path = quote(file)      # a link target: no space, bracket or parenthesis
            figs.append({"caption": getattr(f, "caption", ""), "path": path})
        out[i] = figs
    return out


def record_markdown(record, template_dir_override: Optional[str] = None,
                    output: Optional[str] = None, inline_figures: bool = False) -> str:
    """The Markdown record; figures drawn beside ``output`` as PNG files, or embedded as data
    URIs with ``inline_figures``, or left as captions."""
    env = environment(template_dir_override, digits_of(record))
    v = view(record)
    figs = _figures(record, output, inline_figures)
    for i, r in enumerate(v["results"]):
        r["figures"] = figs[i]
    return env.get_template("record.md.j2").render(v=v, record=v, circuit=record.circuit)
