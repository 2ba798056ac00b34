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

__all__ = ["gain_matrices", "sensitivity_table", "relative_sensitivities", "sensitivity_matrices",
           "small_expression"]


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


def _part_matrices(part) -> list[tuple[str, sp.Matrix]]:
    """(key, matrix) of one part: its gain under the part's name, extras (Ki) under their key."""
    out = [(part.part, part.gain)]
    out += [(key, value) for key, value in part.extra.items()
            if key != "gain_symbols" and isinstance(value, sp.MatrixBase)]
    return out


def gain_matrices(design: Design) -> dict[str, sp.Matrix]:
    """Every designed matrix: the part's gain under the part's name, extras (Ki) under their key.

    >>> from symgain.model import Model, Parameter, TargetSpec
    >>> from symgain.design import derive
    >>> a = Parameter.declare("a", sign="positive", range=(1, 2))
    >>> model = Model(name="tank", parameters=(a,), states=("h",), inputs=("u",), outputs=("h",),
    ...               A=sp.Matrix([[-a.symbol]]), B=sp.Matrix([[1]]), C=sp.Matrix([[1]]),
    ...               integral=TargetSpec("poles", {"poles": (-2, -3)}))
    >>> list(gain_matrices(derive(model)))
    ['integral', 'integral_gain']
    """
    return {key: mat for part in design.parts() for key, mat in _part_matrices(part)}


def _flint_derivatives(matrix, parameters) -> dict | None:
    """dK/dp from the numerator and denominator of each gain in FLINT; None when an atom
    such as sqrt(k/m) depends on a parameter (then the caller differentiates with sympy)."""
    from ..design.algebra import Field, Fraction

    symbols = [p.symbol for p in parameters]
    try:
        field = Field.for_exprs(list(matrix), extra=symbols)
    except (TypeError, ValueError):  # free gains or atoms FLINT does not take: sympy differentiates
        return None
    if any(not a.is_Symbol and a.free_symbols & set(symbols) for a in field.atoms):
        return None
    out = {}
    for i in range(matrix.rows):
        for j in range(matrix.cols):
            value = field.element(matrix[i, j])
            for p in parameters:
                k = field.atoms.index(p.symbol)
                num = value.num.derivative(k) * value.den - value.num * value.den.derivative(k)
                d = Fraction(num, value.den * value.den) if not num.is_zero() else field.zero
                out[(i, j, p.name)] = field.factored(d) if d else sp.Integer(0)
    return out


def sensitivity_table(design: Design, with_definitions: bool = False):
    """matrix key -> {(row, col, parameter name): dK[row, col]/dparameter} (zero entries included).

    The keys are those of :func:`gain_matrices` (a part's name, or an extra such as
    ``integral_gain`` for Ki). Expanded gains are differentiated exactly in FLINT
    (numerator and denominator); a compact form by forward differentiation along its
    definitions (:func:`symgain.design.compact.forward_derivatives`), which adds
    definitions ``d_<name>_<parameter>``. With ``with_definitions`` the result is
    ``(table, {key: added definitions})``.
    """
    from ..design.compact import forward_derivatives

    out, added = {}, {}
    params = design.model.parameters
    avoid = {str(s) for s in design.model.symbols.values()}
    for part in design.parts():
        for key, mat in _part_matrices(part):
            if part.definitions:
                entries, new = {}, []
                for p in params:
                    defs, derivs = forward_derivatives(part.definitions, list(mat), p.symbol, avoid)
                    new.extend(defs)
                    avoid |= {str(s) for s, _ in defs}
                    for k, d in enumerate(derivs):
                        entries[(k // mat.cols, k % mat.cols, p.name)] = d
                out[key], added[key] = entries, tuple(new)
                continue
            entries = _flint_derivatives(mat, params)
            if entries is None:
                entries = {(i, j, p.name): _tidy(sp.diff(mat[i, j], p.symbol))
                           for p in params for i in range(mat.rows) for j in range(mat.cols)}
            out[key], added[key] = entries, ()
    return (out, added) if with_definitions else out


def sensitivity_matrices(design: Design) -> dict[str, dict[str, sp.Matrix]]:
    """matrix key -> parameter name -> matrix of dK/dp (same shape as the gain)."""
    table = sensitivity_table(design)
    out = {}
    for key, mat in gain_matrices(design).items():
        out[key] = {p.name: sp.Matrix(mat.rows, mat.cols, lambda i, j, _n=p.name, _k=key: table[_k][(i, j, _n)])
                    for p in design.model.parameters}
    return out


def relative_sensitivities(design: Design, values: dict[str, float] | None = None,
                           table=None) -> dict[str, dict[tuple[int, int, str], float]]:
    """(p / K) dK/dp at ``values`` (nominal by default); NaN where the gain is zero or not a number."""
    from ..design.compact import numeric_function

    values = values or design.model.nominal_values()
    subs = {p.symbol: sp.Float(values[p.name], 40) for p in design.model.parameters if p.name in values}
    added = {}
    if table is None or any(p.definitions for p in design.parts()):
        table, added = sensitivity_table(design, with_definitions=True)

    def number(expr) -> float:
        try:
            return complex(sp.sympify(expr).xreplace(subs).evalf()).real
        except TypeError:  # a free gain or a parameter without a nominal value
            return float("nan")

    def ratio(name, d, k) -> float:
        return float(values[name] * d / k) if k != 0 and name in values and np.isfinite(k) else float("nan")

    out = {}
    for part in design.parts():
        for key, mat in _part_matrices(part):
            if part.definitions:  # compact form: evaluate the definitions in order, numerically
                keys = list(table[key])
                args = [p.symbol for p in design.model.parameters]
                f = numeric_function(args, [*mat, *[table[key][k] for k in keys]],
                                     (*part.definitions, *added.get(key, ())), modules="math")
                numbers = f(*[float(subs[a]) for a in args])
                gains, derivs = numbers[:len(mat)], numbers[len(mat):]
                out[key] = {(i, j, name): ratio(name, d, gains[i * mat.cols + j])
                            for (i, j, name), d in zip(keys, derivs)}
                continue
            out[key] = {(i, j, name): ratio(name, number(deriv), number(mat[i, j]))
                        for (i, j, name), deriv in table[key].items()}
    return out
