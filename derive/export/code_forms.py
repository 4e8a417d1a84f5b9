"""What ``derive code`` emits, independent of the language: the formulas of a record
(:func:`collect`), safe identifiers and comments, and a formula lowered to statements
(:class:`Lowering`). Used by :mod:`derive.export.code` (the C and Python text) and
:mod:`derive.export.code_vectors` (test vectors), which do not import each other's
internals.
"""
from __future__ import annotations

import keyword
import os
import re
from dataclasses import dataclass, field
from typing import Optional

import sympy

from derive.circuit.build import S
from derive.export.printing import to_text
from derive.sheet.units import format_bound

C_KEYWORDS = set("""auto break case char const continue default do double else enum extern
float for goto if inline int long register restrict return short signed sizeof static struct
switch typedef union unsigned void volatile while _Bool _Complex _Imaginary bool true false
NAN INFINITY HUGE_VAL errno main math sqrt pow fabs isnan isfinite exp log printf size_t
ValueError None True False""".split())
# C11/C23 keywords, and names <math.h>, <stdio.h>, <stddef.h>, <errno.h> and <float.h> define
# (C99 7.12, 7.19, 7.17, 7.5; a parameter named like a macro breaks the build)
C_STANDARD = set("""alignas alignof static_assert thread_local nullptr typeof typeof_unqual
constexpr _Alignas _Alignof _Atomic _Generic _Noreturn _Static_assert _Thread_local
NULL EOF BUFSIZ FILENAME_MAX FOPEN_MAX L_tmpnam TMP_MAX SEEK_SET SEEK_CUR SEEK_END
stdin stdout stderr FILE fpos_t ptrdiff_t wchar_t offsetof float_t double_t
math_errhandling fpclassify isinf isnormal signbit isgreater isgreaterequal isless
islessequal islessgreater isunordered acos asin atan atan2 cos sin tan acosh asinh atanh
cosh sinh tanh exp2 expm1 frexp ilogb ldexp log10 log1p log2 logb modf scalbn scalbln cbrt
hypot erf erfc lgamma tgamma ceil floor nearbyint rint lrint llrint round lround llround
trunc fmod remainder remquo copysign nan nextafter nexttoward fdim fmax fmin fma assert
DBL_MAX DBL_MIN DBL_EPSILON DBL_DIG FLT_MAX FLT_MIN FLT_EPSILON DECIMAL_DIG""".split())
# reserved prefixes: E<digit or capital> (errno.h), FP_, MATH_, HUGE_VAL, M_ (POSIX math
# constants), DBL_/FLT_/LDBL_ (float.h), PRI/SCN (inttypes.h)
_C_RESERVED_PREFIX = re.compile(r"^(?:E[0-9A-Z]|FP_|MATH_|HUGE_VAL|M_[A-Z0-9]|DBL_|FLT_|"
                                r"LDBL_|PRI[a-zX]|SCN[a-zX])")
RESERVED = C_KEYWORDS | C_STANDARD | set(keyword.kwlist) | \
    set(getattr(keyword, "softkwlist", []))


def c_prefix_names(prefix: str) -> tuple:
    """The identifiers of the generated C file's own: a parameter or local named like one of
    them (or starting with ``PREFIX_``) would shadow or expand into them."""
    return (prefix.lower() + "_", prefix.upper() + "_", prefix.lower(), prefix.upper())


def reserved(name: str, prefix: Optional[str] = None) -> bool:
    """Whether ``name`` cannot be a parameter or local of generated code.

    >>> [reserved(n) for n in ("FP_ZERO", "NULL", "EOF", "HUGE_VALF", "math_errhandling",
    ...                        "EDOM", "E1", "R1", "Ein", "M_PI")]
    [True, True, True, True, True, True, True, False, False, True]
    >>> reserved("div_error", "div"), reserved("DIV_EDIV", "div"), reserved("Rdiv", "div")
    (True, True, False)
    """
    if name in RESERVED or _C_RESERVED_PREFIX.match(name):
        return True
    if prefix:
        low, up, plow, pup = c_prefix_names(prefix)
        if name in (plow, pup) or name.startswith(low) or name.startswith(up):
            return True
    return False


def ident(text: str, taken: set = frozenset(), prefix: Optional[str] = None) -> str:
    """A safe identifier from user-derived text, distinct from ``taken``, from the names
    of the C and Python standard libraries, and from the generated file's own names
    (``prefix``).

    >>> ident("div1.Rt"), ident("int"), ident("9lives"), ident("__x"), ident("a*/b")
    ('div1_Rt', 'int_', 'v9lives', 'v_x', 'a_b')
    >>> ident("FP_ZERO"), ident("NULL"), ident("f_error", prefix="f")
    ('v_FP_ZERO', 'NULL_', 'v_f_error')
    """
    s = re.sub(r"[^A-Za-z0-9_]+", "_", text).strip("_") if text.strip("_") else "v"
    if not s:
        s = "v"
    if text.startswith("__") or text.startswith("_") and len(text) > 1 and text[1].isupper():
        s = "v_" + s
    if s[0].isdigit():
        s = "v" + s
    if _C_RESERVED_PREFIX.match(s) or (prefix and reserved(s, prefix) and s not in RESERVED):
        s = "v_" + s
    while reserved(s, prefix) or s in taken:
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
    valid: list = field(default_factory=list)    # [(low, high)] of the measured symbol


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
            valid = []
            if msym is not None and q.validity and all(
                    e is None or e.free_symbols <= set(params)
                    for lo, hi in q.validity for e in (lo, hi)):
                valid = list(q.validity)
            formulas.append(Formula(name, list(zip(params, units)), defs, final, q.unit,
                                    what, origin, fwd, valid=valid))
            approx = _approximate(c, q, name, names, origin, order,
                                  getattr(record, "digits", None) or 4)
            if approx is not None:
                names.add(approx.name)
                formulas.append(approx)
    return formulas, skipped


def _approximate(c, q, name, names, origin, order, digits: int = 4):
    """The approximate form of ``approximately within E%`` as a formula of its own
    (``NAME_approx``), its error bound and how it was bounded in the comment."""
    a = getattr(q, "approximation", None)
    if not a or not a.get("met") or a.get("expr") is None:
        return None
    e = a["expr"]
    if S in e.free_symbols:
        return None                     # as for the exact form: not a function of s
    params = sorted(e.free_symbols, key=lambda x: (order.get(x.name, 10**6), x.name))
    units = [getattr(c.symbols.get(x.name), "unit", None) for x in params]
    how = "proven" if a.get("proven") else f"searched at {a.get('points')} points"
    bound = format_bound(a["max_error"] * 100, digits)          # rounded up: still a bound
    what = (f"{q.name}, approximately: relative error at most {bound} % "
            f"over the tolerance box (asked: within {a['within'] * 100:g} %; bound {how})")
    return Formula(ident(name + "_approx", names), list(zip(params, units)), [], e, q.unit,
                   what, origin)


def _forward(record, req):
    """The closed form that a solve request inverted (for test points on its branch)."""
    for r in record.results:
        if r.request is req:
            for st in r.steps:
                if st.equations:
                    return st.equations[0].rhs
    return None


class Lowering:
    """A formula as statements: ('range', measured sym, [(low, high)], text) first for an
    inverted formula with a derived validity range, ('let', sym, expr), ('guard', sym, kind,
    text), then the returned expression; identifiers already sanitised (and, given the C ``prefix``, kept
    apart from the generated file's own names)."""

    def __init__(self, f: Formula, prefix: Optional[str] = None):
        self.taken = set()
        self.rename = {}
        self.prefix = prefix
        for x, _u in f.params:
            self.rename[x] = sympy.Symbol(ident(x.name, self.taken, prefix))
            self.taken.add(self.rename[x].name)
        for s, _e in f.defs:
            self.rename[s] = sympy.Symbol(ident(s.name, self.taken, prefix))
            self.taken.add(self.rename[s].name)
        self.taken.add(f.name)
        self.count = 0
        self.stmts, self.guarded, self.meaning = [], set(), {}
        if f.valid and f.forward:
            m = self.rename[f.forward[2]]
            ivs = [(lo.xreplace(self.rename) if lo is not None else None,
                    hi.xreplace(self.rename) if hi is not None else None) for lo, hi in f.valid]
            text = " or ".join(
                (f"{to_text(lo)} < " if lo is not None else "") + m.name +
                (f" < {to_text(hi)}" if hi is not None else "") for lo, hi in ivs)
            self.stmts.append(("range", m, ivs, text))
        for s, e in f.defs:
            self._emit_cse(e.xreplace(self.rename), self.rename[s])
        self.result = self._emit_cse(f.final.xreplace(self.rename), None)

    def fresh(self) -> sympy.Symbol:
        while True:
            n = f"t{self.count}"
            self.count += 1
            if n not in self.taken and not reserved(n, self.prefix):
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


def num17(v) -> str:
    from decimal import Context, Decimal
    if not isinstance(v, sympy.Rational):
        v = sympy.Rational(sympy.N(v, 40))
    ctx = Context(prec=17)
    d = ctx.divide(Decimal(int(v.p)), Decimal(int(v.q)))
    return f"{d:.16E}"


