"""The Markdown record, rendered by jinja2 from ``templates/record.md.j2``."""
from __future__ import annotations

from typing import Optional

import jinja2

from .export_json import record_dict
from .resources import template_dir
from .units import format_eng


def environment(extra_dir: Optional[str] = None) -> jinja2.Environment:
    dirs = ([extra_dir] if extra_dir else []) + [str(template_dir())]
    env = jinja2.Environment(loader=jinja2.FileSystemLoader(dirs),
                             undefined=jinja2.StrictUndefined, autoescape=False,
                             keep_trailing_newline=True, trim_blocks=True, lstrip_blocks=True)
    env.filters["eng"] = lambda v, unit=None: "—" if v is None else format_eng(v, unit)
    env.filters["md"] = md_text
    return env


def md_text(t) -> str:
    """User text as literal Markdown: every character that Markdown or HTML could read as
    markup is escaped."""
    out = []
    for ch in str(t):
        if ch in "\\`*_{}[]()#+-.!|<>$&%~^\"'":
            out.append("&#%d;" % ord(ch) if ch in "<>&\"'" else "\\" + ch)
        elif ch in "\r\n":
            out.append(" ")
        else:
            out.append(ch)
    return "".join(out)


def record_markdown(record, template_dir_override: Optional[str] = None) -> str:
    env = environment(template_dir_override)
    data = record_dict(record.circuit, record.results)
    return env.get_template("record.md.j2").render(record=data, circuit=record.circuit)
