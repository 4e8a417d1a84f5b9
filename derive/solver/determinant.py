"""Exact polynomial determinant kernel (python-flint ``fmpz_mpoly``).

Everything symbolic in ``derive`` ends up as a determinant of a sparse matrix whose entries
are integer polynomials in the circuit's symbols (conductances ``G = 1/R``, admittances
``s*C`` ...). This module computes such determinants exactly and fast, and provides the few
helpers around them (term-count estimate, conversion to sympy, exact evaluation, cancelling
a ratio).

Algorithm (:func:`det`)
-----------------------
Two exact, division-light variants were implemented and measured; :func:`det` uses the
first whenever its state count stays small (always for circuits of small path-width:
ladders, grids, cubes, bridges) and falls back to the second otherwise.

1. **Row-by-row Laplace expansion with memoised column sets** (:func:`_det_expand`).
   Rows are taken in a greedy order that keeps the frontier (columns opened but not yet
   closed) small; after ``k`` rows a state is the set of columns used, its value the signed
   sum of all partial products using exactly those columns; states that leave a column
   no later row can fill are dropped. Only original (short) entries are multiplied in and
   nothing is divided. States reached by a single path are kept as a lazy
   ``big * small`` pair, so a chain never forms ``big * monomial`` temporaries.
2. **Sparse fraction-free (Bareiss) elimination with deferred row scaling**
   (:func:`_det_sparse`). Pivot: diagonal or constant entries first (an off-diagonal
   symbolic pivot breaks the symmetry of a nodal matrix and swelled grid4 by >1000x), then
   Markowitz cost ``(len(row)-1)*(len(col)-1)``, then a row already up to date, then the
   fewest terms. Untouched rows are not multiplied by ``p_k/p_{k-1}``: a row remembers the
   step ``l`` it was last written at, its true value at step ``m`` is ``stored*p_m/p_l``
   (telescoping), and a touched row becomes ``(p*v_ij - v_ic*v_rj)/p_l`` (exact division,
   Sylvester's identity), with the pivot row brought up to date first. Zero pivots never
   occur (only nonzero entries are candidates); row/column permutation signs are tracked.
   ``defer=False`` is the classic variant (all rows rescaled every step), kept for tests.

Measured (``python benchmarks/bench_solver.py --variants``; 2 cores, python-flint 0.9;
the machine was shared, load average ~8, so wall times are inflated -- CPU time given
where it differs; "quiet" = same process, lower load, earlier in the session):

=====================  =========  ==========  =====================  ===========  ========
case (nodal det)       terms      dense       sparse Bareiss          sparse        expansion
                                  Bareiss     eager                   deferred      (det)
=====================  =========  ==========  =====================  ===========  ========
ladder8                1 597      578 ms      186 ms                  0.46 ms       0.43 ms
ladder12               75 025     >30 s       >30 s                   12-20 ms      15-21 ms
ladder16               3 524 578  --          --                      0.6-0.9 s     0.6-1.0 s quiet;
                                                                                    2.2-3.0 s wall /
                                                                                    0.76 s CPU loaded
grid3 (3x3 nodes)      192        116 ms      28 ms                   3.8 ms        0.4 ms
grid4 (4x4 nodes)      100 352    >30 s       >30 s                   >120 s        0.14 s quiet,
                                                                                    0.44-0.62 s loaded
cube                   384        85 ms       72 ms                   15 ms         0.5-0.7 ms
=====================  =========  ==========  =====================  ===========  ========

The sparse deferred Bareiss and the expansion tie on chains (ladders: no division ever
happens in either); the expansion wins by 10-1000x wherever Bareiss has to divide (the
numerator ``p_k * a_ij`` has ``|p_k|*|a_ij|`` terms before the exact division). Hence the
hybrid. Ordering: lex, deglex and degrevlex were within noise of each other (ladder16
0.75-0.92 / 0.75-0.77 / 0.74-1.0 s, grid4 0.14-0.16 / 0.13-0.14 / 0.14-0.21 s);
:func:`make_context` uses deglex. About half of ladder16's time is kernel page-fault time
(sys) for ~600 MB of fresh polynomial memory.
"""
from __future__ import annotations

import math
from fractions import Fraction
from typing import Dict, Sequence

import flint

_ORDERING = "deglex"
_MAX_STATES = 2000   # expansion frontier cap; beyond it, sparse Bareiss


def make_context(names: Sequence[str]) -> flint.fmpz_mpoly_ctx:
    """Polynomial context over ZZ for the symbol ``names`` (ordering chosen by measurement).

    >>> ctx = make_context(["G1", "G2"])
    >>> ctx.names()
    ('G1', 'G2')
    """
    names = tuple(str(n) for n in names)
    if not names:  # flint needs at least one generator; use a dummy that never appears
        names = ("_one",)
    return flint.fmpz_mpoly_ctx.get(names, _ORDERING)


class SparseMatrix:
    """Square matrix, rows stored as ``dict col -> nonzero fmpz_mpoly``.

    >>> ctx = make_context(["a", "b"]); a, b = ctx.gens()
    >>> m = SparseMatrix(ctx, 2)
    >>> m.add(0, 0, a); m.add(0, 0, b); m.add(1, 1, 3); m.add(0, 1, -a); m.add(0, 1, a)
    >>> m.get(0, 0), m.get(1, 1), m.get(0, 1)
    (a + b, 3, 0)
    >>> m.rows[0]
    {0: a + b}
    """

    __slots__ = ("ctx", "n", "rows")

    def __init__(self, ctx, n: int):
        self.ctx = ctx
        self.n = int(n)
        self.rows = [dict() for _ in range(self.n)]

    def _conv(self, value):
        if isinstance(value, (flint.fmpz_mpoly, flint.fmpq_mpoly)):
            return value
        return self.ctx.constant(int(value)) if not isinstance(value, Fraction) else \
            self.ctx.constant(_as_int(value))

    def add(self, i: int, j: int, value) -> None:
        """Accumulate ``value`` into entry ``(i, j)``; an entry that becomes zero is dropped."""
        if not (0 <= i < self.n and 0 <= j < self.n):
            raise IndexError((i, j))
        v = self._conv(value)
        if v.is_zero():
            return
        row = self.rows[i]
        old = row.get(j)
        if old is not None:
            v = old + v
        if v.is_zero():
            row.pop(j, None)
        else:
            row[j] = v

    def get(self, i: int, j: int):
        v = self.rows[i].get(j)
        return v if v is not None else self.ctx.constant(0)

    def copy(self) -> "SparseMatrix":
        m = SparseMatrix(self.ctx, self.n)
        m.rows = [dict(r) for r in self.rows]
        return m

    def bordered(self, col: Dict[int, object], row: Dict[int, object], corner=0) -> "SparseMatrix":
        """New ``(n+1)x(n+1)`` matrix with ``col`` as extra last column, ``row`` as last row.

        >>> ctx = make_context(["a"]); a, = ctx.gens()
        >>> m = SparseMatrix(ctx, 1); m.add(0, 0, a)
        >>> det(m.bordered({0: 1}, {0: 1}, corner=0))
        -1
        """
        m = SparseMatrix(self.ctx, self.n + 1)
        m.rows[: self.n] = [dict(r) for r in self.rows]
        for i, v in col.items():
            m.add(i, self.n, v)
        for j, v in row.items():
            m.add(self.n, j, v)
        m.add(self.n, self.n, corner)
        return m

    def with_column(self, j: int, col: Dict[int, object]) -> "SparseMatrix":
        """Copy with column ``j`` replaced by ``col`` (Cramer's rule numerators)."""
        m = self.copy()
        for r in m.rows:
            r.pop(j, None)
        for i, v in col.items():
            m.add(i, j, v)
        return m

    def to_lists(self):
        z = self.ctx.constant(0)
        return [[r.get(j, z) for j in range(self.n)] for r in self.rows]

    def __repr__(self):
        return f"SparseMatrix(n={self.n}, nnz={sum(map(len, self.rows))})"


def _as_int(v):
    if isinstance(v, Fraction):
        if v.denominator != 1:
            raise ValueError("matrix entries must be integer polynomials")
        return v.numerator
    return int(v)


def _perm_sign(seq) -> int:
    """Sign of the permutation ``seq`` of ``0..n-1`` (cycle count)."""
    seen = [False] * len(seq)
    sign = 1
    for s in range(len(seq)):
        if not seen[s]:
            j, length = s, 0
            while not seen[j]:
                seen[j] = True
                j = seq[j]
                length += 1
            if length % 2 == 0:
                sign = -sign
    return sign


def det(m: SparseMatrix):
    """Exact determinant: memoised row expansion when the frontier is small (at most
    ``_MAX_STATES`` column-set states), else sparse fraction-free Bareiss elimination with
    Markowitz pivoting and deferred exact divisions (see the module docstring).

    >>> ctx = make_context(["a", "b", "c"]); a, b, c = ctx.gens()
    >>> m = SparseMatrix(ctx, 2)
    >>> m.add(0, 0, a + b); m.add(0, 1, -b); m.add(1, 0, -b); m.add(1, 1, b + c)
    >>> det(m)
    a*b + a*c + b*c
    >>> det(SparseMatrix(ctx, 0))
    1
    >>> z = SparseMatrix(ctx, 2); z.add(0, 1, a); z.add(1, 0, b); det(z)  # zero diagonal
    -a*b
    """
    if m.n == 0:
        return m.ctx.constant(1)
    plan = _expansion_plan(m, _MAX_STATES)
    if plan is not None:
        return _det_expand(m, plan)
    return _det_sparse(m, defer=True)


def _det_sparse(m: SparseMatrix, defer: bool = True):
    ctx = m.ctx
    n = m.n
    if n == 0:
        return ctx.constant(1)
    rows = [dict(r) for r in m.rows]
    cols: Dict[int, set] = {}
    for i, r in enumerate(rows):
        for j in r:
            cols.setdefault(j, set()).add(i)
    level = [0] * n                 # step at which row was last brought up to date
    pivots = [ctx.constant(1)]      # pivots[k] = true pivot of step k (pivots[0] = 1)
    active = set(range(n))
    row_order, col_order = [], []
    for step in range(1, n + 1):
        # ---- pivot choice: Markowitz, then up-to-date row, then short, then low degree
        # (diagonal or constant entries first: off-diagonal symbolic pivots break the
        #  symmetry of nodal matrices and swell the entries -- measured 1000x on grid4)
        best = None
        best_key = None
        for i in active:
            r = rows[i]
            if not r:
                return ctx.constant(0)
            rl = len(r) - 1
            stale = 0 if level[i] == step - 1 else 1
            for j, v in r.items():
                key = (0 if (i == j or v.is_constant()) else 1,
                       rl * (len(cols[j]) - 1), stale, len(v))
                if best_key is None or key < best_key:
                    best_key, best = key, (i, j)
            if best_key == (0, 0, 0, 1):
                break
        pr, pc = best
        prow = rows[pr]
        if defer and level[pr] != step - 1:       # bring pivot row up to date
            num, den = pivots[step - 1], pivots[level[pr]]
            for j in prow:
                prow[j] = (prow[j] * num) / den
        p = prow[pc]
        p_is_one = p.is_one()
        active.discard(pr)
        row_order.append(pr)
        col_order.append(pc)
        for j in prow:
            cols[j].discard(pr)
        touched = cols.pop(pc)
        others = [(j, v) for j, v in prow.items() if j != pc]
        for i in touched:
            r = rows[i]
            a = r.pop(pc)
            d = pivots[level[i]] if defer else pivots[step - 1]
            d_is_one = d.is_one()
            for j, v in r.items():
                r[j] = v if p_is_one else v * p
            for j, v in others:
                w = r.get(j)
                if w is None:
                    r[j] = -(a * v)
                    cols[j].add(i)
                else:
                    r[j] = w - a * v
            if not d_is_one:
                for j in r:
                    r[j] = r[j] / d
            for j in [j for j, v in r.items() if v.is_zero()]:
                del r[j]
                cols[j].discard(i)
            level[i] = step
        if not defer:                              # classic Bareiss: scale untouched rows
            d = pivots[step - 1]
            if not (p_is_one and d.is_one()):
                for i in active:
                    if i not in touched:
                        r = rows[i]
                        for j in r:
                            r[j] = (r[j] * p) / d
                    level[i] = step
        pivots.append(p)
        rows[pr] = None
    result = pivots[-1]
    sign = _perm_sign(row_order) * _perm_sign(col_order)
    return result if sign > 0 else -result


def _row_order(rows, n):
    """Greedy row order keeping the frontier (columns opened but not closed) small."""
    remaining_in_col: Dict[int, int] = {}
    for r in rows:
        for j in r:
            remaining_in_col[j] = remaining_in_col.get(j, 0) + 1
    open_cols: set = set()
    left = set(range(n))
    order = []
    while left:
        best, best_key = None, None
        for i in left:
            cs = rows[i].keys()
            new = sum(1 for j in cs if j not in open_cols)
            closed = sum(1 for j in cs if remaining_in_col[j] == 1)
            key = (new - closed, new, len(cs), i)
            if best_key is None or key < best_key:
                best, best_key = i, key
        order.append(best)
        left.discard(best)
        for j in rows[best]:
            remaining_in_col[j] -= 1
            if remaining_in_col[j] == 0:
                open_cols.discard(j)
            else:
                open_cols.add(j)
    return order


def _materialize(pairs):
    """sum(big * small) over the pairs, skipping products with 1 and -1."""
    acc = None
    for D, c in pairs:
        t = D if c.is_one() else (-D if (-c).is_one() else D * c)
        acc = t if acc is None else acc + t
    return acc


def _expansion_plan(m: SparseMatrix, max_states: int):
    """Row order and per-step closing masks; None if more than ``max_states`` states."""
    n = m.n
    rows = m.rows
    order = _row_order(rows, n)
    last = {}
    for k, i in enumerate(order):
        for j in rows[i]:
            last[j] = k
    if len(last) < n:
        return order, None                   # an all-zero column: singular
    closing = [0] * n
    for j, k in last.items():
        closing[k] |= 1 << j
    mask = 0
    states = {0}
    for k, i in enumerate(order):
        mask |= closing[k]
        cols = [1 << j for j in rows[i]]
        new = set()
        for S in states:
            for b in cols:
                if not S & b:
                    T = S | b
                    if T & mask == mask:
                        new.add(T)
        if len(new) > max_states:
            return None
        states = new
    return order, closing


def _det_expand(m: SparseMatrix, plan):
    """Determinant by row-by-row Laplace expansion with memoised column sets.

    State after k rows (in ``plan`` order): bitmask of used columns -> signed sum of the
    products along all partial permutations using exactly those columns. Only original
    (short) entries are ever multiplied in, and nothing is divided.
    """
    ctx = m.ctx
    order, closing = plan
    if closing is None:
        return ctx.constant(0)
    rows = m.rows
    one = ctx.constant(1)
    # A state's value is kept lazily as a list of (big, small) pairs meaning sum(big*small);
    # a state reached along one path stays a single pair, so the big*monomial products of
    # a chain (ladder) are never formed: only small*small products until two paths meet.
    states = {0: [(one, one)]}
    mask = 0
    for k, i in enumerate(order):
        mask |= closing[k]
        entries = [(1 << j, j, v) for j, v in rows[i].items()]
        new: Dict[int, list] = {}
        for S, pairs in states.items():
            if len(pairs) > 1:
                D = _materialize(pairs)
                if D.is_zero():
                    continue
                pairs = [(D, one)]
            (D, c), = pairs
            for b, j, v in entries:
                if S & b:
                    continue
                T = S | b
                if T & mask != mask:
                    continue
                cv = c * v
                if bin(S >> (j + 1)).count("1") & 1:
                    cv = -cv
                new.setdefault(T, []).append((D, cv))
        states = new
        if not states:
            return ctx.constant(0)
    (pairs,) = states.values()
    D = _materialize(pairs)
    return D if _perm_sign(order) > 0 else -D


DENSE_ESTIMATE = 400        # larger matrices are estimated by a sparse LU (scipy)


def estimate_det_terms(m: SparseMatrix) -> float:
    """Cheap estimate of the number of terms of ``det(m)``, without expanding it.

    Every symbol is set to 1 and the determinant is evaluated in floating point. For a
    nodal conductance matrix (Z-matrix pattern: off-diagonal coefficients <= 0, diagonal
    coefficients >= 0) each term of the determinant is one spanning forest of the network
    with coefficient +1 (all-minors matrix-tree theorem), so the value is the exact term
    count for distinct symbols and an upper bound when symbols repeat. For other matrices
    (controlled sources, op-amps) cancellation is possible and the result is a heuristic:
    the larger of ``|det|`` with signed and with absolute-value coefficients.

    >>> ctx = make_context(["a", "b", "c"]); a, b, c = ctx.gens()
    >>> m = SparseMatrix(ctx, 2)
    >>> m.add(0, 0, a + b); m.add(0, 1, -b); m.add(1, 0, -b); m.add(1, 1, b + c)
    >>> estimate_det_terms(m)
    3.0
    """
    import numpy as np

    n = m.n
    if n == 0:
        return 1.0
    entries = []                         # (i, j, signed value, absolute value)
    zpattern = True
    for i, r in enumerate(m.rows):
        for j, v in r.items():
            cs = [int(c) for c in v.coeffs()]
            entries.append((i, j, float(sum(cs)), float(sum(abs(c) for c in cs))))
            if i == j:
                zpattern = zpattern and all(c > 0 for c in cs)
            else:
                zpattern = zpattern and all(c < 0 for c in cs)
    if n > DENSE_ESTIMATE:               # sparse LU: linear in a chain, no n x n array
        from scipy.sparse import csc_matrix
        from scipy.sparse.linalg import splu
        rows = np.array([e[0] for e in entries], dtype=int)
        cols = np.array([e[1] for e in entries], dtype=int)
        signed = csc_matrix((np.array([e[2] for e in entries]), (rows, cols)), shape=(n, n))
        absval = csc_matrix((np.array([e[3] for e in entries]), (rows, cols)), shape=(n, n))

        def _absdet(a):
            try:
                d = splu(a).U.diagonal()
            except RuntimeError:         # exactly singular
                return 0.0
            if not np.all(d):
                return 0.0
            ld = float(np.sum(np.log(np.abs(d))))
            return math.exp(ld) if ld < 700 else math.inf
    else:
        signed = np.zeros((n, n))
        absval = np.zeros((n, n))
        for i, j, sv, av in entries:
            signed[i, j], absval[i, j] = sv, av

        def _absdet(a):
            s, ld = np.linalg.slogdet(a)
            if s == 0:
                return 0.0
            return math.exp(ld) if ld < 700 else math.inf

    est = _absdet(signed)
    if not zpattern:
        est = max(est, _absdet(absval))
    return float(round(est)) if est < 2 ** 52 else est


def poly_to_sympy(p, symbols):
    """Convert to a sympy expression built unevaluated (fast for 10^5+ terms).

    >>> import sympy
    >>> ctx = make_context(["x", "y"]); x, y = ctx.gens()
    >>> X, Y = sympy.symbols("x y")
    >>> e = poly_to_sympy(3*x**2*y - y + 2, [X, Y])
    >>> sympy.expand(e - (3*X**2*Y - Y + 2))
    0
    """
    import sympy

    syms = list(symbols)
    if p.is_zero():
        return sympy.Integer(0)
    Mul, Pow, Add, Integer = sympy.Mul, sympy.Pow, sympy.Add, sympy.Integer
    one = sympy.S.One
    powcache = {}
    terms = []
    for exps, c in p.terms():
        factors = []
        for k, e in enumerate(exps):
            if e:
                if e == 1:
                    factors.append(syms[k])
                else:
                    key = (k, e)
                    f = powcache.get(key)
                    if f is None:
                        f = powcache[key] = Pow(syms[k], Integer(e), evaluate=False)
                    factors.append(f)
        c = int(c)
        if c != 1 or not factors:
            factors.insert(0, Integer(c) if c != -1 or not factors else sympy.S.NegativeOne)
        terms.append(factors[0] if len(factors) == 1 else Mul(*factors, evaluate=False))
    if len(terms) == 1:
        return terms[0]
    return Add(*terms, evaluate=False) if terms else one * 0


def cancel_ratio(num, den):
    """Divide ``num/den`` by their gcd; make the leading coefficient of ``den`` positive.

    >>> ctx = make_context(["a", "b"]); a, b = ctx.gens()
    >>> cancel_ratio(a*a - b*b, -2*a - 2*b)
    (-a + b, 2)
    """
    if den.is_zero():
        raise ZeroDivisionError("cancel_ratio: zero denominator")
    ctx = den.context()
    if num.is_zero():
        return ctx.constant(0), ctx.constant(1)
    g = num.gcd(den)
    if not g.is_one():
        num, den = num / g, den / g
    # gcd of integer contents (flint's gcd already removes it, keep it explicit)
    if den.leading_coefficient() < 0:
        num, den = -num, -den
    return num, den


def evaluate(p, values):
    """Value of ``p`` at the point ``values`` (one per generator, in context order).

    Exact (``Fraction``) when every value is an int or Fraction; otherwise float/complex.

    >>> ctx = make_context(["x", "y"]); x, y = ctx.gens()
    >>> evaluate(3*x**2*y - y + 1, [Fraction(1, 2), 2])
    Fraction(1, 2)
    >>> evaluate(x + y, [0.5, 1j])
    (0.5+1j)
    """
    vals = list(values)
    ctx = p.context()
    if len(vals) != ctx.nvars():
        raise ValueError(f"need {ctx.nvars()} values, got {len(vals)}")
    if all(isinstance(v, (int, Fraction)) for v in vals):
        if all(isinstance(v, int) or v.denominator == 1 for v in vals):
            return Fraction(int(p(*[int(v) for v in vals])))
        qctx = flint.fmpq_mpoly_ctx.get(ctx.names(), ctx.ordering())
        q = qctx.from_dict(p.to_dict())
        r = q(*[flint.fmpq(v.numerator, v.denominator) for v in vals])
        return Fraction(int(r.p), int(r.q))
    import numpy as np

    cplx = any(isinstance(v, complex) or np.iscomplexobj(v) for v in vals)
    dtype = complex if cplx else float
    pt = np.array(vals, dtype=dtype)
    total = dtype(0)
    monoms, coeffs = p.monoms(), p.coeffs()
    chunk = 200000
    for s in range(0, len(monoms), chunk):
        e = np.array(monoms[s:s + chunk], dtype=np.int64).reshape(-1, len(vals))
        c = np.array([float(int(x)) for x in coeffs[s:s + chunk]], dtype=dtype)
        total += (c * np.prod(pt[None, :] ** e, axis=1)).sum() if len(vals) else c.sum()
    return complex(total) if cplx else float(total)
