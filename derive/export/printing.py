"""Expressions to text: the plain string form of the JSON record, and LaTeX.

The string form uses names, numbers, ``+ - * /``, ``**``, parentheses and ``sqrt(...)``
only, so any reader can parse it back with a small expression grammar; it belongs to the
form stage (:mod:`derive.forms.text`) and is re-exported here.

>>> import sympy
>>> a, b = sympy.symbols('div1_Rt R_load')
>>> to_text(a*b/(a + b))
'R_load*div1_Rt/(R_load + div1_Rt)'
>>> to_latex(a*b/(a + b))
'\\\\frac{R_{\\\\mathrm{load}} {R_{\\\\mathrm{t}}}^{\\\\mathrm{div1}}}{R_{\\\\mathrm{load}} + {R_{\\\\mathrm{t}}}^{\\\\mathrm{div1}}}'
"""
from __future__ import annotations

import re

import sympy
from sympy.printing.latex import LatexPrinter

from derive.sheet.quantities import QUANTITIES
from derive.forms.text import print_order
from derive.forms.text import to_text      # the plain-text form, re-exported for exporters


_SPLIT = re.compile(r"^([A-Za-z]+)_?([A-Za-z0-9]*)$")


def latex_name(key: str) -> str:
    """``R_load`` -> R with subscript load, ``R12`` -> R_{12}, ``div1_Rt`` -> R_t^{div1}
    (instance as a superscript), ``beta`` -> \\beta; a part's name in one style whatever
    its spelling (``R_rtd``, ``Rf1``, ``RL``: the letter, the rest an upright subscript).

    >>> print(" ".join(latex_name(k) for k in ("R_rtd", "Rf1", "RL", "R12", "Omega1")))
    R_{\\mathrm{rtd}} R_{\\mathrm{f1}} R_{\\mathrm{L}} R_{12} \\Omega_{1}
    """
    greek = {"alpha", "beta", "gamma", "delta", "epsilon", "zeta", "eta", "theta", "kappa",
             "lambda", "mu", "nu", "xi", "pi", "rho", "sigma", "tau", "phi", "chi", "psi",
             "omega", "Gamma", "Delta", "Theta", "Lambda", "Xi", "Pi", "Sigma", "Phi", "Psi",
             "Omega"}
    if key in _QUANTITY:
        return _QUANTITY[key]
    m = re.match(r"^d([A-Za-z]\w*)/d([A-Za-z]\w*)$", key)
    if m:                           # a sensitivity's derivative dQ/dx, as a fraction
        return (r"\frac{\partial %s}{\partial %s}"
                % (latex_name(m.group(1)), latex_name(m.group(2))))
    if key in ("pi", "Pi"):         # a symbol named pi typeset as π would read as 3.14159...
        return r"\mathit{" + key + "}"   # (r_pi, a subscript, stays r_π)
    m = re.match(r"^([A-Z])eq(\d+)_*$", key)
    if m:
        return f"{m.group(1)}_{{\\mathrm{{eq}}{m.group(2)}}}"
    parts = key.split("_")
    if len(parts) == 2 and parts[0] in ("i", "v") and parts[1]:
        # a branch current or node voltage of the nodal equations: i_Vex, v_left
        return f"{parts[0]}_{{\\mathrm{{{_esc(parts[1])}}}}}"
    if len(parts) == 3 and parts[0] in greek and parts[2] in ("t", "g") and parts[1]:
        return f"\\{parts[0]}_{{\\mathrm{{{_esc(parts[1])}}}}}^{{\\mathrm{{{parts[2]}}}}}"
    if len(parts) >= 3 and len(parts[0]) == 1 and all(parts[1:]):
        return f"{parts[0]}_{{\\mathrm{{{_esc('.'.join(parts[1:]))}}}}}"
    m = re.match(r"^([a-zA-Z])(" + "|".join(sorted(greek, key=len, reverse=True)) + r")$", key)
    if m and key not in greek:
        return f"{m.group(1)}_{{\\{m.group(2)}}}"
    if re.match(r"^[a-z][a-z]{1,3}$", key) and key not in greek:
        return f"{key[0]}_{{\\mathrm{{{key[1:]}}}}}"
    # an instance-qualified name: inst_Elem where Elem starts upper case
    if len(parts) >= 2 and re.match(r"^[A-Za-z]+\d*$", parts[0]) and parts[-1][:1].isupper() \
            and parts[0][:1].islower():
        inner = latex_name(parts[-1])
        inst = r"\mathrm{" + _esc(".".join(parts[:-1])) + "}"
        return "{" + inner + "}^{" + inst + "}"
    # a part name: one capital letter, then letters and digits (not only digits): the
    # letter with the rest as an upright subscript, as R_rtd is -- Rf1 -> R_f1, RL -> R_L
    m = re.match(r"^([A-Z])([A-Za-z][A-Za-z0-9]*)$", key)
    if m and re.sub(r"\d+$", "", key) not in greek:
        return f"{m.group(1)}_{{\\mathrm{{{m.group(2)}}}}}"
    m = re.match(r"^([A-Za-z]+?)(\d+)$", key)
    if m and m.group(1) not in greek or (m and m.group(1) in greek):
        base = "\\" + m.group(1) if m.group(1) in greek else m.group(1)
        return f"{base}_{{{m.group(2)}}}"
    if key in greek:
        return "\\" + key
    if len(parts) == 2 and parts[0] and parts[1]:
        base = "\\" + parts[0] if parts[0] in greek else parts[0]
        return f"{base}_{{\\mathrm{{{_esc(parts[1])}}}}}"
    if re.match(r"^[A-Z][a-z]$", key) or re.match(r"^[A-Z][a-z0-9]+$", key):
        return f"{key[0]}_{{\\mathrm{{{_esc(key[1:])}}}}}"
    return r"\mathit{" + _esc(key) + "}" if len(key) > 1 or not key.isalpha() else key


# quantity names typeset as such (derive.sheet.quantities)
_QUANTITY = {n: q.tex for n, q in QUANTITIES.items() if q.tex}


def _esc(t: str) -> str:
    return t.replace("_", r"\_")


_LATEX: dict = {}            # expression -> its LaTeX (the same settings every time)
_LATEX_MAX = 100_000


def to_latex(expr) -> str:
    """The LaTeX of a sympy expression, symbols by :func:`latex_name`; remembered (a record
    prints a closed form in the summary, in its steps, and its terms again when it breaks
    a long line)."""
    try:
        got = _LATEX.get(expr)
    except TypeError:                       # a mutable matrix: not remembered
        return _latex(expr)
    if got is None:
        got = _latex(expr)
        if len(_LATEX) >= _LATEX_MAX:
            _LATEX.clear()
        _LATEX[expr] = got
    return got


def _latex(expr) -> str:
    names = {s: latex_name(s.name) for s in expr.free_symbols}
    return LatexPrinter({"symbol_names": names, "mul_symbol": None, **print_order(expr)}
                        ).doprint(expr)


_ZERO_WIDTH = re.compile(r"\\(?:mathrm|mathit|mathcal|left|right|frac|displaystyle)\b|[{}^_&]")
_COMMAND = re.compile(r"\\[A-Za-z]+|\\.")
_SUB = re.compile(r"[_^]\{([^{}]*)\}")


def visual_len(latex: str) -> float:
    """A rough printed width of a LaTeX math string in character widths: commands and
    braces take no room, a Greek letter or operator one, sub- and superscripts two thirds,
    and a fraction the wider of its numerator and denominator.

    >>> visual_len(r"R_{\\mathrm{load}} + R_{1}") < len(r"R_{\\mathrm{load}} + R_{1}") / 2
    True
    """
    t = latex
    # fractions: keep the wider part (innermost first)
    frac = re.compile(r"\\frac\{([^{}]*(?:\{[^{}]*\}[^{}]*)*)\}\{([^{}]*(?:\{[^{}]*\}[^{}]*)*)\}")
    for _ in range(20):
        m = frac.search(t)
        if not m:
            break
        a, b = m.group(1), m.group(2)
        t = t[:m.start()] + "{" + (a if visual_len(a) >= visual_len(b) else b) + "}" + t[m.end():]
    n_sub = sum(len(_COMMAND.sub("x", _ZERO_WIDTH.sub("", g))) for g in _SUB.findall(t))
    t2 = _SUB.sub("", t)
    t2 = _ZERO_WIDTH.sub("", t2)
    t2 = _COMMAND.sub("x", t2).replace(" ", "")
    return len(t2) + n_sub * 0.67 + t.count("+") + t.count("-") + t.count("=")


def equation_lines(lhs, rhs, width: int = 62) -> list:
    """``lhs = rhs`` as lines of an ``aligned`` environment (``&=`` on the first line).

    A long right-hand side is broken before its top-level ``+``/``-`` terms; a long
    fraction is written as ``N/D`` with the numerator and denominator on lines of their
    own (so no line runs off the page).

    >>> import sympy
    >>> a, b = sympy.symbols('R1 R2')
    >>> print(equation_lines(sympy.Symbol('rth'), a + b)[0])
    R_{\\mathrm{th}} &= R_{1} + R_{2}
    >>> len(equation_lines(sympy.Symbol('x'), sum(sympy.symbols('a0:40')), width=40)) > 1
    True
    """
    left = to_latex(lhs)
    whole = to_latex(rhs)
    if visual_len(whole) <= width:
        return [f"{left} &= {whole}"]
    if isinstance(rhs, sympy.Add):
        return _terms(left + " &= ", list(rhs.as_ordered_terms()), width)
    num, den = sympy.fraction(rhs)
    if den != 1 and isinstance(rhs, sympy.Mul):
        out = [left + r" &= \frac{\mathcal{N}}{\mathcal{D}}"]
        out += _factors(r"\mathcal{N} &= ", num, width)
        out += _factors(r"\mathcal{D} &= ", den, width)
        return out
    return [f"{left} &= {whole}"]


def _addends(e):
    if isinstance(e, sympy.Add):
        return list(e.as_ordered_terms())
    return [e]


def _factors(head, e, width):
    """A long product, one factor per line; a factor that is itself a long sum is broken
    between its terms, in brackets that open on its first line and close on its last."""
    if not isinstance(e, sympy.Mul) or visual_len(to_latex(e)) <= width:
        return _terms(head, _addends(e), width)
    lines, cur = [], head
    for k, f in enumerate(e.as_ordered_factors()):
        joint = r" \cdot " if k else ""
        if isinstance(f, sympy.Add) and visual_len(to_latex(f)) > width * 0.8:
            if k:
                lines.append(cur)
                cur = r"&\quad \cdot "
            sub = _terms(cur + r"\left(", list(f.as_ordered_terms()), width, close=True)
            lines += sub[:-1]
            cur = sub[-1]
            continue
        body = to_latex(f) if not isinstance(f, sympy.Add) else r"\left(" + to_latex(f) + r"\right)"
        if k and visual_len(cur) + visual_len(body) > width:
            lines.append(cur)
            cur = r"&\quad \cdot " + body
        else:
            cur += joint + body
    lines.append(cur)
    return lines


def _terms(head, terms, width, close=False):
    r"""Terms of a sum, as many on a line as fit. ``close``: the sum sits in an opened
    bracket, closed at its end (``\right.``/``\left.`` pair the brackets across lines)."""
    lines, cur = [], head
    first = True
    for t in terms:
        neg = t.could_extract_minus_sign()
        body = to_latex(-t if neg else t)
        piece = ("- " if neg else "") + body if first else (" - " if neg else " + ") + body
        if not first and visual_len(cur) + visual_len(piece) > width:
            lines.append(cur + (r"\right." if close else ""))
            cur = "&\\quad" + (r"\left." if close else "") + piece
        else:
            cur += piece
        first = False
    lines.append(cur + (r"\right)" if close else ""))
    return lines
