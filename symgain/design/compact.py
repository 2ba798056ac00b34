"""The compact closed form: gains as a short sequence of named intermediate quantities.

For large plants the expanded gains grow beyond use (a chain of four carriages,
8 states, already has about a hundred thousand operations). The compact form
builds the same exact gains without expanding anything, as a straight-line
sequence of definitions, each a few operations of the parameters and of
earlier definitions:

0. the plant entries ``a{i}_{j}`` = A[i, j], ``b{i}`` = B[i, 0] and the target coefficients
   ``alpha{k}``, each computed once;
1. the controllability columns ``ab{j}_{i}`` = entry i of A^j b (j = 0 .. n-1);
2. a fixed-pivot Gaussian elimination of Ctrb^T q = e_n (multipliers ``f{k}_{i}``, entries
   ``u{k}_{i}_{j}`` after step k, right-hand sides ``r{k}_{i}``), then back substitution for
   ``q{i}``: q^T = e_n^T Ctrb^-1, the last row of the inverse controllability matrix;
3. Ackermann's formula K = q^T alpha(A) by Horner's rule on the row vector:
   ``h{k}_{j}`` = (q^T (A^k + alpha_1 A^(k-1) + ... + alpha_k I))_j, and K = h_n.

Nothing is simplified or expanded, so the definitions stay as small as the plant
matrix. The pivots are chosen once, by the Markowitz count among the entries
that are nonzero at a random rational point of the parameters: a pivot nonzero
there is not identically zero, so the formulas hold wherever the pivots do not
vanish (their product is, up to sign, det Ctrb). These pivots are the validity
conditions.

>>> import sympy as sp
>>> m, c, k, w = sp.symbols("m c k w", positive=True)
>>> A = sp.Matrix([[0, 1, 0], [-k/m, -c/m, k/m], [k/m, 0, -k/m - c/m]]); B = sp.Matrix([[0], [1/m], [0]])
>>> form = compact_single_input(A, B, [3*w, 3*w**2, w**3], avoid={"m", "c", "k", "w"})
>>> for name, value in form.definitions:
...     print(name, "=", value)
a2_1 = -k/m
a2_2 = -c/m
a2_3 = k/m
a3_1 = k/m
a3_3 = -c/m - k/m
b2 = 1/m
alpha1 = 3*w
alpha2 = 3*w**2
alpha3 = w**3
q3 = 1/(a3_1*b2)
h1_3 = a3_3*q3 + alpha1*q3
h2_3 = a3_3*h1_3 + alpha2*q3
>>> form.gain
Matrix([[a2_1*a3_1*q3 + a3_1*h2_3, a2_2*a3_1*q3 + a3_1*h1_3, a2_3*a3_1*q3 + a3_3*h2_3 + alpha3*q3]])
>>> form.pivots
(a3_1*b2, b2, b2)
>>> from symgain.design.placement import ackermann  # the same gain, expanded
>>> S = sp.Symbol("s")
>>> sp.simplify(substitute(form.gain, form.definitions) - ackermann(A, B, (S + w)**3))
Matrix([[0, 0, 0]])
"""
from __future__ import annotations

import random
from dataclasses import dataclass
from fractions import Fraction

import sympy as sp

from .algebra import rational_atoms

__all__ = ["CompactForm", "compact_single_input", "substitute", "exact_values", "random_point",
           "forward_derivatives", "numeric_function"]


@dataclass(frozen=True)
class CompactForm:
    """Definitions in order, the gain in their symbols, and the pivots that must not vanish."""

    definitions: tuple[tuple[sp.Symbol, sp.Expr], ...]
    gain: sp.Matrix  # 1 x n
    pivots: tuple[sp.Expr, ...]  # a symbol of the definitions or a short expression of the parameters


def random_point(exprs, seed: int = 0) -> dict[sp.Expr, Fraction]:
    """Random rationals (numerator up to 10^6) for the symbols and non-rational atoms of ``exprs``.

    Positive values for every atom, so that sign assumptions hold.

    >>> x = sp.Symbol("x")
    >>> list(random_point([x + 1]).keys())
    [x]
    """
    rnd = random.Random(seed)
    return {a: Fraction(rnd.randint(1, 10**6), rnd.randint(1, 10**3)) for a in rational_atoms(exprs)}


def _value(expr: sp.Expr, values: dict) -> Fraction:
    """Exact value of a rational expression of the atoms (keys of ``values``)."""
    if expr in values:
        return values[expr]
    if expr.is_Rational:
        return Fraction(int(expr.p), int(expr.q))
    if expr.is_Add:
        return sum((_value(a, values) for a in expr.args), Fraction(0))
    if expr.is_Mul:
        out = Fraction(1)
        for a in expr.args:
            out *= _value(a, values)
        return out
    if expr.is_Pow and expr.exp.is_Integer:
        return _value(expr.base, values) ** int(expr.exp)
    raise ValueError(f"no value for {expr}")


def exact_values(definitions, point: dict) -> dict:
    """``point`` extended by the exact value of every definition, in order.

    >>> x, t = sp.symbols("x t")
    >>> exact_values([(t, x + 1)], {x: Fraction(1, 2)})[t]
    Fraction(3, 2)
    """
    values = dict(point)
    for sym, expr in definitions:
        values[sym] = _value(expr, values)
    return values


def substitute(matrix, definitions):
    """The matrix with the definitions substituted back, last first (expands nothing)."""
    out = sp.Matrix(matrix)
    for sym, expr in reversed(tuple(definitions)):
        out = out.xreplace({sym: expr})
    return out


def nominal_point(exprs, nominal: dict, fallback: dict) -> dict[sp.Expr, Fraction]:
    """Exact rationals of the nominal values (as written in decimal) for the atoms of ``exprs``;
    an atom without a nominal value keeps its value from ``fallback``."""
    out = {}
    for atom in rational_atoms(exprs):
        try:
            out[atom] = Fraction(str(float(atom.xreplace(nominal))))
        except (TypeError, ValueError):
            out[atom] = fallback[atom]
    return out


class _Builder:
    """Names intermediate quantities and keeps their exact values at two points:
    a random one (the proof that a pivot is not identically zero) and the nominal one."""

    def __init__(self, avoid: set[str], values: dict, nominal: dict):
        self.avoid = set(avoid)
        self.values, self.nominal = values, nominal
        self.definitions: list[tuple[sp.Symbol, sp.Expr]] = []

    def value(self, expr: sp.Expr) -> tuple[Fraction, Fraction]:
        return _value(expr, self.values), _value(expr, self.nominal)

    def name(self, label: str, expr: sp.Expr, always: bool = False) -> tuple[sp.Expr, tuple[Fraction, Fraction]]:
        """``(symbol or expr, exact values)``; a sum gets a name, a product stays inline
        unless ``always`` (then only numbers and single symbols stay inline)."""
        value = self.value(expr)
        if expr.is_Symbol or expr.is_Number or not (always or expr.has(sp.Add)):
            return expr, value
        while label in self.avoid:
            label += "_"
        self.avoid.add(label)
        sym = sp.Symbol(label)
        self.definitions.append((sym, expr))
        self.values[sym], self.nominal[sym] = value
        return sym, value


THRESHOLD = 0.1  # threshold pivoting at the nominal point (common practice in sparse LU)


def _markowitz(rows: dict, active_rows: set, active_cols: set):
    """(row, col) of the pivot: fewest fill-ins, then the fewest operations.

    Candidates are nonzero at the random point and at the nominal point, and at the
    nominal point at least THRESHOLD times the largest candidate of their column
    (threshold partial pivoting, for accuracy in floating point). When no entry is
    nonzero at the nominal point, the nominal tests are dropped.
    """
    counts: dict[int, int] = {}
    biggest: dict[int, Fraction] = {}
    for i in active_rows:
        for j, (_, (_, vn)) in rows[i].items():
            if j in active_cols:
                counts[j] = counts.get(j, 0) + 1
                biggest[j] = max(biggest.get(j, Fraction(0)), abs(vn))
    nominal_ok = any(biggest.values())
    best = None
    for i in sorted(active_rows):
        entries = {j: v for j, v in rows[i].items() if j in active_cols}
        for j, (expr, (value, vn)) in sorted(entries.items()):
            if value == 0 or (nominal_ok and (vn == 0 or abs(vn) < THRESHOLD * biggest[j])):
                continue
            key = ((len(entries) - 1) * (counts[j] - 1), sp.count_ops(expr), i, j)
            if best is None or key < best:
                best = key
    return None if best is None else best[2:]


def compact_single_input(A: sp.Matrix, B: sp.Matrix, alpha, avoid: set[str] = frozenset(),
                         seed: int = 0, nominal: dict | None = None) -> CompactForm:
    """The compact form of K with det(sI - A + B K) = s^n + alpha_1 s^(n-1) + ... + alpha_n.

    ``nominal`` (symbol -> number) steers the pivot choice so that the formulas hold
    and are accurate at the nominal point (see :func:`_markowitz`).

    Raises ``ZeroDivisionError`` when no nonzero pivot is left (the plant is not
    controllable at the random point, hence, with high probability, nowhere).
    """
    n = A.rows
    values = random_point([*A, *B, *alpha], seed)
    build = _Builder(avoid, values, nominal_point([*A, *B, *alpha], nominal or {}, values))
    Aentries = {(i, k): build.name(f"a{i + 1}_{k + 1}", A[i, k], always=True) for i in range(n)
                for k in range(n) if A[i, k] != 0}  # each plant entry is computed once
    col = {i: build.name(f"b{i + 1}", B[i, 0], always=True) for i in range(n) if B[i, 0] != 0}
    alpha = [build.name(f"alpha{k}", sp.sympify(a), always=True)[0] for k, a in enumerate(alpha, start=1)]
    rows = {0: dict(col)}  # rows of Ctrb^T: row j = A^j b
    for j in range(1, n):
        new = {}
        for i in range(n):
            terms = [a * col[k][0] for (r, k), (a, _) in Aentries.items() if r == i and k in col]
            expr = sp.Add(*terms)
            if expr != 0:
                new[i] = build.name(f"ab{j}_{i + 1}", expr)
        col = new
        rows[j] = dict(new)
    rhs = {n - 1: (sp.Integer(1), (Fraction(1), Fraction(1)))}
    active_rows, active_cols = set(range(n)), set(range(n))
    steps, pivots = [], []
    for k in range(1, n + 1):
        found = _markowitz(rows, active_rows, active_cols)
        if found is None:
            raise ZeroDivisionError("no nonzero pivot left: the controllability matrix is singular")
        pi, pj = found
        pivot = rows[pi][pj][0]
        pivots.append(pivot)
        active_rows.discard(pi)
        active_cols.discard(pj)
        for i in sorted(active_rows):
            if pj not in rows[i]:
                continue
            factor = build.name(f"f{k}_{i + 1}", rows[i].pop(pj)[0] / pivot, always=True)[0]
            for j, (v, _) in rows[pi].items():
                if j in active_cols:
                    old = rows[i].get(j, (sp.Integer(0), 0))[0]
                    expr = old - factor * v
                    if expr == 0:
                        rows[i].pop(j, None)
                    else:
                        rows[i][j] = build.name(f"u{k}_{i + 1}_{j + 1}", expr)
            if pi in rhs:
                expr = rhs.get(i, (sp.Integer(0), 0))[0] - factor * rhs[pi][0]
                if expr == 0:
                    rhs.pop(i, None)
                else:
                    rhs[i] = build.name(f"r{k}_{i + 1}", expr)
        steps.append((pi, pj))
    q: dict[int, sp.Expr] = {}
    for pi, pj in reversed(steps):
        acc = rhs.get(pi, (sp.Integer(0), 0))[0]
        acc = acc - sp.Add(*[v * q[j] for j, (v, _) in rows[pi].items() if j != pj and j in q])
        if acc != 0:
            q[pj] = build.name(f"q{pj + 1}", acc / rows[pi][pj][0], always=True)[0]
    row = dict(q)
    for k, a in enumerate(alpha, start=1):  # Horner: row <- row A + alpha_k q^T
        new = {}
        for j in range(n):
            expr = sp.Add(*[row[i] * v for (i, jj), (v, _) in Aentries.items() if jj == j and i in row])
            expr = expr + a * q.get(j, 0)
            if expr != 0:
                new[j] = expr if k == n else build.name(f"h{k}_{j + 1}", expr)[0]
        row = new
    gain = sp.Matrix(1, n, [row.get(j, sp.Integer(0)) for j in range(n)])
    return CompactForm(_needed(build.definitions, [*gain, *pivots]), gain, tuple(pivots))


def _needed(definitions, roots) -> tuple:
    """The definitions that the roots use, directly or through other definitions (order kept)."""
    wanted = set().union(*[sp.sympify(r).free_symbols for r in roots])
    keep = []
    for sym, expr in reversed(definitions):
        if sym in wanted:
            keep.append((sym, expr))
            wanted |= expr.free_symbols
    return tuple(reversed(keep))


def forward_derivatives(definitions, exprs, parameter: sp.Symbol, avoid: set[str] = frozenset()):
    """d/d(parameter) of ``exprs`` on the compact form, by forward differentiation.

    Each definition ``t = f(p, earlier t)`` gets ``d_t_p = df/dp + sum df/dt' d_t'_p``
    (sympy's diff on the one short definition only, never on an expanded formula).
    Returns ``(new definitions, derivatives of exprs)``; the new definitions use
    the old ones and come after them.

    >>> p, t = sp.symbols("p t")
    >>> forward_derivatives([(t, p**2 + 1)], [t / p], p)  # d_t_p = 2 p is short: inlined
    ((), [2 - t/p**2])
    """
    taken = set(avoid) | {str(s) for s, _ in definitions}
    derivative: dict[sp.Symbol, sp.Expr] = {}
    new = []

    def total(expr):
        out = sp.diff(expr, parameter)
        for sym in expr.free_symbols & derivative.keys():
            out += sp.diff(expr, sym) * derivative[sym]
        return out

    for sym, expr in definitions:
        d = total(expr)
        if d == 0:
            continue
        if d.has(sp.Add):
            label = f"d_{sym}_{parameter}"
            while label in taken:
                label += "_"
            taken.add(label)
            name = sp.Symbol(label)
            new.append((name, d))
            d = name
        derivative[sym] = d
    return tuple(new), [total(sp.sympify(e)) for e in exprs]


def numeric_function(args, exprs, definitions=(), modules="numpy"):
    """``sympy.lambdify`` of ``exprs`` that first computes the definitions, in order.

    >>> x, t = sp.symbols("x t")
    >>> numeric_function([x], [t * 2], [(t, x + 1)])(2.0)
    [6.0]
    """
    args = list(args)
    # arguments renamed first, so that a parameter named ``e`` or ``pi`` is not the printed constant
    private = [sp.Symbol(f"_arg{i}") for i in range(len(args))]
    by_name = {str(a): p for a, p in zip(args, private)}
    definitions = list(definitions)
    free = set()
    for e in [exprs] + [v for _, v in definitions]:
        if isinstance(e, (list, tuple)):
            for x in e:
                free |= set(getattr(x, "free_symbols", ()))
        else:
            free |= set(getattr(e, "free_symbols", ()))
    mapping = {s: by_name[str(s)] for s in free if str(s) in by_name}
    mapping.update(zip(args, private))

    def rename(e):
        if isinstance(e, (list, tuple)):
            return type(e)(rename(x) for x in e)
        return e.xreplace(mapping) if isinstance(e, (sp.Basic, sp.MatrixBase)) else e

    exprs = rename(exprs)
    definitions = [(name, rename(value)) for name, value in definitions]
    if not definitions:
        return sp.lambdify(private, exprs, modules=modules)
    return sp.lambdify(private, exprs, modules=modules, cse=lambda e: (definitions, e))
