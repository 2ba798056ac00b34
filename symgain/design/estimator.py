"""Estimator gain L: the poles of A - L C, placed by duality on (A^T, C^T).

The estimator x̂' = A x̂ + B u + L (y - C x̂) has the error dynamics
e' = (A - L C) e. Since det(sI - A + L C) = det(sI - A^T + C^T L^T), placing
the poles of A^T - C^T L^T with the feedback machinery gives L^T. The
observability determinant's factors and L's denominators become the
conditions under which the formulas hold.

Separation property (common practice): with u = -K x̂, the closed loop of
plant, regulator and estimator in the coordinates (x, e = x - x̂) is block
triangular, [[A - B K, B K], [0, A - L C]], so its poles are the union of
both pole sets (:func:`separation_polynomial` builds that loop for tests).

>>> import sympy as sp
>>> from symgain.model import Model, Parameter, TargetSpec
>>> w0 = Parameter.declare("w0", sign="positive", range=(1, 2))
>>> model = Model(name="pendulum", parameters=(w0,), states=("theta", "omega"), inputs=("u",),
...               outputs=("theta",), A=sp.Matrix([[0, 1], [-w0.symbol**2, 0]]),
...               B=sp.Matrix([[0], [1]]), C=sp.Matrix([[1, 0]]),
...               estimator=TargetSpec("poles", {"poles": (-10 * w0.symbol, -10 * w0.symbol)}))
>>> design_estimator(model, set(model.symbols)).gain
Matrix([
[   20*w0],
[99*w0**2]])
"""
from __future__ import annotations

from dataclasses import replace

import sympy as sp

from ..errors import DesignError
from ..model import S, Model
from .result import Step
from .several_inputs import design_several_inputs, parameter_box
from .single_input import design_gain

__all__ = ["design_estimator", "separation_polynomial", "SEPARATION_NOTE"]

SEPARATION_NOTE = ("separation property: with u = -K x_hat the closed loop of plant, regulator and estimator "
                   "has the poles of A - B K together with the poles of A - L C (its matrix is block "
                   "triangular in the coordinates x and e = x - x_hat)")
SEPARATION_TITLE = "separation property: closed-loop polynomial det(sI - A + B K) det(sI - A + L C)"


def design_estimator(model: Model, avoid: set[str], feedback=None, form: str = "auto",
                     nominal: dict | None = None):
    """The estimator part of a design (GainDesign with symbol L, rows states, columns outputs)."""
    spec = model.estimator
    if model.C is None or model.n_outputs == 0:
        raise DesignError("an estimator needs measurements, but the plant has no outputs; "
                          "give [plant] outputs = [...] (and C when they are not states)", where=spec.where)
    A, C = sp.Matrix(model.A), sp.Matrix(model.C)
    n, p = A.rows, C.rows
    if p == 1:
        dual = design_gain(A.T, C.T, spec, part="estimator", symbol="L", states=model.states, avoid=avoid, form=form, nominal=nominal,
                           word="observable")
    else:
        dual = design_several_inputs(A.T, C.T, spec, part="estimator", symbol="L", states=model.states,
                                     inputs=model.outputs, avoid=avoid, symbols=model.symbols, ranges=parameter_box(model),
                                     word="observable", pattern_shape=((n, "states"), (p, "outputs")),
                                     transpose_pattern=True)
    Lsym = sp.Matrix(dual.extra["gain_symbols"]).T
    L = sp.Matrix(dual.gain).T
    renamed = {"controllability_determinant": ("observability_determinant",
                                               "determinant of the observability matrix [C; C A; ...]")}
    steps = []
    for st in dual.steps:
        if st.name == "closed_loop_matrix":
            steps.append(Step("closed_loop_matrix", "estimator error matrix A - L C", A - Lsym * C))
        elif st.name == "characteristic_polynomial":
            steps.append(Step(st.name, "det(sI - A + L C) = det(sI - A^T + C^T L^T)", st.value))
        elif st.name in ("solution", "direction_gain"):
            steps.append(Step(st.name, st.title.replace("f k", "k^T f^T"), sp.Matrix(st.value).T))
        elif st.name == "branches":
            steps.append(Step(st.name, st.title, tuple(sp.Matrix(b).T for b in st.value)))
        elif st.name in renamed:
            steps.append(Step(*renamed[st.name], st.value))
        else:
            steps.append(st)
    separation = dual.target.polynomial if feedback is None or feedback.target is None else \
        sp.Mul(feedback.target.polynomial, dual.target.polynomial, evaluate=False)
    steps.append(Step("separation", SEPARATION_TITLE if feedback is not None else
                      "separation property: the estimator poles join those of any regulator u = -K x_hat",
                      separation))
    notes = tuple(note.replace("one combination u = f v", "one combination f^T y of the outputs (by duality)")
                  .replace("L = f k", "L = k^T f^T") for note in dual.notes) + (SEPARATION_NOTE,)
    extra = {k: v for k, v in dual.extra.items() if k not in ("gain_symbols", "direction")}
    extra["gain_symbols"] = Lsym
    if "direction" in dual.extra:
        extra["output_direction"] = sp.ImmutableMatrix(dual.extra["direction"]).T
    branches = tuple(replace(b, gain=sp.ImmutableMatrix(sp.Matrix(b.gain).T)) for b in dual.branches)
    part = replace(dual, gain=sp.ImmutableMatrix(L), steps=tuple(steps), notes=notes, extra=extra,
                   branches=branches)
    return _index_by_state(part, p) if p > 1 else part


def _swap(value, mapping):
    if isinstance(value, tuple):
        return tuple(_swap(v, mapping) for v in value)
    return value.xreplace(mapping) if isinstance(value, (sp.Basic, sp.MatrixBase)) else value


def _index_by_state(part, p: int):
    """Rename the dual's l_ij (output i, state j) to l_ji, so that l_ij sits at L[i, j]."""
    Lsym = part.extra["gain_symbols"]
    mapping = {}
    for i in range(Lsym.rows):
        for j in range(Lsym.cols):
            s = Lsym[i, j]
            if isinstance(s, sp.Symbol) and "_" in s.name:
                base = s.name.rsplit("_", 1)[0]
                mapping[s] = sp.Symbol(f"{base}_{i + 1}{j + 1}")
    return replace(part, gain=_swap(part.gain, mapping), valid_when=_swap(part.valid_when, mapping),
                   closed_loop_polynomial=_swap(part.closed_loop_polynomial, mapping),
                   steps=tuple(Step(st.name, st.title, _swap(st.value, mapping)) for st in part.steps),
                   free_gains=_swap(part.free_gains, mapping),
                   extra={k: _swap(v, mapping) for k, v in part.extra.items()},
                   branches=tuple(replace(b, gain=_swap(b.gain, mapping), valid_when=_swap(b.valid_when, mapping))
                                  for b in part.branches))


def separation_polynomial(A, B, C, K, L) -> sp.Expr:
    """det(sI - M) of the 2n closed loop [[A, -B K], [L C, A - B K - L C]] in (x, x̂) coordinates.

    >>> A = sp.Matrix([[0, 1], [0, 0]]); B = sp.Matrix([[0], [1]]); C = sp.Matrix([[1, 0]])
    >>> sp.factor(separation_polynomial(A, B, C, sp.Matrix([[1, 2]]), sp.Matrix([[4], [4]])))
    (s + 1)**2*(s + 2)**2
    """
    top = sp.Matrix.hstack(A, -B * K)
    bottom = sp.Matrix.hstack(L * C, A - B * K - L * C)
    return sp.expand(sp.Matrix.vstack(top, bottom).charpoly(S).as_expr())
