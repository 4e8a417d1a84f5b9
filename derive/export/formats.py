"""Dispatch from a record to an output format (``derive record --format``, ``derive code``,
``derive check``). Each format lives in its own module."""
from __future__ import annotations

from derive.errors import DeriveError


def render(record, fmt: str, args=None):
    """The record in format ``fmt`` ('md', 'json', 'tex', 'pdf') as str or bytes."""
    template = getattr(args, "template", None) if args is not None else None
    if fmt == "json":
        return record.to_json()
    if fmt == "md":
        import jinja2
        from derive.export.markdown import record_markdown
        try:
            return record_markdown(record, template, getattr(args, "output", None))
        except jinja2.TemplateError as e:      # a user's --template folder
            where = f" (line {e.lineno})" if getattr(e, "lineno", None) else ""
            raise DeriveError(f"the record template cannot be used{where}: {e}") from None
    if fmt in ("tex", "pdf"):
        try:
            from derive.export import latex as export_latex
        except ImportError:
            raise DeriveError("LaTeX and PDF records are not available yet")
        return export_latex.render(record, fmt, args)
    raise DeriveError(f"unknown format {fmt!r}")


def render_code(record, lang: str, args=None) -> dict:
    try:
        from derive.export import code as export_code
    except ImportError:
        raise DeriveError("code generation is not available yet")
    return export_code.render(record, lang, args)


def check_lines(record):
    """(lines, ok) of ``derive check``: every ``check`` claim, then every verdict of ``find
    stress``; ``ok`` is false (exit status 1) when a claim fails or a stress limit is
    exceeded."""
    try:
        from derive.analyses import claims, stress
    except ImportError:
        raise DeriveError("claim checks are not available yet")
    lines, ok = claims.check_lines(record)
    more, stress_ok = stress.check_lines(record)
    if more:
        lines = [x for x in lines if x != claims.NO_CLAIMS] + more
    return lines, ok and stress_ok
