"""The sampled plant: Phi and Gamma of x[k+1] = Phi x[k] + Gamma u[k] in closed form.

Exact zero-order hold (ZOH): with u held constant over each period T,

    Phi = exp(A T),    Gamma = integral_0^T exp(A tau) dtau B,

both read off one exponential of the augmented matrix M = [[A, B], [0, 0]]:
exp(M T) = [[Phi, Gamma], [0, I]] (common practice; Van Loan's block form).
The exponential is computed in closed form by Hermite interpolation of
f(lambda) = exp(lambda T) on the eigenvalues of M, in Newton form

    exp(M T) = sum_k f[l_1 .. l_(k+1)] (M - l_1 I) ... (M - l_k I),

with divided differences f[...] (a repeated eigenvalue uses the derivative
T^j exp(l T) / j!). This needs the eigenvalues of A in closed form: the
characteristic polynomial is factored and only factors of degree one or two
are solved (the work is capped there). Otherwise the discretization is
refused with a message that offers the series ``method = "series"``: the
Taylor series of exp(M T) to a stated order, whose truncation error the
check measures against scipy.

Forward Euler: Phi = I + A T, Gamma = B T. Tustin (bilinear): Phi =
(I - A T/2)^-1 (I + A T/2), Gamma = (I - A T/2)^-1 B T, the ``ad, bd`` of
``scipy.signal.cont2discrete(..., method="bilinear")``.

>>> import sympy as sp
>>> T = sp.Symbol("T", positive=True)
>>> plant = sampled_plant(sp.Matrix([[0, 1], [0, 0]]), sp.Matrix([[0], [1]]), T)
>>> plant.Phi, plant.Gamma
(Matrix([
[1, T],
[0, 1]]), Matrix([
[T**2/2],
[     T]]))
>>> w = sp.Symbol("w", positive=True)
>>> sampled_plant(sp.Matrix([[0, 1], [-w**2, 0]]), sp.Matrix([[0], [1]]), T).Phi
Matrix([
[   cos(T*w), sin(T*w)/w],
[-w*sin(T*w),   cos(T*w)]])
"""
from __future__ import annotations

from dataclasses import dataclass

import sympy as sp

from ..errors import DesignError
from ..model.sampling_keys import METHODS
from .validity import nonzero_conditions

__all__ = ["SampledPlant", "sampled_plant", "exp_times", "METHODS", "SERIES_ORDER"]

SERIES_ORDER = 8  # terms of the Taylor series of exp(M T) kept by method "series"
MAX_ORDER = 8  # states + inputs above which the closed-form exponential is not tried


@dataclass(frozen=True)
class SampledPlant:
    """Phi, Gamma (and how they were made) for one sample period T."""

    Phi: sp.ImmutableMatrix
    Gamma: sp.ImmutableMatrix
    period: sp.Expr
    method: str
    eigenvalues: tuple[sp.Expr, ...] = ()  # of A, with repetition (ZOH only)
    notes: tuple[str, ...] = ()
    valid_when: tuple[sp.Basic, ...] = ()  # eigenvalues counted distinct must stay distinct


def _eigenvalues(A: sp.Matrix, where=None) -> list[sp.Expr]:
    """Eigenvalues of A with repetition, from factors of degree 1 or 2 of det(lambda I - A)."""
    char = A.charpoly()
    lam, poly = char.gen, char.as_expr()
    _, factors = sp.factor_list(sp.fraction(sp.together(poly))[0])
    out = []
    for factor, mult in factors:
        if not factor.has(lam):
            continue
        deg = sp.degree(factor, lam)
        if deg > 2:
            raise DesignError(
                f"exact zero-order hold needs the eigenvalues of A in closed form, but det(lambda I - A) has an "
                f"irreducible factor of degree {deg}; give method = \"series\" (Taylor series of exp(A T) to "
                f"order {SERIES_ORDER}, truncation error measured by check) or a numeric plant", where=where)
        roots = sp.roots(sp.Poly(factor, lam))
        if sum(roots.values()) != deg:  # pragma: no cover - degree <= 2 always solves
            raise DesignError("the eigenvalues of A have no closed form", where=where)
        for r, k in roots.items():
            out += [sp.simplify(r)] * (k * mult)
    return out


def _ordered(values: list[sp.Expr]) -> list[sp.Expr]:
    """Equal eigenvalues next to each other (so that divided differences are well defined)."""
    groups: list[list[sp.Expr]] = []
    for v in values:
        for g in groups:
            if sp.simplify(g[0] - v) == 0:
                g.append(g[0])
                break
        else:
            groups.append([v])
    return [v for g in groups for v in g]


def _divided_differences(points: list[sp.Expr], t: sp.Expr) -> list[sp.Expr]:
    """f[x_1], f[x_1, x_2], ... for f(x) = exp(x t), repeated points by derivatives."""
    n = len(points)
    table = [[sp.exp(x * t) for x in points]]  # table[j][i] = f[x_i .. x_(i+j)]
    for j in range(1, n):
        row = []
        for i in range(n - j):
            a, b = points[i], points[i + j]
            if a == b:  # grouped: every point between is the same one
                row.append(t**j * sp.exp(a * t) / sp.factorial(j))
            else:
                row.append(sp.cancel((table[j - 1][i + 1] - table[j - 1][i]) / (b - a)))
        table.append(row)
    return [table[j][0] for j in range(n)]


def _tidy(expr: sp.Expr) -> sp.Expr:
    """Complex exponentials as cos/sin, then a plain simplification."""
    if expr.has(sp.I):
        expr = sp.expand_complex(expr.rewrite(sp.cos))
    expr = sp.simplify(sp.powsimp(sp.expand(expr)))
    return sp.factor_terms(expr)


def exp_times(M: sp.Matrix, t: sp.Expr, eigenvalues: list[sp.Expr]) -> sp.Matrix:
    """exp(M t) in closed form from the eigenvalues of M (with repetition).

    >>> t = sp.Symbol("t", positive=True)
    >>> exp_times(sp.Matrix([[-1, 1], [0, -1]]), t, [-1, -1])
    Matrix([
    [exp(-t), t*exp(-t)],
    [      0,   exp(-t)]])
    """
    n = M.rows
    points = _ordered(list(eigenvalues))
    assert len(points) == n
    coeffs = _divided_differences(points, t)
    total = sp.zeros(n, n)
    product = sp.eye(n)
    for k in range(n):
        if coeffs[k] != 0:
            total += coeffs[k] * product
        if k < n - 1:
            product = product * (M - points[k] * sp.eye(n))
            if product.is_zero_matrix:
                break
    return total.applyfunc(_tidy)


def _series(M: sp.Matrix, t: sp.Expr, order: int) -> sp.Matrix:
    """sum_{k <= order} (M t)^k / k! (exact when M is nilpotent)."""
    total, term = sp.eye(M.rows), sp.eye(M.rows)
    for k in range(1, order + 1):
        term = term * M * t / k
        if term.is_zero_matrix:
            break
        total += term
    return total.applyfunc(sp.expand)


def sampled_plant(A: sp.Matrix, B: sp.Matrix, T: sp.Expr, method: str = "zoh", where=None) -> SampledPlant:
    """Phi, Gamma of the plant sampled at period T with the given method."""
    A, B = sp.Matrix(A), sp.Matrix(B)
    n, m = A.rows, B.cols
    if method == "euler":
        return SampledPlant(sp.ImmutableMatrix(sp.eye(n) + A * T), sp.ImmutableMatrix(B * T), T, method,
                            notes=("forward Euler: Phi = I + A T, Gamma = B T (an approximation, "
                                   "close to the exact hold only for T small against the plant's time constants)",))
    if method == "tustin":
        left = (sp.eye(n) - A * T / 2)
        inv = left.inv(method="LU")
        Phi = (inv * (sp.eye(n) + A * T / 2)).applyfunc(sp.factor)
        Gamma = (inv * B * T).applyfunc(sp.factor)
        return SampledPlant(sp.ImmutableMatrix(Phi), sp.ImmutableMatrix(Gamma), T, method,
                            notes=("Tustin (bilinear): Phi = (I - A T/2)^-1 (I + A T/2), "
                                   "Gamma = (I - A T/2)^-1 B T",))
    M = sp.Matrix.vstack(sp.Matrix.hstack(A, B), sp.zeros(m, n + m))
    nilpotent = (A**n).is_zero_matrix
    if method == "series" or nilpotent:
        E = _series(M, T, n + m if nilpotent else SERIES_ORDER)
        note = ("A is nilpotent: the series of exp(A T) ends, so Phi and Gamma are exact" if nilpotent else
                f"Taylor series of exp([[A, B], [0, 0]] T) to order {SERIES_ORDER} (truncated: "
                "check measures the error against scipy)")
        return SampledPlant(sp.ImmutableMatrix(E[:n, :n]), sp.ImmutableMatrix(E[:n, n:]), T,
                            "zoh" if nilpotent else "series", notes=(note,))
    if method != "zoh":
        raise DesignError(f"method {method!r} is not one of {', '.join(METHODS)}", where=where)
    if n + m > MAX_ORDER:
        raise DesignError(f"exact zero-order hold in closed form is tried up to {MAX_ORDER} states plus inputs "
                          f"(found {n + m}); give method = \"series\"", where=where)
    eig = _eigenvalues(A, where)
    E = exp_times(M, T, eig + [sp.Integer(0)] * m)
    notes = ("exact zero-order hold: [[Phi, Gamma], [0, I]] = exp([[A, B], [0, 0]] T)",)
    distinct = list(dict.fromkeys(_ordered(eig + [sp.Integer(0)] * m)))
    gaps = [sp.simplify(a - b) for i, a in enumerate(distinct) for b in distinct[i + 1:]]
    valid = nonzero_conditions([g for g in gaps if g.free_symbols])
    if valid:
        notes += ("the formulas treat eigenvalues as distinct that coincide for some parameter values "
                  "(see the conditions); there the limit holds",)
    return SampledPlant(sp.ImmutableMatrix(E[:n, :n]), sp.ImmutableMatrix(E[:n, n:]), T, "zoh",
                        tuple(eig), notes, valid)
