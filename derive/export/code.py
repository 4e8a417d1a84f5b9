"""``derive code``: the requested closed forms and inverted formulas as C99 or Python.

Every formula becomes a function whose parameters are its symbols (documented with their
units). Common subexpressions are eliminated (``sympy.cse``), every division and square root
is guarded (C: return ``NAN`` and set ``<prefix>_error``; Python: raise ``ValueError``), and
a result given only as a sequence of intermediates is emitted as successive locals.
:func:`render` returns ``{path: content}``; with ``--with-tests`` the exact test vectors
and test programs come from :mod:`derive.export.code_vectors`. Identifiers are sanitised to ``[A-Za-z_][A-Za-z0-9_]*``
outside both languages' keywords, and user text in comments cannot end the comment.
"""
from __future__ import annotations

import keyword
import os
import re
from dataclasses import dataclass, field
from typing import Optional

import sympy
from sympy.printing.c import C99CodePrinter
from sympy.printing.pycode import PythonCodePrinter

from derive.circuit.build import S
from derive.export.printing import to_text

C_KEYWORDS = set("""auto break case char const continue default do double else enum extern
float for goto if inline int long register restrict return short signed sizeof static struct
switch typedef union unsigned void volatile while _Bool _Complex _Imaginary bool true false
NAN INFINITY HUGE_VAL errno main math sqrt pow fabs isnan isfinite exp log printf size_t
ValueError None True False""".split())
RESERVED = C_KEYWORDS | set(keyword.kwlist) | set(getattr(keyword, "softkwlist", []))


def ident(text: str, taken: set = frozenset()) -> str:
    """A safe identifier from user-derived text, distinct from ``taken``.

    >>> ident("div1.Rt"), ident("int"), ident("9lives"), ident("__x"), ident("a*/b")
    ('div1_Rt', 'int_', 'v9lives', 'v_x', 'a_b')
    """
    s = re.sub(r"[^A-Za-z0-9_]+", "_", text).strip("_") if text.strip("_") else "v"
    if not s:
        s = "v"
    if text.startswith("__") or text.startswith("_") and len(text) > 1 and text[1].isupper():
        s = "v_" + s
    if s[0].isdigit():
        s = "v" + s
    while s in RESERVED or s in taken:
        s += "_"
    return s


def comment(text: str) -> str:
    """User text made safe inside a C block comment or a Python line comment.

    >>> comment("a */ b /* c ??/ d\\\\\\nx")
    'a * / b / * c ? ?/ d/ x'
    """
    text = "".join(ch if ch.isprintable() else " " for ch in str(text))
    text = text.replace("\\", "/")
    while "*/" in text or "/*" in text or "??" in text:
        text = text.replace("*/", "* /").replace("/*", "/ *").replace("??", "? ?")
    return text


@dataclass
class Formula:
    name: str
    params: list                 # [(Symbol in expressions, unit text)]
    defs: list                   # [(Symbol, expr)] successive locals (sequence form)
    final: sympy.Expr
    unit: Optional[str]
    what: str
    origin: str
    forward: Optional[tuple] = None   # (closed form, solved symbol, measured symbol)
    lines: list = field(default_factory=list)


def _function_name(req, qname: str, extra: dict) -> str:
    if req.statement == "solve":
        meas = extra.get("measured", {}).get("symbol", req.quantity)
        return f"{qname}_from_{meas}_at_{req.port}"
    if req.quantity == "current":
        return f"current_through_{req.element}"
    if req.quantity == "gain":
        return f"gain_from_{req.source}_to_{req.port}"
    if req.port2:
        return f"{qname}_from_{req.port}_to_{req.port2}"
    return f"{qname}_at_{req.port}"


def collect(record) -> tuple:
    """(formulas, skipped notes) from a derived record."""
    c = record.circuit
    order = {k: i for i, k in enumerate(c.symbols)}
    sheet = os.path.basename(c.sheet.filename or "<sheet>")
    formulas, skipped, names = [], [], set()
    for r in record.results:
        req = r.request
        if req.statement not in ("find", "solve") or req.analysis:
            continue
        for qname, q in r.quantities.items():
            origin = f"sheet {sheet}, line {req.loc.line}: {req.text}"
            if q.expr is not None and len(str(q.expr)) <= 4000 or not q.sequence:
                defs, final = [], q.expr
            else:
                defs, final = list(q.sequence), q.in_sequence
            if final is None:
                skipped.append(f"{qname} ({origin}): no closed form")
                continue
            syms = set(final.free_symbols)
            for _s, e in defs:
                syms |= e.free_symbols
            syms -= {s for s, _e in defs}
            if S in syms:
                skipped.append(f"{qname} ({origin}): a function of the Laplace variable s")
                continue
            meas = r.extra.get("measured", {}) if req.statement == "solve" else {}
            msym = sympy.Symbol(meas["symbol"]) if meas else None
            params = sorted(syms, key=lambda x: (x != msym, order.get(x.name, 10**6), x.name))
            units = []
            for x in params:
                if x == msym:
                    units.append(meas.get("unit"))
                else:
                    info = c.symbols.get(x.name)
                    units.append(info.unit if info else None)
            name = ident(_function_name(req, qname, r.extra), names)
            names.add(name)
            what = (f"{qname} from the measured {meas.get('quantity')} at port {req.port}"
                    if meas else f"{qname} of request '{req.text}'")
            fwd = None
            if meas:
                fwd = (_forward(record, req), sympy.Symbol(qname), msym)
            formulas.append(Formula(name, list(zip(params, units)), defs, final, q.unit,
                                    what, origin, fwd))
    return formulas, skipped


def _forward(record, req):
    """The closed form that a solve request inverted (for test points on its branch)."""
    for r in record.results:
        if r.request is req:
            for st in r.steps:
                if st.equations:
                    return st.equations[0].rhs
    return None


class _Lowering:
    """A formula as statements: ('let', sym, expr), ('guard', sym, kind, text), then the
    returned expression; identifiers already sanitised."""

    def __init__(self, f: Formula):
        self.taken = set()
        self.rename = {}
        for x, _u in f.params:
            self.rename[x] = sympy.Symbol(ident(x.name, self.taken))
            self.taken.add(self.rename[x].name)
        for s, _e in f.defs:
            self.rename[s] = sympy.Symbol(ident(s.name, self.taken))
            self.taken.add(self.rename[s].name)
        self.taken.add(f.name)
        self.count = 0
        self.stmts, self.guarded, self.meaning = [], set(), {}
        for s, e in f.defs:
            self._emit_cse(e.xreplace(self.rename), self.rename[s])
        self.result = self._emit_cse(f.final.xreplace(self.rename), None)

    def fresh(self) -> sympy.Symbol:
        while True:
            n = f"t{self.count}"
            self.count += 1
            if n not in self.taken:
                self.taken.add(n)
                return sympy.Symbol(n)

    def _emit_cse(self, e, target):
        reps, (red,) = sympy.cse([e], symbols=iter(self.fresh, None), optimizations=None)
        for s, rep in reps:
            self.stmts.append(("let", s, self._hoist(rep)))
            self.meaning[s] = rep
        red = self._hoist(red)
        if target is None:
            return red
        self.stmts.append(("let", target, red))
        self.meaning[target] = red
        return target

    def _text(self, b):
        for _ in range(len(self.meaning) + 1):
            new = b.xreplace(self.meaning)
            if new == b:
                break
            b = new
        return to_text(b)

    def _hoist(self, e):
        if e.is_Atom:
            return e
        args = [self._hoist(a) for a in e.args]
        if e.is_Pow and not e.base.is_Number:
            b, k = args[0], e.exp
            neg, root = k.is_negative, not k.is_Integer
            if neg or root:
                if not b.is_Symbol:
                    d = self.fresh()
                    self.stmts.append(("let", d, b))
                    self.meaning[d] = b
                    b = d
                for kind, need in (("nonneg", root), ("nonzero", neg)):
                    if need and (b, kind) not in self.guarded:
                        self.guarded.add((b, kind))
                        self.stmts.append(("guard", b, kind, self._text(b)))
            return sympy.Pow(b, k)
        return e.func(*args)


def _num17(v) -> str:
    from decimal import Context, Decimal
    if not isinstance(v, sympy.Rational):
        v = sympy.Rational(sympy.N(v, 40))
    ctx = Context(prec=17)
    d = ctx.divide(Decimal(int(v.p)), Decimal(int(v.q)))
    return f"{d:.16E}"


def _param_doc(f: Formula, low: _Lowering) -> str:
    return ", ".join(f"{low.rename[x].name} [{u or 'no unit given'}]" for x, u in f.params)


# ------------------------------------------------------------------ C
class _CPrinter(C99CodePrinter):
    def _print_Rational(self, expr):
        return f"({expr.p}.0/{expr.q}.0)"

    def _print_Integer(self, expr):
        return f"{expr.p}.0"


def c_function(f: Formula, prefix: str) -> tuple:
    """(prototype with its comment, definition) of one formula in C99."""
    low = _Lowering(f)
    pr = _CPrinter()
    args = ", ".join(f"double {low.rename[x].name}" for x, _u in f.params) or "void"
    proto = (f"/* {f.name}: {comment(f.what)} [{comment(f.unit or 'no unit')}].\n"
             f"   From {comment(f.origin)}.\n"
             f"   Parameters: {comment(_param_doc(f, low)) or 'none'}.\n"
             f"   On a zero denominator or a negative square-root argument: returns NAN and\n"
             f"   sets {prefix}_error. */\n"
             f"double {f.name}({args});\n")
    body = [f"double {f.name}({args})", "{"]
    code = {"nonzero": f"{prefix.upper()}_EDIV", "nonneg": f"{prefix.upper()}_EDOMAIN"}
    for st in low.stmts:
        if st[0] == "let":
            body.append(f"    const double {st[1].name} = {pr.doprint(st[2])};")
        else:
            _k, sym, kind, text = st
            test = f"{sym.name} == 0.0" if kind == "nonzero" else f"{sym.name} < 0.0"
            what = "is zero" if kind == "nonzero" else "is negative under a square root"
            body.append(f"    if ({test}) {{ /* {comment(text)} {what} */")
            body.append(f"        {prefix}_error = {code[kind]};")
            body.append("        return NAN;")
            body.append("    }")
    body.append(f"    return {pr.doprint(low.result)};")
    body.append("}")
    return proto, "\n".join(body) + "\n"


def render_c(record, prefix: str, header_name: Optional[str]) -> tuple:
    """(header, source) texts; ``header_name`` None makes one self-contained source."""
    formulas, skipped = collect(record)
    sheet = os.path.basename(record.circuit.sheet.filename or "<sheet>")
    title = record.circuit.sheet.title
    P = prefix.upper()
    top = [f"/* Formulas generated by derive from sheet {comment(sheet)}."]
    if title:
        top.append(f"   Title: {comment(title)}")
    top.append(f"   Error handling: a function returns NAN and sets {prefix}_error to {P}_EDIV")
    top.append(f"   (a denominator is zero) or {P}_EDOMAIN (a negative square-root argument);")
    top.append(f"   {prefix}_error is never cleared by these functions.")
    for s in skipped:
        top.append(f"   Not emitted: {comment(s)}")
    top[-1] += " */"
    protos, defs = [], []
    for f in formulas:
        p, d = c_function(f, prefix)
        protos.append(p)
        defs.append(d)
    header = "\n".join(top) + f"\n#ifndef {P}_H\n#define {P}_H\n\n#define {P}_OK 0\n" \
        f"#define {P}_EDIV 1\n#define {P}_EDOMAIN 2\n\nextern int {prefix}_error;\n\n" + \
        "\n".join(protos) + f"\n#endif /* {P}_H */\n"
    inc = f'#include "{header_name}"\n' if header_name else ""
    src = (f"/* Generated by derive from sheet {comment(sheet)}; see the header for each "
           "function's origin. */\n#include <math.h>\n" + inc + "\n" +
           f"int {prefix}_error = {P}_OK;\n\n" + "\n".join(defs))
    if header_name is None:
        src = header + "\n" + src
    return header, src


# ------------------------------------------------------------------ Python
def py_function(f: Formula) -> str:
    low = _Lowering(f)
    pr = PythonCodePrinter({"standard": "python3"})
    args = ", ".join(low.rename[x].name for x, _u in f.params)
    out = [f"def {f.name}({args}):",
           f'    """{_safe_doc(f.what)} [{_safe_doc(f.unit or "no unit")}].',
           "",
           f"    Parameters: {_safe_doc(_param_doc(f, low)) or 'none'}.",
           "    Raises ValueError on a zero denominator or a negative square-root argument.",
           '    """',
           f"    # {comment(f.what)}",
           f"    # From {comment(f.origin)}"]
    for st in low.stmts:
        if st[0] == "let":
            out.append(f"    {st[1].name} = {pr.doprint(st[2])}")
        else:
            _k, sym, kind, text = st
            test = f"{sym.name} == 0" if kind == "nonzero" else f"{sym.name} < 0"
            what = "is zero" if kind == "nonzero" else "is negative under a square root"
            out.append(f"    if {test}:")
            out.append(f"        raise ValueError({f'{f.name}: {text} {what}'!r})")
    out.append(f"    return {pr.doprint(low.result)}")
    return "\n".join(out) + "\n"


def _safe_doc(text: str) -> str:
    return comment(text).replace('"', "'")


def render_python(record) -> str:
    formulas, skipped = collect(record)
    sheet = os.path.basename(record.circuit.sheet.filename or "<sheet>")
    head = [f"# Formulas generated by derive from sheet {comment(sheet)}."]
    if record.circuit.sheet.title:
        head.append(f"# Title: {comment(record.circuit.sheet.title)}")
    head += [f"# Not emitted: {comment(s)}" for s in skipped]
    body = "\n\n".join(py_function(f) for f in formulas)
    return "\n".join(head) + '\n"""Formulas generated by derive (see the comments)."""\n' \
        "import math  # noqa: F401  (square roots)\n\n\n" + body


# ------------------------------------------------------------------ entry point
def render(record, lang: str, args=None) -> dict:
    """``{path: content}`` for ``derive code``: the first entry is what goes to standard
    output when no ``-o`` is given."""
    from derive.export import code_vectors
    output = getattr(args, "output", None)
    with_tests = bool(getattr(args, "with_tests", False))
    sheet = record.circuit.sheet.filename or "formulas"
    if output:
        base = output[:-2] if lang == "c" and output.endswith(".c") else \
            output[:-3] if lang == "python" and output.endswith(".py") else output
    else:
        base = os.path.splitext(os.path.basename(sheet))[0] or "formulas"
    prefix = ident(os.path.basename(base).lower() or "formulas")
    files = {}
    if lang == "c":
        hname = os.path.basename(base) + ".h"
        header, src = render_c(record, prefix, hname if output else None)
        files[output or "<stdout>"] = src
        if output:
            files[base + ".h"] = header
        if with_tests:
            files.update(code_vectors.c_tests(record, base, hname, prefix))
    elif lang == "python":
        files[output or "<stdout>"] = render_python(record)
        if with_tests:
            files.update(code_vectors.py_tests(record, base, os.path.basename(output or
                                                                      base + ".py")))
    else:
        from derive.errors import DeriveError
        raise DeriveError(f"unknown language {lang!r} (c or python)")
    return files
