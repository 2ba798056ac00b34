"""Exact arithmetic over the fraction field of the parameters.

Rational functions of the parameters are carried as reduced fractions of
multivariate polynomials in FLINT (python-flint's ``fmpq_mpoly``), whose gcd
and factorization run in C: pole placement for chains of 8 to 10 states
spends nearly all its time cancelling common factors, and that is where a
pure-Python polynomial ring gets slow.

Entries that are not rational in the parameters (``sqrt(k/m)``,
``sin(theta0)``, ``log(Mp)``) are first replaced by fresh generator symbols
("atoms"). Every computation here is a field operation, so substituting the
atoms back afterwards gives the right answer wherever no denominator vanishes.

>>> import sympy as sp
>>> m, k = sp.symbols("m k", positive=True)
>>> field = Field.for_exprs([k/m, sp.sqrt(k/m)])
>>> A = field.matrix(sp.Matrix([[0, 1], [-k/m, 0]]))
>>> [field.to_expr(c) for c in charpoly(A, field)]
[1, 0, k/m]
"""
from __future__ import annotations

from dataclasses import dataclass
from typing import Iterable, Sequence

from functools import lru_cache

import flint
import sympy as sp
from sympy.polys.domains import QQ
from sympy.polys.rings import PolyRing

__all__ = ["Field", "Fraction", "rational_atoms", "charpoly", "matvec", "SparseLU", "TooLarge"]


class TooLarge(ArithmeticError):
    """An intermediate result grew beyond the allowed number of terms (see ``limit``)."""


def check_size(element: "Fraction", limit: int | None) -> "Fraction":
    """The element itself; :class:`TooLarge` when it has more than ``limit`` terms."""
    if limit is not None and element.size() > limit:
        raise TooLarge(f"an intermediate result has {element.size()} terms (limit {limit})")
    return element


def rational_atoms(exprs: Iterable[sp.Expr]) -> list[sp.Expr]:
    """Subexpressions that must become generators: symbols and non-rational parts.

    >>> x = sp.Symbol("x")
    >>> sorted(map(str, rational_atoms([x**2 + sp.sqrt(2)*sp.sin(x)])))
    ['sin(x)', 'sqrt(2)', 'x']
    """
    found: dict[sp.Expr, None] = {}

    def walk(e: sp.Basic):
        if e.is_Rational:
            return
        if e.is_Float:
            raise TypeError(f"floating-point number {e} in a symbolic expression")
        if e.is_Add or e.is_Mul:
            for a in e.args:
                walk(a)
        elif e.is_Pow and e.exp.is_Integer:
            walk(e.base)
        else:  # symbols, I, pi, functions, fractional powers
            found[e] = None

    for ex in exprs:
        walk(sp.sympify(ex, strict=True))
    return list(found)


@lru_cache(maxsize=64)
def _ring(atoms: tuple) -> PolyRing:
    return PolyRing(atoms, QQ)


class Fraction:
    """A reduced fraction num/den of FLINT polynomials; den is monic."""

    __slots__ = ("num", "den")

    def __init__(self, num, den, reduce: bool = True):
        if reduce:
            if den.is_zero():
                raise ZeroDivisionError("division by zero in the fraction field")
            g = num.gcd(den)
            if not g.is_one():
                num, den = num / g, den / g
            lc = den.leading_coefficient()
            if lc != 1:
                num, den = num / lc, den / lc
        self.num, self.den = num, den

    def __bool__(self):
        return not self.num.is_zero()

    def __add__(self, other: "Fraction") -> "Fraction":
        if not other.num:
            return self
        if not self.num:
            return other
        if self.den == other.den:
            return Fraction(self.num + other.num, self.den)
        g = self.den.gcd(other.den)
        d1, d2 = self.den / g, other.den / g
        return Fraction(self.num * d2 + other.num * d1, self.den * d2)

    def __neg__(self) -> "Fraction":
        return Fraction(-self.num, self.den, reduce=False)

    def __sub__(self, other: "Fraction") -> "Fraction":
        return self + (-other)

    def __mul__(self, other: "Fraction") -> "Fraction":
        if not self.num or not other.num:
            return Fraction(self.num * 0, self.den ** 0, reduce=False)
        g1, g2 = self.num.gcd(other.den), other.num.gcd(self.den)
        num = (self.num / g1) * (other.num / g2)
        den = (self.den / g2) * (other.den / g1)
        lc = den.leading_coefficient()
        return Fraction(num / lc, den / lc, reduce=False)

    def inverse(self) -> "Fraction":
        if not self.num:
            raise ZeroDivisionError("division by zero in the fraction field")
        lc = self.num.leading_coefficient()
        return Fraction(self.den / lc, self.num / lc, reduce=False)

    def __truediv__(self, other: "Fraction") -> "Fraction":
        return self * other.inverse()

    def __eq__(self, other) -> bool:
        return isinstance(other, Fraction) and self.num == other.num and self.den == other.den

    def __hash__(self):
        return hash((str(self.num), str(self.den)))

    def size(self) -> int:
        """Number of terms, used to prefer small pivots."""
        return len(self.num) + len(self.den)


@dataclass(frozen=True)
class Field:
    """The field QQ(generators) with the map between atoms and generators."""

    atoms: tuple[sp.Expr, ...]
    context: object

    @classmethod
    def for_exprs(cls, exprs: Iterable[sp.Expr], extra: Sequence[sp.Symbol] = ()) -> "Field":
        """The field that holds all given expressions, plus extra symbols as generators."""
        exprs = list(exprs)
        atoms = list(dict.fromkeys([*extra, *rational_atoms(exprs)]))
        names = tuple(f"g{i}" for i in range(max(1, len(atoms))))
        ctx = flint.fmpq_mpoly_ctx.get(names, "degrevlex")
        return cls(tuple(atoms), ctx)

    @property
    def zero(self) -> Fraction:
        return Fraction(self.context.from_dict({}), self.context.constant(1), reduce=False)

    @property
    def one(self) -> Fraction:
        return Fraction(self.context.constant(1), self.context.constant(1), reduce=False)

    @property
    def _stand_ins(self) -> tuple[sp.Symbol, ...]:
        return tuple(a if a.is_Symbol else sp.Dummy(f"atom{i}") for i, a in enumerate(self.atoms))

    def _poly(self, expr: sp.Expr, gens):
        poly = sp.Poly(expr, *gens) if gens else sp.Poly(expr, sp.Dummy())
        nvars = self.context.nvars()
        terms = {}
        for monom, coeff in poly.terms():
            monom = tuple(monom) + (0,) * (nvars - len(monom))
            terms[monom] = flint.fmpq(int(sp.numer(coeff)), int(sp.denom(coeff)))
        return self.context.from_dict(terms)

    def element(self, expr: sp.Expr) -> Fraction:
        """Convert a rational expression in the atoms into a field element."""
        gens = self._stand_ins
        expr = sp.sympify(expr, strict=True).xreplace({a: g for a, g in zip(self.atoms, gens) if a is not g})
        num, den = sp.fraction(sp.together(expr))  # FLINT cancels the common factors
        return Fraction(self._poly(sp.expand(num), gens), self._poly(sp.expand(den), gens))

    def poly_to_expr(self, poly) -> sp.Expr:
        terms = {m: QQ(int(c.p), int(c.q)) for m, c in poly.to_dict().items()}
        if not self.atoms:
            return sp.Rational(terms.get((0,), QQ(0)))
        return _ring(self.atoms).from_dict(terms).as_expr()

    def to_expr(self, element: Fraction) -> sp.Expr:
        """Convert back to a sympy expression with the atoms restored."""
        return self.poly_to_expr(element.num) / self.poly_to_expr(element.den)

    def numer_denom(self, element: Fraction) -> tuple[sp.Expr, sp.Expr]:
        """Numerator and denominator (as expressions) of a field element."""
        return self.poly_to_expr(element.num), self.poly_to_expr(element.den)

    def factors(self, element: Fraction) -> list[sp.Expr]:
        """The irreducible non-constant factors of numerator and denominator."""
        out = []
        for poly in (element.num, element.den):
            _, facs = poly.factor()
            out.extend(self.poly_to_expr(f) for f, _ in facs if not f.is_constant())
        return out

    def factored(self, element: Fraction) -> sp.Expr:
        """A readable form: factored numerator over factored denominator."""
        parts = []
        for poly in (element.num, element.den):
            const, facs = poly.factor()
            expr = sp.Rational(int(const.p), int(const.q))
            parts.append(expr * sp.Mul(*[self.poly_to_expr(f) ** e for f, e in facs]))
        return parts[0] / parts[1]

    def matrix(self, mat: sp.MatrixBase) -> list[list[Fraction]]:
        return [[self.element(e) for e in mat.row(i)] for i in range(mat.rows)]

    def to_matrix(self, rows: list[list[Fraction]]) -> sp.Matrix:
        return sp.Matrix([[self.to_expr(e) for e in row] for row in rows])


def matvec(rows: list[list[Fraction]], vec: list[Fraction], field: Field) -> list[Fraction]:
    """Matrix times column vector, skipping zeros."""
    out = []
    for row in rows:
        acc = field.zero
        for a, b in zip(row, vec):
            if a and b:
                acc = acc + a * b
        out.append(acc)
    return out


def charpoly(rows: list[list[Fraction]], field: Field) -> list[Fraction]:
    """Coefficients [1, a_1, ..., a_n] of det(sI - A), by the Faddeev-LeVerrier recursion.

    M_k = A M_(k-1) + a_(k-1) I,  a_k = -trace(A M_k) / k  (exact over the field).
    """
    n = len(rows)
    coeffs = [field.one]
    M = [[field.zero] * n for _ in range(n)]
    for k in range(1, n + 1):
        for i in range(n):  # M <- M + a_(k-1) I
            M[i][i] = M[i][i] + coeffs[-1]
        cols = [matvec(rows, [M[i][j] for i in range(n)], field) for j in range(n)]
        M = [[cols[j][i] for j in range(n)] for i in range(n)]  # M <- A M
        trace = field.zero
        for i in range(n):
            trace = trace + M[i][i]
        coeffs.append(-(trace * field.element(sp.Rational(1, k))))
    return coeffs


@dataclass
class SparseLU:
    """Gaussian elimination of a square matrix over a field with sparse pivoting.

    Pivots are chosen by the Markowitz count, ties broken by the size of the
    pivot, so that structured plants (chains, cascades) stay small throughout.
    ``det`` is the determinant (zero when singular); ``solve`` reuses the
    elimination for any right-hand side.

    >>> x = sp.Symbol("x")
    >>> F = Field.for_exprs([x])
    >>> lu = SparseLU.factor(F.matrix(sp.Matrix([[0, 2], [x, 1]])), F)
    >>> F.to_expr(lu.det)
    -2*x
    >>> [F.to_expr(v) for v in lu.solve([F.element(2), F.element(x + 1)])]
    [1, 1]
    """

    field: Field
    n: int
    steps: list  # (pivot_row, pivot_col, pivot, {row: factor})
    rows: dict  # row -> {col: value} (upper part after elimination)
    det: Fraction

    @classmethod
    def factor(cls, matrix: list[list[Fraction]], field: Field, limit: int | None = None) -> "SparseLU":
        """Eliminate; :class:`TooLarge` when an entry exceeds ``limit`` terms (no limit: None)."""
        n = len(matrix)
        rows = {i: {j: v for j, v in enumerate(r) if v} for i, r in enumerate(matrix)}
        active_rows, active_cols = set(range(n)), set(range(n))
        steps, det = [], field.one
        for _ in range(n):
            col_count: dict[int, int] = {}
            for i in active_rows:
                for j in rows[i]:
                    if j in active_cols:
                        col_count[j] = col_count.get(j, 0) + 1
            best = None
            for i in sorted(active_rows):
                rlen = sum(1 for j in rows[i] if j in active_cols)
                for j, v in sorted(rows[i].items()):
                    if j in active_cols:
                        key = ((rlen - 1) * (col_count[j] - 1), v.size())
                        if best is None or key < best[0]:
                            best = (key, i, j)
            if best is None:
                return cls(field, n, steps, rows, field.zero)
            _, pi, pj = best
            pivot = rows[pi][pj]
            det = det * pivot
            factors = {}
            for i in sorted(active_rows):
                if i == pi or pj not in rows[i]:
                    continue
                f = rows[i][pj] / pivot
                factors[i] = f
                target = rows[i]
                for j, v in rows[pi].items():
                    if j not in active_cols:
                        continue
                    new = check_size(target.get(j, field.zero) - f * v, limit)
                    if new:
                        target[j] = new
                    else:
                        target.pop(j, None)
            steps.append((pi, pj, pivot, factors))
            active_rows.discard(pi)
            active_cols.discard(pj)
        return cls(field, n, steps, rows, det if _permutation_sign(steps, n) > 0 else -det)

    def solve(self, rhs: list[Fraction], limit: int | None = None) -> list[Fraction]:
        """x with matrix * x = rhs (rhs and x as lists of field elements); ``limit`` as in factor."""
        if not self.det:
            raise ZeroDivisionError("singular matrix")
        b = list(rhs)
        for pi, _, _, factors in self.steps:
            for i, f in factors.items():
                if b[pi]:
                    b[i] = check_size(b[i] - f * b[pi], limit)
        x = [self.field.zero] * self.n
        for pi, pj, pivot, _ in reversed(self.steps):
            acc = b[pi]
            for j, v in self.rows[pi].items():
                if j != pj and x[j]:
                    acc = acc - v * x[j]
            x[pj] = check_size(acc / pivot, limit)
        return x


def _permutation_sign(steps, n: int) -> int:
    """Sign of the permutation that sends each pivot row to its pivot column."""
    perm = list(range(n))
    for pi, pj, _, _ in steps:
        perm[pi] = pj
    sign, seen = 1, [False] * n
    for start in range(n):
        length, k = 0, start
        while not seen[k]:
            seen[k] = True
            k = perm[k]
            length += 1
        if length and length % 2 == 0:
            sign = -sign
    return sign
