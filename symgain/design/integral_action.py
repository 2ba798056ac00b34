"""Integral action: augment the plant with q' = y - r and place n + p poles.

With q' = C x + D u - r and u = -K x - Ki q the augmented plant is

    [x; q]' = [[A, 0], [C, 0]] [x; q] + [[B], [D]] u,

and [K, Ki] is a feedback gain for it. The augmented plant is controllable
exactly when (A, B) is controllable and the matrix [[A, B], [C, D]] has full
row rank n + p, that is when the plant has no transmission zero at s = 0
(common practice; a zero at the origin would cancel the integrator). When
det [[A, B], [C, D]] vanishes for every parameter value the design stops
with an error that says so; its factors otherwise join the conditions.

>>> import sympy as sp
>>> from symgain.model import Model, Parameter, TargetSpec
>>> a = Parameter.declare("a", sign="positive", range=(1, 2))
>>> model = Model(name="tank", parameters=(a,), states=("h",), inputs=("u",), outputs=("h",),
...               A=sp.Matrix([[-a.symbol]]), B=sp.Matrix([[1]]), C=sp.Matrix([[1]]),
...               integral=TargetSpec("poles", {"poles": (-2, -3)}))
>>> part = design_integral(model, set(model.symbols))
>>> part.gain, part.extra["integral_gain"]
(Matrix([[5 - a]]), Matrix([[6]]))
"""
from __future__ import annotations

from dataclasses import replace

import sympy as sp

from ..errors import DesignError
from ..model import Model
from .validity import nonzero_conditions
from .result import Step
from .several_inputs import design_several_inputs, parameter_box
from .single_input import design_gain

__all__ = ["augmented_plant", "design_integral", "zero_at_origin_matrix"]


def augmented_plant(A: sp.Matrix, B: sp.Matrix, C: sp.Matrix, D: sp.Matrix | None = None):
    """(A_a, B_a) of the plant with one integrator per output.

    >>> Aa, Ba = augmented_plant(sp.Matrix([[0, 1], [0, 0]]), sp.Matrix([[0], [1]]), sp.Matrix([[1, 0]]))
    >>> Aa
    Matrix([
    [0, 1, 0],
    [0, 0, 0],
    [1, 0, 0]])
    """
    n, m, p = A.rows, B.cols, C.rows
    D = sp.zeros(p, m) if D is None else sp.Matrix(D)
    Aa = sp.Matrix.vstack(sp.Matrix.hstack(A, sp.zeros(n, p)), sp.Matrix.hstack(C, sp.zeros(p, p)))
    Ba = sp.Matrix.vstack(B, D)
    return Aa, Ba


def zero_at_origin_matrix(A, B, C, D=None) -> sp.Matrix:
    """[[A, B], [C, D]]: singular (square case) exactly when the plant has a zero at s = 0."""
    D = sp.zeros(C.rows, B.cols) if D is None else sp.Matrix(D)
    return sp.Matrix.vstack(sp.Matrix.hstack(A, B), sp.Matrix.hstack(C, D))


def _generic_rank(M: sp.Matrix) -> int:
    free = sorted(M.free_symbols, key=str)
    best = 0
    for trial in range(3):
        point = {x: sp.Rational(11 + 3 * k + 7 * trial, 3 + 2 * k + trial) for k, x in enumerate(free)}
        try:
            best = max(best, M.xreplace(point).rank())
        except (ZeroDivisionError, TypeError):
            continue
    return best


def design_integral(model: Model, avoid: set[str], form: str = "auto", nominal: dict | None = None):
    """The integral part: gain = K (inputs x states), extra["integral_gain"] = Ki (inputs x outputs)."""
    spec = model.integral
    if model.C is None or model.n_outputs == 0:
        raise DesignError("integral action integrates the outputs, but the plant has no outputs; "
                          "give [plant] outputs = [...]", where=spec.where)
    A, B, C = sp.Matrix(model.A), sp.Matrix(model.B), sp.Matrix(model.C)
    D = None if model.D is None else sp.Matrix(model.D)
    n, m, p = A.rows, B.cols, C.rows
    if p > m:
        raise DesignError(f"integral action on {p} outputs needs at least {p} inputs, the plant has {m}: "
                          "the augmented plant cannot be controllable", where=spec.where)
    Z = zero_at_origin_matrix(A, B, C, D)
    if p == m:
        zdet = sp.factor(Z.det(method="berkowitz"))
        if zdet == 0:
            raise DesignError("the plant has a transmission zero at s = 0 (det [[A, B], [C, D]] = 0 for every "
                              "parameter value): it would cancel the integrator, so the augmented plant is not "
                              "controllable", where=spec.where)
        zconds = nonzero_conditions([zdet])
    else:
        zdet = None
        if _generic_rank(Z) < n + p:
            raise DesignError("the plant has a transmission zero at s = 0 ([[A, B], [C, D]] has rank below "
                              f"n + p = {n + p}): the augmented plant is not controllable", where=spec.where)
        zconds = ()
    Aa, Ba = augmented_plant(A, B, C, D)
    states = (*model.states, *(f"q_{y}" for y in model.outputs))
    if m == 1:
        full = design_gain(Aa, Ba, spec, part="integral", symbol="K", states=states, avoid=avoid, form=form, nominal=nominal)
    else:
        full = design_several_inputs(Aa, Ba, spec, part="integral", symbol="K", states=states,
                                     inputs=model.inputs, avoid=avoid, symbols=model.symbols, ranges=parameter_box(model),
                                     pattern_shape=((m, "inputs"), (n + p, "augmented states")))
    gain = sp.Matrix(full.gain)
    K, Ki = gain[:, :n], gain[:, n:]
    valid = tuple(dict.fromkeys((*full.valid_when, *zconds)))
    steps = [Step("augmented_plant", "augmented plant: A_a = [[A, 0], [C, 0]], B_a = [[B], [D]] (q' = y - r)",
                  (sp.ImmutableMatrix(Aa), sp.ImmutableMatrix(Ba)))]
    if zdet is not None:
        steps.append(Step("zero_at_origin_determinant",
                          "det [[A, B], [C, D]] (zero exactly when the plant has a zero at s = 0)", zdet))
    for st in full.steps:
        if st.name == "valid_when":
            steps.append(Step("valid_when", st.title, valid))
        elif st.name == "solution":
            steps.append(Step("solution", "augmented gain [K, Ki]", st.value))
        else:
            steps.append(st)
    note = "control law u = -K x - Ki q with q' = y - r (one integrator per output)"
    branches = tuple(replace(b, gain=sp.ImmutableMatrix(sp.Matrix(b.gain)[:, :n]),
                             valid_when=tuple(dict.fromkeys((*b.valid_when, *zconds))),
                             extra={"integral_gain": sp.ImmutableMatrix(sp.Matrix(b.gain)[:, n:])})
                     for b in full.branches)
    return replace(full, gain=sp.ImmutableMatrix(K), valid_when=valid, steps=tuple(steps),
                   notes=(note, *full.notes), branches=branches,
                   extra={**full.extra, "integral_gain": sp.ImmutableMatrix(Ki)})
