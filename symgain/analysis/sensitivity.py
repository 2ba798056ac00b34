"""How strongly each gain depends on each parameter.

``sensitivity_table`` holds the partial derivatives dK_ij/dp in closed form;
``relative_sensitivities`` evaluates (p / K_ij) dK_ij/dp at a point (nominal by
default): the percent change of the gain per percent change of the parameter.

>>> import sympy as sp
>>> from symgain.model import Model, Parameter, TargetSpec
>>> from symgain.design import derive
>>> m = Parameter.declare("m", sign="positive", range=(1, 3))
>>> w = Parameter.declare("w", sign="positive", range=(1, 3), role="design")
>>> model = Model(name="cart", parameters=(m, w), states=("p", "v"), inputs=("F",),
...               A=sp.Matrix([[0, 1], [0, 0]]), B=sp.Matrix([[0], [1 / m.symbol]]),
...               feedback=TargetSpec("poles", {"poles": (-w.symbol, -w.symbol)}))
>>> table = sensitivity_table(derive(model))
>>> table["feedback"][(0, 0, "w")]
2*m*w
>>> relative_sensitivities(derive(model))["feedback"][(0, 0, "w")]
2.0
"""
from __future__ import annotations

import numpy as np
import sympy as sp

from ..design import Design

__all__ = ["sensitivity_table", "relative_sensitivities", "sensitivity_matrices", "small_expression"]


def small_expression(expr: sp.Expr, limit: int = 300) -> bool:
    """True when the expression tree has at most ``limit`` nodes (stops counting early)."""
    for count, _ in enumerate(sp.preorder_traversal(expr)):
        if count > limit:
            return False
    return True


def _tidy(expr: sp.Expr) -> sp.Expr:
    if expr == 0 or not small_expression(expr):
        return expr
    return sp.factor(sp.cancel(expr))


def sensitivity_table(design: Design) -> dict[str, dict[tuple[int, int, str], sp.Expr]]:
    """part -> {(row, col, parameter name): dK[row, col]/dparameter} (zero entries included)."""
    out = {}
    for part in design.parts():
        entries = {}
        for p in design.model.parameters:
            for i in range(part.gain.rows):
                for j in range(part.gain.cols):
                    entries[(i, j, p.name)] = _tidy(sp.diff(part.gain[i, j], p.symbol))
        out[part.part] = entries
    return out


def sensitivity_matrices(design: Design) -> dict[str, dict[str, sp.Matrix]]:
    """part -> parameter name -> matrix of dK/dp (same shape as the gain)."""
    table = sensitivity_table(design)
    out = {}
    for part in design.parts():
        out[part.part] = {p.name: sp.Matrix(part.gain.rows, part.gain.cols,
                                            lambda i, j, _n=p.name: table[part.part][(i, j, _n)])
                          for p in design.model.parameters}
    return out


def relative_sensitivities(design: Design, values: dict[str, float] | None = None,
                           table=None) -> dict[str, dict[tuple[int, int, str], float]]:
    """(p / K) dK/dp at ``values`` (nominal by default); NaN where the gain is zero."""
    values = values or design.model.nominal_values()
    subs = {p.symbol: values[p.name] for p in design.model.parameters}
    table = table or sensitivity_table(design)
    out = {}
    for part in design.parts():
        rel = {}
        for (i, j, name), deriv in table[part.part].items():
            k = complex(part.gain[i, j].xreplace(subs).evalf()).real
            d = complex(deriv.xreplace(subs).evalf()).real
            rel[(i, j, name)] = float(values[name] * d / k) if k != 0 else float("nan")
        out[part.part] = rel
    return out
