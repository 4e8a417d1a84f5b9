"""The Markdown record, rendered by jinja2 from ``templates/record.md.j2``.

User text (titles, notes, names) goes through :func:`md_text`, so it can never become
Markdown or HTML markup; mathematics is written in ``$…$`` and ``$$…$$``.
"""
from __future__ import annotations

import os
from typing import Optional
from urllib.parse import quote

import jinja2

from derive.export.view import view
from derive.export.resources import template_dir
from derive.sheet.units import format_eng


def environment(extra_dir: Optional[str] = None) -> jinja2.Environment:
    dirs = ([extra_dir] if extra_dir else []) + [str(template_dir())]
    env = jinja2.Environment(loader=jinja2.FileSystemLoader(dirs),
                             undefined=jinja2.StrictUndefined, autoescape=False,
                             keep_trailing_newline=True, trim_blocks=True, lstrip_blocks=True)
    env.filters["eng"] = lambda v, unit=None: "—" if v is None else format_eng(v, unit)
    env.filters["md"] = md_text
    env.filters["txt"] = md_text
    env.filters["cell"] = lambda t: str(t).replace("|", r"\vert ")
    return env


def md_text(t) -> str:
    """User text as literal Markdown: every character that Markdown or HTML could read as
    markup is escaped.

    >>> md_text("a_b <script> $x$")
    'a\\\\_b &#60;script&#62; \\\\$x\\\\$'
    """
    out = []
    for ch in str(t):
        if ch in "\\`*_{}[]()#+-.!|<>$&%~^\"'":
            out.append("&#%d;" % ord(ch) if ch in "<>&\"'" else "\\" + ch)
        elif ch in "\r\n":
            out.append(" ")
        else:
            out.append(ch)
    return "".join(out)


def _figures(record, output: Optional[str]):
    """Draw figures as PNG files beside ``output``; a dict per figure for the template."""
    out = {}
    for i, r in enumerate(record.results):
        figs = []
        for f in r.extra.get("figures") or []:
            path = None
            if output and hasattr(f, "draw"):
                stem = os.path.splitext(os.path.basename(output))[0]
                name = "".join(ch if ch.isalnum() or ch in "-_" else "-" for ch in f.name)
                file = f"{stem}-{name}.png"
                f.draw(os.path.join(os.path.dirname(os.path.abspath(output)), file))
                path = quote(file)      # a link target: no space, bracket or parenthesis
            figs.append({"caption": getattr(f, "caption", ""), "path": path})
        out[i] = figs
    return out


def record_markdown(record, template_dir_override: Optional[str] = None,
                    output: Optional[str] = None) -> str:
    env = environment(template_dir_override)
    v = view(record)
    figs = _figures(record, output)
    for i, r in enumerate(v["results"]):
        r["figures"] = figs[i]
    return env.get_template("record.md.j2").render(v=v, record=v, circuit=record.circuit)
