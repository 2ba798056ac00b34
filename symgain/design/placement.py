"""Single-input pole placement in closed form: coefficient matching and Ackermann.

Coefficient matching uses the matrix determinant lemma

    det(sI - A + B K) = a(s) + K adj(sI - A) B,
    adj(sI - A) = sum_{i=1..n} s^(n-i) (A^(i-1) + a_1 A^(i-2) + ... + a_(i-1) I),

so the coefficient of s^(n-i) of the closed-loop polynomial is
``a_i + K M[:, i]`` with ``M = [B, AB, ..., A^(n-1) B] T`` and ``T`` the unit
upper-triangular Toeplitz matrix of the open-loop coefficients. Matching
``a_i + K M[:, i] = alpha_i`` is an n x n linear system, solved exactly over
the fraction field of the parameters (``det M = det`` of the controllability
matrix). Ackermann's formula ``K = e_n^T Ctrb^-1 alpha(A)`` is the second,
independent route used by the tests.

>>> import sympy as sp
>>> m, c, w = sp.symbols("m c w", positive=True)
>>> A = sp.Matrix([[0, 1], [0, -c/m]]); B = sp.Matrix([[0], [1/m]])
>>> target = sp.expand((S + w)**2)
>>> place_single_input(A, B, target).gain
Matrix([[m*w**2, -c + 2*m*w]])
>>> ackermann(A, B, target)
Matrix([[m*w**2, -c + 2*m*w]])
"""
from __future__ import annotations

from dataclasses import dataclass

import sympy as sp
from .algebra import Field, SparseLU, charpoly, matvec
from ..model import S

__all__ = ["SingleInputPlacement", "place_single_input", "ackermann", "controllability_matrix",
           "gain_symbols"]


def gain_symbols(letter: str, shape: tuple[int, int], avoid: set[str] = frozenset()) -> sp.Matrix:
    """Symbols for unknown gains, ``k_1, k_2 ...`` (``k_11, k_12 ...`` for several rows)."""
    rows, cols = shape
    base = letter
    while any(n.startswith(base + "_") for n in avoid):
        base += letter
    if rows == 1 or cols == 1:
        return sp.Matrix(rows, cols, [sp.Symbol(f"{base}_{i + 1}") for i in range(rows * cols)])
    return sp.Matrix(rows, cols, lambda i, j: sp.Symbol(f"{base}_{i + 1}{j + 1}"))


def controllability_matrix(A: list, b: list, field: Field) -> list[list]:
    """The columns b, Ab, ..., A^(n-1) b (a list of columns) over the field."""
    cols = [list(b)]
    for _ in range(len(A) - 1):
        cols.append(matvec(A, cols[-1], field))
    return cols


@dataclass(frozen=True)
class SingleInputPlacement:
    """Everything coefficient matching produced, kept for reports and tests."""

    gain: sp.Matrix  # 1 x n
    gain_symbols: sp.Matrix  # 1 x n symbolic unknowns
    open_loop_coeffs: tuple[sp.Expr, ...]  # a_1 .. a_n
    target_coeffs: tuple[sp.Expr, ...]  # alpha_1 .. alpha_n
    gain_coeff_matrix: sp.Matrix  # M: coefficient of s^(n-i) is a_i + K M[:, i]
    controllability_det: tuple[sp.Expr, sp.Expr]  # numerator, denominator
    gain_denominators: tuple[sp.Expr, ...]
    field: Field

    @property
    def closed_loop_polynomial(self) -> sp.Expr:
        """det(sI - A + B K) with the gains as unknown symbols."""
        n = len(self.open_loop_coeffs)
        terms = [S**n]
        for i in range(n):
            coeff = self.open_loop_coeffs[i] + (self.gain_symbols * self.gain_coeff_matrix[:, i])[0, 0]
            terms.append(coeff * S ** (n - 1 - i))
        return sp.Add(*terms)

    @property
    def coefficient_equations(self) -> tuple[sp.Eq, ...]:
        """One equation per power s^(n-1) ... s^0: closed-loop coefficient = target coefficient."""
        out = []
        for i, alpha in enumerate(self.target_coeffs):
            lhs = self.open_loop_coeffs[i] + (self.gain_symbols * self.gain_coeff_matrix[:, i])[0, 0]
            out.append(sp.Eq(lhs, alpha, evaluate=False))
        return tuple(out)


def _poly_coeffs(target: sp.Expr, n: int) -> list[sp.Expr]:
    coeffs = sp.Poly(target, S).all_coeffs()
    assert len(coeffs) == n + 1 and coeffs[0] == 1, "target must be monic of degree n"
    return coeffs[1:]


def _tidy(field: Field, element) -> tuple[sp.Expr, sp.Expr]:
    """(factored expression, factored denominator) of a field element."""
    expr = field.factored(element)
    return expr, sp.fraction(expr)[1]


def place_single_input(A: sp.Matrix, B: sp.Matrix, target: sp.Expr, *,
                       letter: str = "k", avoid: set[str] = frozenset()) -> SingleInputPlacement:
    """Gains K (1 x n) so that det(sI - A + B K) equals the monic ``target`` in s."""
    n = A.rows
    alpha = _poly_coeffs(target, n)
    field = Field.for_exprs([*A, *B, *alpha])
    Ad, b = field.matrix(A), [row[0] for row in field.matrix(B)]
    a = charpoly(Ad, field)[1:]  # a_1 .. a_n
    cols = controllability_matrix(Ad, b, field)
    mcols = []
    for i in range(n):  # column i of M: sum_j a_j A^(i-j) b, a_0 = 1
        col = cols[i]
        for j in range(1, i + 1):
            col = [x + y * a[j - 1] for x, y in zip(col, cols[i - j])]
        mcols.append(col)
    # K M = alpha - a with M = Ctrb T:  Ctrb^T K^T = T^-T (alpha - a)^T, T unit triangular
    r = [field.element(x) - a[i] for i, x in enumerate(alpha)]
    for i in range(n):  # forward substitution with T^T (lower unit triangular, T^T[i][j] = a_(i-j))
        for j in range(i):
            r[i] = r[i] - a[i - j - 1] * r[j]
    lu = SparseLU.factor(cols, field)  # rows of Ctrb^T are the columns of Ctrb
    gsyms = gain_symbols(letter, (1, n), avoid)
    if not lu.det:
        gain, dens = sp.Matrix(1, n, [sp.nan] * n), ()
    else:
        tidy = [_tidy(field, x) for x in lu.solve(r)]
        gain = sp.Matrix(1, n, [t[0] for t in tidy])
        dens = tuple(t[1] for t in tidy)
    return SingleInputPlacement(
        gain=gain,
        gain_symbols=gsyms,
        open_loop_coeffs=tuple(field.to_expr(x) for x in a),
        target_coeffs=tuple(alpha),
        gain_coeff_matrix=field.to_matrix([list(r) for r in zip(*mcols)]),
        controllability_det=field.numer_denom(lu.det),
        gain_denominators=dens,
        field=field,
    )


def ackermann(A: sp.Matrix, B: sp.Matrix, target: sp.Expr) -> sp.Matrix:
    """K = e_n^T Ctrb^-1 alpha(A) (Ackermann's formula), exact over the fraction field."""
    n = A.rows
    alpha = _poly_coeffs(target, n)
    field = Field.for_exprs([*A, *B, *alpha])
    Ad, b = field.matrix(A), [row[0] for row in field.matrix(B)]
    lu = SparseLU.factor(controllability_matrix(Ad, b, field), field)
    q = lu.solve([field.zero] * (n - 1) + [field.one])  # q^T = e_n^T Ctrb^-1
    rows = Ad
    row = list(q)
    for coeff in alpha:  # Horner on the row vector: q^T alpha(A)
        c = field.element(coeff)
        row = [sum((row[i] * rows[i][j] for i in range(n) if row[i] and rows[i][j]), field.zero) + c * q[j]
               for j in range(n)]
    return sp.Matrix(1, n, [_tidy(field, v)[0] for v in row])
