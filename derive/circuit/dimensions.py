"""Physical dimensions of symbols and sheet expressions, for checking hand-derived claims.

A dimension is a tuple of exponents over volt, ampere and second ``(V, A, T)``: ohm is
``(1, -1, 0)``, siemens ``(-1, 1, 0)``, farad ``(-1, 1, 1)``, henry ``(1, -1, 1)``, the
Laplace variable ``s`` and hertz ``(0, 0, -1)``. Every symbol takes its dimension from its
element kind, a ``nominal`` symbol from its unit, anything else is dimensionless.

>>> show(mul(OHM, OHM))
'Ω²'
>>> show(div(VOLT, OHM))
'A'
>>> show(NONE)
'dimensionless'
"""
from __future__ import annotations

from fractions import Fraction

import sympy

from derive.sheet import kinds
from derive.sheet.model import BinOp, Call, Name, Neg, Num

VOLT = (Fraction(1), Fraction(0), Fraction(0))
AMP = (Fraction(0), Fraction(1), Fraction(0))
SECOND = (Fraction(0), Fraction(0), Fraction(1))
NONE = (Fraction(0), Fraction(0), Fraction(0))


def mul(a, b):
    return tuple(x + y for x, y in zip(a, b))


def div(a, b):
    return tuple(x - y for x, y in zip(a, b))


def power(a, k):
    return tuple(x * Fraction(k) for x in a)


OHM = div(VOLT, AMP)
SIEMENS = div(AMP, VOLT)
FARAD = div(mul(AMP, SECOND), VOLT)
HENRY = div(mul(VOLT, SECOND), AMP)
PER_SECOND = power(SECOND, -1)

OF_UNIT = {"ohm": OHM, "S": SIEMENS, "F": FARAD, "H": HENRY, "V": VOLT, "A": AMP,
           "Hz": PER_SECOND, "V/V": NONE}
_NAMES = [(OHM, "Ω"), (SIEMENS, "S"), (VOLT, "V"), (AMP, "A"), (FARAD, "F"), (HENRY, "H"),
          (PER_SECOND, "1/s"), (SECOND, "s")]
_SUP = str.maketrans("0123456789-/", "⁰¹²³⁴⁵⁶⁷⁸⁹⁻ᐟ")


def show(d) -> str:
    """A readable name of a dimension (``Ω``, ``Ω²``, ``V·s``...)."""
    if d == NONE:
        return "dimensionless"
    for base, name in _NAMES:
        for k in (1, 2, 3, -1, -2, Fraction(1, 2)):
            if power(base, k) == d:
                return name if k == 1 else name + str(k).translate(_SUP)
    # fall back on ohm, volt and second: (v, a, t) = ohm^x volt^y s^t
    x, y, t = -d[1], d[0] + d[1], d[2]
    parts = [n + ("" if k == 1 else str(k).translate(_SUP))
             for n, k in (("Ω", x), ("V", y), ("s", t)) if k != 0]
    return "·".join(parts)


def of_symbol(info) -> tuple:
    """The dimension of a circuit symbol (a :class:`~derive.circuit.build.SymbolInfo`)."""
    if info.kind != "param":               # an element's symbol: its kind's unit
        return of_kind(info.kind)
    return OF_UNIT.get(info.unit, NONE)


def of_kind(name: str) -> tuple:
    """The dimension of the value of an element of kind ``name`` (the dimension of its unit
    in :mod:`derive.sheet.kinds`; an unknown kind raises there)."""
    return OF_UNIT[kinds.kind(name).unit]


def symbol_dims(circuit) -> dict:
    """key -> dimension for every circuit symbol, and ``s``."""
    out = {k: of_symbol(v) for k, v in circuit.symbols.items()}
    out["s"] = PER_SECOND
    return out


class DimensionError(Exception):
    """``term`` (text) has dimension ``got`` where ``want`` was expected."""

    def __init__(self, term: str, got, want, why: str):
        super().__init__(why)
        self.term, self.got, self.want, self.why = term, got, want, why


_PREC = {"+": 1, "-": 1, "||": 2, "*": 3, "/": 3, "^": 5}


def text_of(node, parent: int = 0) -> str:
    """A sheet expression tree written back as text (for naming offending terms).

    >>> from derive.sheet.model import Loc
    >>> L = Loc(1, 1)
    >>> text_of(BinOp('+', Name('R1', L), BinOp('*', Name('R1', L), Name('R2', L), L), L))
    'R1 + R1*R2'
    """
    if isinstance(node, Num):
        v = node.value
        return str(v.numerator) if v.denominator == 1 else f"{v.numerator}/{v.denominator}"
    if isinstance(node, Name):
        return node.name
    if isinstance(node, Neg):
        s = "-" + text_of(node.operand, 4)
        return f"({s})" if parent > 4 else s
    if isinstance(node, Call):
        return f"{node.func}(" + ", ".join(text_of(a) for a in node.args) + ")"
    p = _PREC[node.op]
    right_p = p + 1 if node.op in ("-", "/") else p
    left_p = p + 1 if node.op == "^" else p
    sep = {"*": "*", "/": "/", "^": "^"}.get(node.op, f" {node.op} ")
    s = text_of(node.left, left_p) + sep + text_of(node.right, right_p)
    return f"({s})" if p < parent else s


def _const(node):
    """The value of a constant exponent tree, or None."""
    if isinstance(node, Num):
        return node.value
    if isinstance(node, Neg):
        v = _const(node.operand)
        return None if v is None else -v
    return None


def _terms(node) -> list:
    """The terms of a chain of ``+``/``-`` (signs dropped)."""
    if isinstance(node, BinOp) and node.op in ("+", "-"):
        return _terms(node.left) + _terms(node.right)
    return [node]


def of_tree(node, dims: dict, key_of, want=None) -> tuple:
    """The dimension of a sheet expression tree; :class:`DimensionError` names the first
    term that breaks the rules (a sum or parallel of unlike terms, a dimensioned exponent).

    >>> from derive.sheet.model import Loc
    >>> L = Loc(1, 1)
    >>> d = {'R1': OHM, 'R2': OHM}
    >>> try:
    ...     of_tree(BinOp('+', Name('R1', L), BinOp('*', Name('R1', L), Name('R2', L), L), L), d, str)
    ... except DimensionError as e:
    ...     print(e.why)
    the term R1*R2 is Ω², but R1 is Ω
    """
    if isinstance(node, Num):
        return NONE
    if isinstance(node, Name):
        return dims.get(key_of(node.name), NONE)
    if isinstance(node, Neg):
        return of_tree(node.operand, dims, key_of)
    if isinstance(node, Call):
        inner = of_tree(node.args[0], dims, key_of)
        return power(inner, Fraction(1, 2)) if node.func == "sqrt" else inner
    if node.op in ("+", "-"):
        terms = _terms(node)
        ds = [of_tree(t, dims, key_of) for t in terms]
        ref = want if want in ds else ds[0]
        for t, d in zip(terms, ds):
            if d != ref:
                good = terms[ds.index(ref)]
                raise DimensionError(text_of(t), d, ref, f"the term {text_of(t)} is {show(d)}, "
                                     f"but {text_of(good)} is {show(ref)}")
        return ref
    a = of_tree(node.left, dims, key_of)
    if node.op == "^":
        k = _const(node.right)
        if k is None:
            b = of_tree(node.right, dims, key_of)
            if b != NONE or a != NONE:
                raise DimensionError(text_of(node.right), b, NONE,
                                     f"the exponent {text_of(node.right)} is not a number")
            return NONE
        return power(a, k)
    b = of_tree(node.right, dims, key_of)
    if node.op == "*":
        return mul(a, b)
    if node.op == "/":
        return div(a, b)
    if a != b:      # ||: like branches only; name the one that is not what is wanted
        bad, good, db, dg = (node.left, node.right, a, b) if b == want else \
            (node.right, node.left, b, a)
        raise DimensionError(text_of(bad), db, dg, f"the branch {text_of(bad)} is {show(db)}, "
                             f"but {text_of(good)} is {show(dg)}")
    return a


def of_sympy(expr, dims: dict):
    """The dimension of a sympy expression over circuit symbols, or None when it is not
    consistent (e.g. a gain parameter without a unit multiplying a resistance)."""
    if expr.is_Number:
        return NONE
    if expr.is_Symbol:
        return dims.get(expr.name, NONE)
    if expr.is_Add:
        ds = {of_sympy(t, dims) for t in expr.args}
        return ds.pop() if len(ds) == 1 else None
    if expr.is_Mul:
        out = NONE
        for t in expr.args:
            d = of_sympy(t, dims)
            if d is None:
                return None
            out = mul(out, d)
        return out
    if expr.is_Pow and expr.exp.is_Rational:
        d = of_sympy(expr.base, dims)
        return None if d is None else power(d, Fraction(int(expr.exp.p), int(expr.exp.q)))
    if isinstance(expr, sympy.Expr) and all(of_sympy(a, dims) == NONE for a in expr.args):
        return NONE
    return None
