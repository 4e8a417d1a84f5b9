"""Sheet expressions (:mod:`derive.sheet.model` trees) to sympy, built node by node.

No text is ever handed to sympy: every number is an exact ``Rational`` and every name a
``Symbol`` chosen by the caller, so nothing the user wrote can be evaluated as code.

>>> from fractions import Fraction
>>> from derive.sheet.model import Num, Name, BinOp, Loc
>>> L = Loc(1, 1)
>>> e = BinOp('||', Name('Ra', L), BinOp('*', Num(Fraction(2), L), Name('R', L), L), L)
>>> to_sympy(e, lambda n: sympy.Symbol(n.name))
2*R*Ra/(2*R + Ra)
"""
from __future__ import annotations

from fractions import Fraction
from typing import Callable, Optional

import sympy

from derive.errors import SheetError
from derive.sheet.model import BinOp, Call, Name, Neg, Num


def as_expr(x) -> sympy.Expr:
    """A number or sympy object as a sympy expression, never by parsing text.

    >>> as_expr(3), as_expr(sympy.Symbol('R'))
    (3, R)
    """
    if isinstance(x, sympy.Basic):
        return x
    if isinstance(x, bool):
        raise TypeError("not a number: a boolean")
    if isinstance(x, int):
        return sympy.Integer(x)
    if isinstance(x, Fraction):
        return sympy.Rational(x.numerator, x.denominator)
    raise TypeError(f"not an expression: {type(x).__name__}")


def parallel(a: sympy.Expr, b: sympy.Expr) -> sympy.Expr:
    """The parallel combination ``a*b/(a+b)`` of two resistances or impedances."""
    return a * b / (a + b)


def to_sympy(node, name: Callable[[Name], sympy.Expr],
             call: Optional[Callable[[Call], sympy.Expr]] = None) -> sympy.Expr:
    """Build the sympy expression of a sheet expression tree.

    ``name`` maps a :class:`Name` to its symbol (and may raise :class:`SheetError`);
    ``call`` handles ``across``/``through`` (dependent-source controls); without it they
    are an error at their location.
    """
    if isinstance(node, Num):
        return sympy.Rational(node.value.numerator, node.value.denominator)
    if isinstance(node, Name):
        return name(node)
    if isinstance(node, Neg):
        return -to_sympy(node.operand, name, call)
    if isinstance(node, BinOp):
        a = to_sympy(node.left, name, call)
        b = to_sympy(node.right, name, call)
        op = node.op
        if op == '+':
            return a + b
        if op == '-':
            return a - b
        if op == '*':
            return a * b
        if op == '/':
            if b == 0:
                raise SheetError("division by zero", node.loc.line, node.loc.col)
            return a / b
        if op == '^':
            return a ** b
        if op == '||':
            if a + b == 0:
                raise SheetError("parallel combination of opposite values is undefined",
                                 node.loc.line, node.loc.col)
            return parallel(a, b)
        raise SheetError(f"unknown operator {op!r}", node.loc.line, node.loc.col)
    if isinstance(node, Call):
        if node.func == 'sqrt':
            if len(node.args) != 1:
                raise SheetError("sqrt takes one argument", node.loc.line, node.loc.col)
            return sympy.sqrt(to_sympy(node.args[0], name, call))
        if node.func in ('across', 'through'):
            if call is None:
                raise SheetError(f"{node.func}(...) is only allowed in the value of a "
                                 "dependent source", node.loc.line, node.loc.col)
            return call(node)
        raise SheetError(f"unknown function {node.func!r}", node.loc.line, node.loc.col)
    raise TypeError(f"not an expression node: {node!r}")


def names_in(node) -> list:
    """Every :class:`Name` in a tree (controls' node/element names excluded)."""
    out = []
    if isinstance(node, Name):
        out.append(node)
    elif isinstance(node, Neg):
        out += names_in(node.operand)
    elif isinstance(node, BinOp):
        out += names_in(node.left) + names_in(node.right)
    elif isinstance(node, Call) and node.func == 'sqrt':
        for a in node.args:
            out += names_in(a)
    return out
