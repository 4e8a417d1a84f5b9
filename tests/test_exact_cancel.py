"""The exact rational-function route of step checks (derive.derivation.steps): every
intermediate kept in lowest terms with only the gcds that can be nontrivial, against
sympy's own cancellation (reference library: sympy) on random expressions."""
import random

import pytest
import sympy

from derive.derivation.steps import Program, _cancels, _rational_function


def _random_expr(rnd, syms, depth):
    if depth == 0 or rnd.random() < 0.2:
        if rnd.random() < 0.3:
            return sympy.Rational(rnd.randint(-3, 3), rnd.randint(1, 3))
        return rnd.choice(syms)
    a = _random_expr(rnd, syms, depth - 1)
    b = _random_expr(rnd, syms, depth - 1)
    op = rnd.randint(0, 4)
    if op == 0:
        return a + b
    if op == 1:
        return a - b
    if op == 2:
        return a * b
    if op == 3:
        return a / b if b != 0 else a
    return a ** rnd.choice([2, -1, -2]) if a != 0 else b


@pytest.mark.parametrize("seed", range(60))
def test_lowest_terms_and_sympy_agree(seed):
    rnd = random.Random(seed)
    syms = sympy.symbols("a b c")
    e = _random_expr(rnd, syms, 5)
    try:
        prog = Program([e])
        n, d = _rational_function(prog, 0)
    except ZeroDivisionError:
        return
    assert n.gcd(d).is_constant()                  # in lowest terms
    if n.is_zero():
        assert d.is_one()
    ref = sympy.cancel(sympy.together(e))
    names = sorted(prog.inputs, key=str)
    for _ in range(3):
        pt = {x: sympy.Rational(rnd.randint(1, 97), rnd.randint(1, 89)) for x in names}
        want = ref.xreplace(pt)
        if not want.is_finite:
            continue
        import flint
        vals = [flint.fmpq(int(pt[x].p), int(pt[x].q)) for x in names] or [flint.fmpq(0)]
        dv = d(*vals)
        if dv == 0:
            continue
        got = n(*vals) / dv
        assert sympy.Rational(int(got.p), int(got.q)) == want


def test_cancellation_decisions():
    a, b, c = sympy.symbols("a b c")
    # (a^2 - b^2)/(a - b) = a + b; a/(a+b) + b/(a+b) = 1; a nested divider identity
    assert _cancels((a**2 - b**2) / (a - b), a + b) is True
    assert _cancels(a / (a + b) + b / (a + b), sympy.Integer(1)) is True
    assert _cancels(1 / (1 / a + 1 / b), a * b / (a + b)) is True
    assert _cancels(1 / (1 / a + 1 / b), a * b / (a + b + c)) is False
    assert _cancels(a / b - a / b + c, c) is True
