"""Reference feedforward: the static gain N of u = -K x + N r for unit steady-state gain.

In steady state x' = 0, so x = (B K - A)^(-1) B N r and y = (C - D K) x + D N r.
Asking y = r gives

    N = ((C - D K) (B K - A)^(-1) B + D)^(-1),

which is N = (C (B K - A)^(-1) B)^(-1) when D = 0 (common practice, for
instance Franklin, Powell and Emami-Naeini's reference input gain, from
memory). It needs as many outputs as inputs. The formula holds where
B K - A (whose determinant is the closed-loop polynomial at s = 0) and the
steady-state gain matrix are invertible; their factors become the
conditions. The K is the feedback gain of the same design.

>>> import sympy as sp
>>> from symgain.model import Model, Parameter, TargetSpec
>>> m = Parameter.declare("m", sign="positive", range=(1, 2))
>>> model = Model(name="cart", parameters=(m,), states=("p", "v"), inputs=("F",), outputs=("p",),
...               A=sp.Matrix([[0, 1], [0, 0]]), B=sp.Matrix([[0], [1 / m.symbol]]), C=sp.Matrix([[1, 0]]),
...               feedback=TargetSpec("poles", {"poles": (-2, -3)}), feedforward=True)
>>> from symgain.design import derive
>>> derive(model).feedforward.gain
Matrix([[6*m]])
"""
from __future__ import annotations

import sympy as sp

from .algebra import Field, SparseLU
from ..errors import DesignError, Where
from ..model import Model
from .validity import nonzero_conditions
from .result import GainDesign, Step

__all__ = ["design_feedforward", "steady_state_gain"]


def steady_state_gain(A, B, C, D, K):
    """(field, G, det(B K - A)) with G = (C - D K)(B K - A)^(-1) B + D over the fraction field."""
    A, B, C, K = (sp.Matrix(x) for x in (A, B, C, K))
    D = sp.zeros(C.rows, B.cols) if D is None else sp.Matrix(D)
    field = Field.for_exprs([*A, *B, *C, *D, *K])
    M = field.matrix(B * K - A)
    lu = SparseLU.factor(M, field)
    if not lu.det:
        raise DesignError("B K - A is singular for every parameter value (a closed-loop pole at s = 0); "
                          "no static feedforward gives unit steady-state gain")
    Bf, Cf, Df = field.matrix(B), field.matrix(C - D * K), field.matrix(D)
    X = [lu.solve([Bf[i][j] for i in range(B.rows)]) for j in range(B.cols)]  # columns of (BK - A)^-1 B
    G = [[sum((Cf[i][k] * X[j][k] for k in range(A.rows) if Cf[i][k] and X[j][k]), field.zero) + Df[i][j]
          for j in range(B.cols)] for i in range(C.rows)]
    return field, G, lu.det


def design_feedforward(model: Model, feedback, integral=None):
    """The feedforward part: gain N (inputs x outputs), target None, steps showing the formula."""
    where = Where(model.source, "feedforward")
    if model.C is None or model.n_outputs == 0:
        raise DesignError("feedforward makes the outputs follow r, but the plant has no outputs; "
                          "give [plant] outputs = [...]", where=where)
    if model.n_outputs != model.n_inputs:
        raise DesignError(f"feedforward needs as many outputs as inputs, found {model.n_outputs} outputs and "
                          f"{model.n_inputs} inputs", where=where)
    if feedback is None:
        if integral is not None:
            raise DesignError("feedforward uses the feedback gain K of [feedback], and the model has only "
                              "[integral] (integral action already removes the steady-state error); "
                              "add [feedback] or drop [feedforward]", where=where)
        raise DesignError("feedforward uses the feedback gain K, but the model has no [feedback]", where=where)
    K = sp.Matrix(feedback.gain)
    field, G, det_bka = steady_state_gain(model.A, model.B, model.C, model.D, K)
    p = len(G)
    lu = SparseLU.factor(G, field)
    if not lu.det:
        raise DesignError("the steady-state gain C (B K - A)^(-1) B is singular for every parameter value "
                      "(the outputs cannot hold a constant nonzero value, as with a zero at s = 0): no static "
                          "feedforward gives unit gain", where=where)
    cols = [lu.solve([field.one if i == j else field.zero for i in range(p)]) for j in range(p)]
    N = sp.Matrix(p, p, lambda i, j: field.factored(cols[j][i]))
    Gm = sp.Matrix(p, p, lambda i, j: field.factored(G[i][j]))
    conditions = [*field.factors(det_bka), *field.factors(lu.det)]
    conditions += [sp.denom(sp.together(e)) for e in N]
    valid = nonzero_conditions(conditions)
    n, m = model.n_states, model.n_inputs
    sA, sB, sC, sK, sN = (sp.MatrixSymbol(x, r, c) for x, r, c in
                          (("A", n, n), ("B", n, m), ("C", p, n), ("K", m, n), ("N", m, p)))
    formula = sp.Eq(sN, sp.Inverse(sC * sp.Inverse(sB * sK - sA) * sB), evaluate=False)
    Ksyms = feedback.extra.get("gain_symbols", K)
    steps = (
        Step("formula", "steady state x' = 0 and y = r give N" + (" (with D: N = ((C - D K)(B K - A)^(-1) B + D)^(-1))"
                                                                   if model.D is not None else ""), formula),
        Step("closed_loop_matrix", "closed-loop matrix A - B K with the feedback gain",
             sp.Matrix(model.A - model.B * sp.Matrix(Ksyms))),
        Step("closed_loop_determinant", "det(B K - A): the closed-loop polynomial at s = 0",
             field.factored(det_bka)),
        Step("steady_state_gain", "steady-state gain from N r to y: C (B K - A)^(-1) B", Gm),
        Step("solution", "feedforward gain N", N),
        Step("valid_when", "conditions for the formula to hold", valid),
    )
    notes = ("control law u = -K x + N r; unit steady-state gain from r to y only while the model is exact "
             "(integral action removes the error under model mismatch)",)
    return GainDesign(part="feedforward", symbol="N", gain=sp.ImmutableMatrix(N), valid_when=valid,
                      target=None, steps=steps, free_gains=tuple(feedback.free_gains), notes=notes)
