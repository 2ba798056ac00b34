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


def _flint_derivatives(part, parameters) -> dict | None:
    """dK/dp from the numerator and denominator of each gain in FLINT; None when an atom
    such as sqrt(k/m) depends on a parameter (then the caller differentiates with sympy)."""
    from ..design.algebra import Field, Fraction

    symbols = [p.symbol for p in parameters]
    field = Field.for_exprs(list(part.gain), extra=symbols)
    if any(not a.is_Symbol and a.free_symbols & set(symbols) for a in field.atoms):
        return None
    out = {}
    for i in range(part.gain.rows):
        for j in range(part.gain.cols):
            value = field.element(part.gain[i, j])
            for p in parameters:
                k = field.atoms.index(p.symbol)
                num = value.num.derivative(k) * value.den - value.num * value.den.derivative(k)
                d = Fraction(num, value.den * value.den) if not num.is_zero() else field.zero
                out[(i, j, p.name)] = field.factored(d) if d else sp.Integer(0)
    return out


def sensitivity_table(design: Design, with_definitions: bool = False):
    """part -> {(row, col, parameter name): dK[row, col]/dparameter} (zero entries included).

    Expanded gains are differentiated exactly in FLINT (numerator and denominator);
    a compact form by forward differentiation along its definitions
    (:func:`symgain.design.compact.forward_derivatives`), which adds definitions
    ``d_<name>_<parameter>``. With ``with_definitions`` the result is
    ``(table, {part: added definitions})``.
    """
    from ..design.compact import forward_derivatives

    out, added = {}, {}
    params = design.model.parameters
    for part in design.parts():
        if part.definitions:
            entries, new = {}, []
            avoid = {str(s) for s in design.model.symbols.values()}
            for p in params:
                defs, derivs = forward_derivatives(part.definitions, list(part.gain), p.symbol, avoid)
                new.extend(defs)
                avoid |= {str(s) for s, _ in defs}
                for k, d in enumerate(derivs):
                    entries[(k // part.gain.cols, k % part.gain.cols, p.name)] = d
            out[part.part], added[part.part] = entries, tuple(new)
            continue
        entries = _flint_derivatives(part, params)
        if entries is None:
            entries = {(i, j, p.name): _tidy(sp.diff(part.gain[i, j], p.symbol))
                       for p in params for i in range(part.gain.rows) for j in range(part.gain.cols)}
        out[part.part], added[part.part] = entries, ()
    return (out, added) if with_definitions else out


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
    from ..design.compact import numeric_function

    values = values or design.model.nominal_values()
    subs = {p.symbol: values[p.name] for p in design.model.parameters}
    if table is None or any(p.definitions for p in design.parts()):
        table, added = sensitivity_table(design, with_definitions=True)
    out = {}
    for part in design.parts():
        if part.definitions:  # compact form: evaluate the definitions in order, numerically
            keys = list(table[part.part])
            args = [p.symbol for p in design.model.parameters]
            f = numeric_function(args, [*part.gain, *[table[part.part][k] for k in keys]],
                                 (*part.definitions, *added[part.part]), modules="math")
            numbers = f(*[subs[a] for a in args])
            gains, derivs = numbers[:len(part.gain)], numbers[len(part.gain):]
            out[part.part] = {(i, j, name): float(values[name] * d / gains[i * part.gain.cols + j])
                              if gains[i * part.gain.cols + j] != 0 else float("nan")
                              for (i, j, name), d in zip(keys, derivs)}
            continue
        rel = {}
        for (i, j, name), deriv in table[part.part].items():
            k = complex(sp.sympify(part.gain[i, j].xreplace(subs)).evalf()).real
            d = complex(sp.sympify(deriv.xreplace(subs)).evalf()).real
            rel[(i, j, name)] = float(values[name] * d / k) if k != 0 else float("nan")
        out[part.part] = rel
    return out
