"""Where do the gain formulas hold? Conditions on the parameters.

A factor can be dropped when the declared sign assumptions prove it nonzero
(sympy's assumption system decides that: a positive mass ``m``, a sum of
positive terms). What remains becomes a condition ``Ne(factor, 0)``.

>>> import sympy as sp
>>> m = sp.Symbol("m", positive=True); k = sp.Symbol("k", real=True)
>>> nonzero_conditions([m, k, m + 1, k - m])
(Ne(k, 0), Ne(k - m, 0))
"""
from __future__ import annotations

from typing import Iterable

import sympy as sp

from ..mathtext import condition_text

__all__ = ["nonzero_conditions", "provably_nonzero", "holds_at"]


def provably_nonzero(expr: sp.Expr) -> bool:
    """True when the sign assumptions of the symbols show ``expr`` cannot vanish."""
    if expr.is_number:
        return expr != 0
    return expr.is_zero is False


def _canonical(expr: sp.Expr) -> sp.Expr:
    """The factor with its sign and content normalised, so duplicates compare equal."""
    expr = sp.factor_terms(sp.expand(expr))
    _, expr = expr.as_content_primitive()
    if expr.could_extract_minus_sign():
        expr = -expr
    return expr


def nonzero_conditions(factors: Iterable[sp.Expr]) -> tuple[sp.Ne, ...]:
    """``Ne(f, 0)`` for each distinct factor that the assumptions cannot prove nonzero."""
    seen: dict[sp.Expr, None] = {}
    for f in factors:
        for part in sp.Mul.make_args(sp.factor(f) if len(sp.Add.make_args(f)) < 40 else f):
            base = part.base if part.is_Pow and part.exp.is_Integer else part
            if base.is_number or provably_nonzero(base):
                continue
            seen.setdefault(_canonical(base), None)
    return tuple(sp.Ne(f, 0) for f in seen)


def holds_at(conditions: Iterable[sp.Basic], values: dict[sp.Symbol, float], tol: float = 1e-9) -> list[str]:
    """The conditions that fail at a numeric point (empty when all hold).

    ``Ne(f, 0)`` fails when |f| <= tol * (1 + scale), with scale the largest
    magnitude of the terms of ``f`` there, so that round-off zeros count as zero.
    """
    failed = []
    values = {k: sp.Float(v, 40) for k, v in values.items()}
    for cond in conditions:
        if isinstance(cond, sp.Ne):
            f = cond.lhs - cond.rhs
            terms = [abs(complex(t.xreplace(values).evalf())) for t in sp.Add.make_args(sp.expand(f))]
            val = abs(complex(f.xreplace(values).evalf()))
            if val <= tol * max([1.0, *terms]):
                failed.append(condition_text(cond))
        else:
            if not bool(cond.xreplace(values)):
                failed.append(condition_text(cond))
    return failed
