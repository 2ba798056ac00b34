"""The closed loop that runs on the machine: every designed part in it, true plant vs controller.

Analyses (``robust``, ``plot --step``) look at one loop built from all the
parts a design holds:

* state feedback ``u = -K x`` (or, with integral action, ``u = -K x - Ki q``
  with ``q' = y - r``);
* with an estimator as well, the controller feeds back the estimate:
  ``u = -K x_hat (- Ki q)``, ``x_hat' = A x_hat + B u + L (y - C x_hat - D u)``.

The plant keeps the true parameter values; the controller (K, Ki, L and the
estimator's copy of A, B, C, D) uses ``estimates``: a mapping from
parameter symbols to what the controller assumes (empty: matched). The loop
matrix is built symbolically once, so the same object gives closed-form
polynomials and, compiled, numbers.

Free gains that a gain pattern leaves undetermined need a value before a
loop can be evaluated: :func:`settle_free_gains` sets each to 0 (or 1 when 0
makes a validity condition fail at nominal) and says so.

>>> import sympy as sp
>>> from symgain.model import Model, Parameter, TargetSpec
>>> from symgain.design import derive
>>> m = Parameter.declare("m", sign="positive", range=(1, 3))
>>> model = Model(name="cart", parameters=(m,), states=("p", "v"), inputs=("F",), outputs=("p",),
...               A=sp.Matrix([[0, 1], [0, 0]]), B=sp.Matrix([[0], [1 / m.symbol]]),
...               C=sp.Matrix([[1, 0]]), feedback=TargetSpec("poles", {"poles": (-1, -2)}),
...               estimator=TargetSpec("poles", {"poles": (-5, -5)}))
>>> loop = closed_loop(derive(model))
>>> loop.description
'state feedback u = -K x_hat with the estimator in the loop (gains K, L)'
>>> sp.factor(loop.matrix.charpoly(sp.Symbol("s")).as_expr())
(s + 1)*(s + 2)*(s + 5)**2
"""
from __future__ import annotations

from dataclasses import dataclass, replace

import sympy as sp

from ..design import Design
from ..design.validity import holds_at
from ..errors import DesignError, Where

__all__ = ["Loop", "closed_loop", "settle_free_gains", "loop_kind", "inline_definitions"]


@dataclass(frozen=True)
class Loop:
    """x_cl' = matrix x_cl + reference r; y = output x_cl + feedthrough r."""

    description: str
    matrix: sp.Matrix
    reference: sp.Matrix  # input matrix of the reference r (one column per output for integral action)
    output: sp.Matrix
    feedthrough: sp.Matrix
    states: tuple[str, ...]
    needs_reference_gain: bool  # True: scale r by N so that the steady state matches (no integrator)
    discrete: bool = False  # True: x_cl[k+1] = matrix x_cl[k] + reference r[k] (a sampled-data design)
    period: sp.Expr | None = None  # the sample period of a discrete loop
    slots: tuple = ()  # with gain_slots=True: (symbol, part, gain symbol, row, col) of each gain entry

    def stable(self, eigenvalues) -> bool:
        """Asymptotically stable: real parts < 0, or inside the unit circle for a discrete loop."""
        import numpy as np

        eigenvalues = np.asarray(eigenvalues)
        if self.discrete:
            return bool(np.max(np.abs(eigenvalues)) < 1)
        return bool(np.max(eigenvalues.real) < 0)


def loop_kind(design: Design) -> str:
    """Which loop the design closes: "integral", "feedback" or "" (an estimator alone closes none)."""
    return "integral" if design.integral is not None else "feedback" if design.feedback is not None else ""


def settle_free_gains(design: Design) -> tuple[Design, str]:
    """The design with every free gain set to a number, and a sentence saying which (empty if none)."""
    free = [g for part in design.parts() for g in part.free_gains]
    if not free:
        return design, ""
    nominal = {p.symbol: p.nominal for p in design.model.parameters if p.nominal is not None}
    free = list(dict.fromkeys(free))
    candidates = [[0] * len(free), [1] * len(free)]
    candidates += [[1 if k == j else 0 for k in range(len(free))] for j in range(len(free))]
    candidates += [[k + 1 for k in range(len(free))]]
    choice = dict(zip(free, candidates[-1]))
    for values in candidates:
        trial = dict(zip(free, values))
        try:
            if not any(holds_at(part.valid_when, {**nominal, **trial}) for part in design.parts()):
                choice = trial
                break
        except TypeError:  # a parameter without a nominal value: keep the first choice
            choice = trial
            break
    parts = {}
    for part in design.parts():
        subs = {g: sp.Integer(v) for g, v in choice.items()}
        parts[part.part] = replace(
            part, gain=part.gain.xreplace(subs), free_gains=(),
            valid_when=tuple(c.xreplace(subs) for c in part.valid_when if c.xreplace(subs) is not sp.true),
            extra={k: (v.xreplace(subs) if isinstance(v, sp.MatrixBase) and k != "gain_symbols" else v)
                   for k, v in part.extra.items()})
    said = ", ".join(f"{g} = {v}" for g, v in choice.items())
    return replace(design, **parts), (f"free gain{'s' if len(choice) > 1 else ''} {said} for this "
                                      "analysis (the target holds for any value; fix it in the pattern)")


def inline_definitions(mat, part=None) -> sp.Matrix:
    """``mat`` with the named definitions of a compact-form part put in place (none: unchanged)."""
    definitions = getattr(part, "definitions", ()) or ()
    if not definitions:
        return sp.Matrix(mat)
    subs = {}
    for symbol, value in definitions:
        subs[symbol] = sp.sympify(value).xreplace(subs)
    return sp.Matrix(mat).xreplace(subs)


def closed_loop(design: Design, estimates: dict | None = None, gain_slots: bool = False) -> Loop:
    """The loop of every designed part; the controller evaluated at ``estimates`` (symbol -> value).

    ``gain_slots=True`` leaves every gain entry as a symbol (listed in ``Loop.slots``), for
    numeric consumers that evaluate the gains themselves (in their short-period forms).

    A sampled-data design closes a loop in discrete time: x[k+1] = Phi x[k] + Gamma u[k],
    q[k+1] = q[k] + T (y - r), the estimator in its prediction or current form; the
    loop's ``discrete`` flag is then True (stable: every eigenvalue inside the unit circle).
    """
    model = design.model
    kind = loop_kind(design)
    if not kind:
        raise DesignError("an estimator alone closes no loop (its own poles do not depend on the plant); "
                          "add [feedback] or [integral] to analyse a loop", where=Where(model.source))
    hat = estimates or {}
    sampled = design.sampled
    discrete = sampled is not None
    A = sp.Matrix(sampled.Phi if discrete else model.A)
    B = sp.Matrix(sampled.Gamma if discrete else model.B)
    T = sp.sympify(sampled.period) if discrete else sp.Integer(1)
    n, m = A.rows, B.cols
    C = sp.Matrix(model.C) if model.C is not None else sp.Matrix([[1] + [0] * (n - 1)])
    D = sp.Matrix(model.D) if model.D is not None else sp.zeros(C.rows, m)
    p = C.rows

    slots = []

    def at_hat(mat, part=None):
        return sp.Matrix(inline_definitions(mat, part)).xreplace(hat)

    def gain(part, key="gain", symbol=None):
        mat = part.gain if key == "gain" else part.extra[key]
        if not gain_slots:
            return at_hat(mat, part)
        symbol = symbol or part.symbol
        out = sp.Matrix(mat.rows, mat.cols, lambda i, j: sp.Dummy(f"{symbol}_{i}_{j}"))
        slots.extend((out[i, j], part.part, symbol, i, j) for i in range(mat.rows) for j in range(mat.cols))
        return out

    if kind == "integral":
        K = gain(design.integral)
        Ki = gain(design.integral, "integral_gain", "Ki")
        gains = "K, Ki"
        law = ("integral action u = -K x - Ki q, q[k+1] = q[k] + T (y - r)" if discrete
               else "integral action u = -K x - Ki q, q' = y - r")
    else:
        K, Ki = gain(design.feedback), sp.zeros(m, 0)
        gains = "K"
        law = "state feedback u = -K x"
    q = Ki.cols
    delay = discrete and model.sampling.compute_delay
    nv = m if delay else 0  # with the computation delay the input of the previous sample is a state
    estimated = design.estimator is not None
    current = discrete and estimated and model.sampling.estimator_form == "current"
    if current and any(e != 0 for e in D):
        raise DesignError("a current-form estimator with a direct feedthrough D is not analysed in the loop "
                          "(u would depend on itself)", where=Where(model.source))
    sizes = [n, nv, n if estimated else 0, q, m]  # x, u[k-1], x_hat or x_bar, q; then what u gets from N r
    size = sum(sizes) - m

    def select(block):
        start = sum(sizes[:block])
        return sp.Matrix.hstack(sp.zeros(sizes[block], start), sp.eye(sizes[block]),
                                sp.zeros(sizes[block], size + m - start - sizes[block]))

    x_sel, v_sel, e_sel, q_sel, r_u = (select(k) for k in range(5))
    Kx, Kv = K[:, :n], K[:, n:]
    if estimated:
        L = gain(design.estimator)
        Ah, Bh, Ch, Dh = at_hat(A), at_hat(B), at_hat(C), at_hat(D)
    if current:  # x_hat[k] = x_bar[k] + L (y[k] - C x_bar[k]); the state holds x_bar
        x_hat = e_sel + L * (C * x_sel - Ch * e_sel)
    else:
        x_hat = e_sel if estimated else x_sel
    u_row = -Kx * x_hat - Ki * q_sel + r_u
    if delay:  # u[k] = -K [x_hat[k]; u[k-1]] - Ki q[k], applied during the next sample
        u_row -= Kv * v_sel
    applied = v_sel if delay else u_row  # the input acting on the plant during this sample
    y_row = C * x_sel + D * applied
    rows = [A * x_sel + B * applied] + ([u_row] if delay else [])
    states = tuple(model.states) + tuple(f"{u}_prev" for u in model.inputs if delay)
    if estimated:
        if current:
            rows.append(Ah * x_hat + Bh * applied)
        else:  # prediction form (continuous: x_hat' = A x_hat + B u + L (y - C x_hat - D u))
            rows.append(Ah * e_sel + Bh * applied + L * (y_row - Ch * e_sel - Dh * applied))
        states += tuple(f"{s}_{'bar' if current else 'hat'}" for s in model.states)
        law = law.replace("-K x", "-K x_hat") + (" with the current-form estimator in the loop" if current
                                                 else " with the estimator in the loop")
        gains += ", L"
    if delay:
        law += ", one sample of computation delay (u[k] applied at k+1)"
    if q:
        rows.append((q_sel + T * y_row) if discrete else y_row)  # q[k+1] = q[k] + T (y - r); q' = y - r
        states = (*states, *(f"q_{y}" for y in (model.outputs or ("y",))))
    full = sp.Matrix.vstack(*rows)  # the last m columns: what each row receives from N r
    if q:
        reference = sp.Matrix.vstack(sp.zeros(size - q, q), -T * sp.eye(q))
        feedthrough = sp.zeros(p, q)
    else:  # r enters through u = ... + N r (N at the design's nominal steady state)
        reference, feedthrough = full[:, size:], y_row[:, size:]
    matrix, y_row = full[:, :size], y_row[:, :size]
    where = ""
    if discrete:
        from ..mathtext import math_text, number_text

        where = (f" at the sample period T = {number_text(float(T))} s" if T.is_number else
                 " at the sample period T" if str(T) == "T" else f" at the sample period T = {math_text(T)}")
    return Loop(f"{law} (gains {gains}){where}", matrix, reference, y_row, feedthrough, states, not q,
                discrete=discrete, period=T if discrete else None, slots=tuple(slots))
