"""Dispatch from a record to an output format (``derive record --format``, ``derive code``,
``derive check``). Each format lives in its own module."""
from __future__ import annotations

from derive.clock import phase, running
from derive.errors import DeriveError


def render(record, fmt: str, args=None):
    """The record in format ``fmt`` ('md', 'json', 'tex', 'pdf') as str or bytes; the time
    is charged to the ``export`` phase of the record's clock (:mod:`derive.clock`)."""
    clock = getattr(record, "clock", None)
    with running(clock), phase("export"):
        return _render(record, fmt, args)


def _render(record, fmt: str, args=None):
    template = getattr(args, "template", None) if args is not None else None
    if fmt == "json":
        from derive.export.json_record import record_json
        return record_json(record.circuit, record.results)
    if fmt == "text":
        from derive.export.terminal import record_text
        sheet = getattr(args, "sheet", None) if args is not None else None
        return record_text(record, sheet if sheet and sheet != "-" else "SHEET")
    if fmt == "md":
        import jinja2
        from derive.export.markdown import record_markdown
        try:
            return record_markdown(record, template, getattr(args, "output", None))
        except jinja2.TemplateError as e:      # a user's --template folder
            raise DeriveError(f"the record template cannot be used{_where(e)}: {e}") \
                from None
    if fmt in ("tex", "pdf"):
        from derive.export import latex as export_latex
        return export_latex.render(record, fmt, args)
    raise DeriveError(f"unknown format {fmt!r}")


def _where(e) -> str:
    """Which template and line a jinja2 error comes from (a syntax error knows it; a runtime
    error, such as the sandbox refusing an attribute, is found in the traceback)."""
    name, line = getattr(e, "filename", None) or getattr(e, "name", None), \
        getattr(e, "lineno", None)
    if line is None:
        tb = e.__traceback__
        while tb is not None:
            fname = tb.tb_frame.f_code.co_filename
            if fname.endswith(".j2"):
                name, line = fname, tb.tb_lineno
            tb = tb.tb_next
    if name and line:
        return f" ({name}, line {line})"
    return f" (line {line})" if line else ""


def render_code(record, lang: str, args=None) -> dict:
    from derive.export import code as export_code
    return export_code.render(record, lang, args)


def gives_verdict(request) -> bool:
    """Whether ``derive check`` needs ``request``: its verdicts come from ``check``
    statements and ``find stress``, so no other request is derived."""
    return request.statement == "check" or request.quantity == "stress"


def check_lines(record):
    """(lines, ok) of ``derive check``: every ``check`` claim, then every verdict of ``find
    stress``; ``ok`` is false (exit status 1) when a claim fails or a stress limit is
    exceeded."""
    from derive.analyses import claims, stress
    lines, ok = claims.check_lines(record)
    more, stress_ok = stress.check_lines(record)
    if more:
        lines = [x for x in lines if x != claims.NO_CLAIMS] + more
    return lines, ok and stress_ok
