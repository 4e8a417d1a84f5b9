"""Expressions to text: the plain string form of the JSON record, and LaTeX.

The string form uses names, numbers, ``+ - * /``, ``**``, parentheses and ``sqrt(...)``
only, so any reader can parse it back with a small expression grammar.

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
from sympy.printing.str import StrPrinter


class _TextPrinter(StrPrinter):
    def _print_ImaginaryUnit(self, expr):
        return "sqrt(-1)"

    def _print_Infinity(self, expr):
        raise ValueError("infinite result")

    _print_ComplexInfinity = _print_Infinity
    _print_NegativeInfinity = _print_Infinity


def to_text(expr) -> str:
    """The JSON record's ``expr`` string."""
    return _TextPrinter().doprint(expr)


_SPLIT = re.compile(r"^([A-Za-z]+)_?([A-Za-z0-9]*)$")


def latex_name(key: str) -> str:
    """``R_load`` -> R with subscript load, ``R12`` -> R_{12}, ``div1_Rt`` -> R_t^{div1}
    (instance as a superscript), ``beta`` -> \\beta."""
    greek = {"alpha", "beta", "gamma", "delta", "epsilon", "zeta", "eta", "theta", "kappa",
             "lambda", "mu", "nu", "xi", "pi", "rho", "sigma", "tau", "phi", "chi", "psi",
             "omega", "Gamma", "Delta", "Theta", "Lambda", "Xi", "Pi", "Sigma", "Phi", "Psi",
             "Omega"}
    parts = key.split("_")
    # an instance-qualified name: inst_Elem where Elem starts upper case
    if len(parts) >= 2 and re.match(r"^[A-Za-z]+\d*$", parts[0]) and parts[-1][:1].isupper() \
            and parts[0][:1].islower():
        inner = latex_name(parts[-1])
        inst = r"\mathrm{" + _esc(".".join(parts[:-1])) + "}"
        return "{" + inner + "}^{" + inst + "}"
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
    return r"\mathit{" + _esc(key) + "}" if len(key) > 1 else key


def _esc(t: str) -> str:
    return t.replace("_", r"\_")


def to_latex(expr) -> str:
    names = {s: latex_name(s.name) for s in expr.free_symbols}
    return LatexPrinter({"symbol_names": names, "mul_symbol": None}).doprint(expr)
