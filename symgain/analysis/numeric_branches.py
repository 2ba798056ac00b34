"""The numeric check of a structured gain that has no closed form (exit code 4).

When the coefficient equations of a ``pattern`` cannot be solved in closed
form (:class:`~symgain.errors.ClosedFormLimitation`), ``symgain check`` still
answers the engineer's question "does a real gain of this pattern reach the
target here?" at the sampled parameter points. At each point the parameters
are rounded to nearby rationals, the equations are formed exactly over the
rationals, a lexicographic Groebner basis makes them triangular, and the
unknowns are found from the last one back by numeric roots of the
univariate polynomials (numpy), each candidate kept only when every basis
polynomial nearly vanishes. Each real gain found is then checked
independently: the characteristic polynomial of the numeric A - B K
(np.poly) against the target's.

>>> import sympy as sp
>>> from symgain.model import S
>>> gains = numeric_structured_gains(sp.zeros(2, 2), sp.eye(2), [[None, 0], [0, None]],
...                                  sp.expand((S + 1) * (S + 2)))
>>> sorted(round(float(g[0, 0]), 9) for g in gains)
[1.0, 2.0]
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import sympy as sp

from ..model import S, Model

__all__ = ["numeric_structured_gains", "NumericPoint", "check_without_closed_form"]


def _univariate(terms, idx, sol, nvars):
    """Coefficients (highest first) in unknown idx of a polynomial given as {monomial: coefficient}."""
    coeffs: dict[int, complex] = {}
    for mono, c in terms.items():
        v = complex(c)
        for j in range(idx + 1, nvars):
            if mono[j]:
                v *= sol[j] ** mono[j]
        coeffs[mono[idx]] = coeffs.get(mono[idx], 0) + v
    top = max(coeffs)
    return np.array([coeffs.get(k, 0) for k in range(top, -1, -1)])


def _back_substitute(basis, unknowns, tol=1e-7):
    nvars = len(unknowns)
    polys = [sp.Poly(g, *unknowns) for g in basis]
    terms = [{mono: float(c) for mono, c in p.terms()} for p in polys]
    lead = [max((j for mono in p.monoms() for j in range(nvars) if mono[j]), default=-1) for p in polys]
    first = [min((j for mono in p.monoms() for j in range(nvars) if mono[j]), default=nvars) for p in polys]
    sols = [{}]
    for idx in reversed(range(nvars)):
        mine = [k for k in range(len(polys)) if first[k] == idx]  # polynomials in x_idx and later ones only
        new = []
        for sol in sols:
            cands = [_univariate(terms[k], idx, sol, nvars) for k in mine]
            cands = [np.trim_zeros(c, "f") for c in cands]
            cands = [c for c in cands if len(c) > 1 and np.max(np.abs(c[1:]) > 0)]
            if not cands:
                return []  # x_idx is not fixed: not zero-dimensional
            lowest = min(cands, key=len)
            for r in np.roots(lowest):
                ok = all(abs(np.polyval(c, r)) <= tol * (1 + np.max(np.abs(c))) * (1 + abs(r)) ** (len(c) - 1)
                         for c in cands)
                if ok:
                    new.append({**sol, idx: complex(r)})
        sols = new
    return [{unknowns[j]: v for j, v in sol.items()} for sol in sols]


def numeric_structured_gains(A: sp.Matrix, B: sp.Matrix, pattern, target: sp.Expr) -> list[np.ndarray]:
    """Every real gain of the pattern (``None`` = free) with det(sI - A + B K) = target; exact rational A, B."""
    n, m = A.rows, B.cols
    names = sp.Matrix(m, n, lambda i, j: sp.Symbol(f"u_{i}_{j}"))
    K = sp.Matrix(m, n, lambda i, j: names[i, j] if pattern[i][j] is None else pattern[i][j])
    unknowns = [names[i, j] for i in range(m) for j in range(n) if pattern[i][j] is None]
    closed = sp.Poly(sp.expand((A - B * K).charpoly(S).as_expr()), S).all_coeffs()[1:]
    want = sp.Poly(target, S).all_coeffs()[1:]
    eqs = [e for e in (sp.expand(g - h) for g, h in zip(closed, want)) if e != 0]
    basis = sp.groebner(eqs, *unknowns, order="lex")
    if list(basis.exprs) == [1]:
        return []
    out = []
    for sol in _back_substitute(list(basis.exprs), unknowns):
        vals = np.array([sol[u] for u in unknowns])
        if np.max(np.abs(vals.imag), initial=0) > 1e-7 * (1 + np.max(np.abs(vals))):
            continue
        num = np.array(K.xreplace({u: sp.Float(sol[u].real) for u in unknowns}).evalf(), dtype=float)
        if not any(np.allclose(num, g, rtol=1e-9, atol=1e-12) for g in out):
            out.append(num)
    return out


@dataclass(frozen=True)
class NumericPoint:
    index: int
    values: dict
    gains: int  # real gains of the pattern found at this point
    worst_error: float | None  # largest closed-loop coefficient error over those gains


def _plant_for(model: Model, part: str):
    """(A, B, pattern rows x cols as the gain K of A - B K, target spec) of a part, on its dual if needed."""
    from ..design.integral_action import augmented_plant
    from ..design.several_inputs import parse_pattern

    spec = getattr(model, part)
    A, B = sp.Matrix(model.A), sp.Matrix(model.B)
    if part == "estimator":
        A, B = A.T, sp.Matrix(model.C).T
    elif part == "integral":
        A, B = augmented_plant(A, B, sp.Matrix(model.C), None if model.D is None else sp.Matrix(model.D))
    raw = spec.values["pattern"]
    rows = len(raw)
    cols = len(raw[0]) if rows else 0
    pattern = parse_pattern(raw, (rows, cols), model.symbols, spec.where.child("pattern"), "rows", "columns")
    if part == "estimator":
        pattern = [list(r) for r in zip(*pattern)]
    return A, B, pattern, spec


def check_without_closed_form(model: Model, part: str, n_points: int = 20, seed: int = 0,
                              tolerance: float = 1e-6) -> list[NumericPoint]:
    """At sampled points: the real gains of the part's pattern, found numerically, and their error."""
    from .check import sample_points
    from ..design.targets import resolve_target

    A, B, pattern, spec = _plant_for(model, part)
    target = resolve_target(spec, A.rows).polynomial
    out = []
    for idx, point in enumerate(sample_points(model, n_points, seed)):
        exact = {p.symbol: sp.Rational(point[p.name]).limit_denominator(10**6) for p in model.parameters}
        An, Bn = A.xreplace(exact), B.xreplace(exact)
        pat = [[None if e is None else sp.nsimplify(sp.sympify(e).xreplace(exact)) for e in row] for row in pattern]
        tgt = sp.expand(target.xreplace(exact))
        if any(not sp.sympify(c).is_Rational for c in [*An, *Bn, *sp.Poly(tgt, S).all_coeffs()]):
            out.append(NumericPoint(idx, point, 0, None))
            continue
        gains = numeric_structured_gains(An, Bn, pat, tgt)
        want = np.array([float(c) for c in sp.Poly(tgt, S).all_coeffs()])
        errors = []
        for K in gains:
            got = np.poly(np.array(An, dtype=float) - np.array(Bn, dtype=float) @ K)
            errors.append(float(np.max(np.abs(got - want) / (1 + np.abs(want)))))
        out.append(NumericPoint(idx, point, len(gains), max(errors) if errors else None))
    return out
