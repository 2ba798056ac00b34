"""The design: gains, where they hold, and the derivation trail, from a model.

``derive(model) -> Design`` is pure: every consumer (terminal, JSON, code,
report, checks) reads the one :class:`Design` object it returns.

>>> import sympy as sp
>>> from symgain.model import Model, Parameter, TargetSpec
>>> m = Parameter.declare("m", sign="positive", range=(1, 2))
>>> w = Parameter.declare("w", sign="positive", range=(1, 3), role="design")
>>> model = Model(name="cart", parameters=(m, w), states=("p", "v"), inputs=("F",),
...               A=sp.Matrix([[0, 1], [0, 0]]), B=sp.Matrix([[0], [1 / m.symbol]]),
...               feedback=TargetSpec("poles", {"poles": (-w.symbol, -w.symbol)}))
>>> design = derive(model)
>>> design.feedback.gain
Matrix([[m*w**2, 2*m*w]])
>>> design.feedback.valid_when
()
>>> [step.name for step in design.feedback.steps]
['closed_loop_matrix', 'open_loop_polynomial', 'characteristic_polynomial', 'target_polynomial', 'coefficient_equations', 'solution', 'controllability_determinant', 'valid_when']
"""
from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import sympy as sp

from .errors import DesignError, NotControllableError, Where
from .model import Model, S, TargetSpec
from .placement import place_single_input
from .targets import Target, resolve_target
from .validity import nonzero_conditions

__all__ = ["Step", "GainDesign", "Design", "derive", "design_gain"]


@dataclass(frozen=True)
class Step:
    """One named step of a derivation: ``value`` is a sympy object (or a tuple of them)."""

    name: str
    title: str
    value: Any


@dataclass(frozen=True)
class GainDesign:
    """One designed gain (feedback K, estimator L, ...) with its derivation."""

    part: str  # "feedback", "estimator", "integral", "feedforward"
    symbol: str  # "K", "L", ...
    gain: sp.ImmutableMatrix
    valid_when: tuple[sp.Basic, ...]
    target: Target | None = None
    closed_loop_polynomial: sp.Expr | None = None  # with the gains as unknown symbols
    steps: tuple[Step, ...] = ()
    free_gains: tuple[sp.Symbol, ...] = ()
    notes: tuple[str, ...] = ()
    extra: dict = field(default_factory=dict)  # more matrices of the part, e.g. integral_gain

    def step(self, name: str) -> Step:
        for st in self.steps:
            if st.name == name:
                return st
        raise KeyError(name)


@dataclass(frozen=True)
class Design:
    """All designed parts of one model."""

    model: Model
    feedback: GainDesign | None = None
    estimator: GainDesign | None = None
    integral: GainDesign | None = None
    feedforward: GainDesign | None = None
    warnings: tuple[str, ...] = ()  # one line each, for stderr and the JSON result

    def parts(self) -> list[GainDesign]:
        """The designed parts, in pipeline order."""
        return [p for p in (self.feedback, self.estimator, self.integral, self.feedforward) if p]

    @property
    def valid_when(self) -> tuple[sp.Basic, ...]:
        """Every condition of every part, without duplicates."""
        return tuple(dict.fromkeys(c for p in self.parts() for c in p.valid_when))

    def _repr_markdown_(self) -> str:
        """Jupyter display: gains, targets and conditions (see :mod:`symgain.display`)."""
        from .display import design_markdown

        return design_markdown(self)


GAIN_AXES = {  # which model names label the rows and columns of each gain matrix
    "feedback": ("inputs", "states"),
    "estimator": ("states", "outputs"),
    "integral": ("inputs", "states"),
    "integral_gain": ("inputs", "outputs"),
    "feedforward": ("inputs", "outputs"),
}


def gain_labels(model: Model, key: str, rows: int, cols: int) -> tuple[list[str], list[str]]:
    """Row and column names of a gain matrix (a part name or an extra key such as integral_gain).

    Falls back to 1, 2, ... where the names do not fit the shape.
    """
    rnames, cnames = GAIN_AXES.get(key, (None, None))
    rl = list(getattr(model, rnames, ())) if rnames else []
    cl = list(getattr(model, cnames, ())) if cnames else []
    if len(rl) != rows:
        rl = [str(i + 1) for i in range(rows)]
    if len(cl) != cols:
        cl = [str(j + 1) for j in range(cols)]
    return rl, cl


def _unreachable_directions(A: sp.Matrix, B: sp.Matrix, states, lead: str = "no input moves") -> str:
    """Left null vectors of the controllability matrix, as combinations of states."""
    n = A.rows
    ctrb = sp.Matrix.hstack(*[A**i * B for i in range(n)])
    try:
        vectors = ctrb.T.nullspace(simplify=True)
    except Exception:  # pragma: no cover - nullspace may fail on exotic entries
        return ""
    combos = []
    for v in vectors[:3]:
        combo = sum((sp.simplify(c) * sp.Symbol(s) for c, s in zip(v, states)), sp.Integer(0))
        combos.append(sp.sstr(combo))
    return f"; {lead} " + ", nor ".join(combos) if combos else ""


def design_gain(A: sp.Matrix, B: sp.Matrix, spec: TargetSpec, *, part: str, symbol: str,
                states, avoid: set[str], word: str = "controllable") -> GainDesign:
    """Single-input placement for A - B K against the target in ``spec``."""
    n = A.rows
    if B.cols != 1:
        raise DesignError(f"{part}: {B.cols} inputs; several inputs need a 'pattern' "
                          "(see the model-file reference)", where=spec.where)
    target = resolve_target(spec, n)
    result = place_single_input(A, B, target.polynomial, letter=symbol.lower(), avoid=avoid)
    det_num, det_den = result.controllability_det
    if det_num == 0:
        raise NotControllableError(
            f"the plant is not {word} for any parameter values "
            f"(the {'controllability' if word == 'controllable' else 'observability'} matrix is singular)"
            + _unreachable_directions(A, B, states, "no input moves" if word == "controllable"
                                      else "no output sees"), where=spec.where)
    valid = nonzero_conditions([det_num, *result.gain_denominators])
    Ksym = result.gain_symbols
    steps = (
        Step("closed_loop_matrix", f"closed-loop matrix A - B {symbol}", sp.Matrix(A - B * Ksym)),
        Step("open_loop_polynomial", "open-loop characteristic polynomial det(sI - A)",
             sp.Add(S**n, *[c * S ** (n - 1 - i) for i, c in enumerate(result.open_loop_coeffs)])),
        Step("characteristic_polynomial", f"det(sI - A + B {symbol})", result.closed_loop_polynomial),
        Step("target_polynomial", "target polynomial", target.polynomial),
        Step("coefficient_equations", "coefficients matched power by power", result.coefficient_equations),
        Step("solution", f"gain {symbol}", result.gain),
        Step("controllability_determinant", f"determinant of the {'controllability' if word == 'controllable' else 'observability'} matrix",
             det_num / det_den),
        Step("valid_when", "conditions for the formulas to hold", valid),
    )
    return GainDesign(part=part, symbol=symbol, gain=sp.ImmutableMatrix(result.gain), valid_when=valid,
                      target=target, closed_loop_polynomial=result.closed_loop_polynomial, steps=steps,
                      notes=target.notes, extra={"gain_symbols": Ksym})


def derive(model: Model) -> Design:
    """Derive every part the model asks for."""
    if not isinstance(model, Model):
        from .errors import ModelError

        raise ModelError(f"derive needs a Model (from load_model, Model or model_from_matrices), "
                         f"found {type(model).__name__}")
    from .estimator import design_estimator
    from .feedforward import design_feedforward
    from .integral_action import design_integral
    from .multi_input import design_several_inputs

    from .guard import stage

    stage("derive", f"{model.n_states} states, {model.n_inputs} inputs, {len(model.parameters)} parameters")
    avoid = set(model.symbols)
    feedback = estimator = integral = feedforward = None
    if model.feedback is not None:
        stage("derive: feedback gain")
        spec = model.feedback
        if model.pattern is not None and "pattern" not in spec.values:
            spec = TargetSpec(spec.kind, {**spec.values, "pattern": model.pattern}, spec.where)
        if model.n_inputs == 1 and "pattern" not in spec.values:
            feedback = design_gain(model.A, model.B, spec, part="feedback", symbol="K",
                                   states=model.states, avoid=avoid)
        else:
            feedback = design_several_inputs(model.A, model.B, spec, part="feedback", symbol="K",
                                             states=model.states, inputs=model.inputs, avoid=avoid,
                                             symbols=model.symbols)
    if model.estimator is not None:
        stage("derive: estimator gain")
        estimator = design_estimator(model, avoid, feedback)
    if model.integral is not None:
        stage("derive: integral action")
        integral = design_integral(model, avoid)
    if model.feedforward:
        stage("derive: reference feedforward")
        feedforward = design_feedforward(model, feedback, integral)
    stage("after the derivation")
    design = Design(model=model, feedback=feedback, estimator=estimator, integral=integral,
                    feedforward=feedforward)
    _refuse_infinite(design)
    from dataclasses import replace

    from .targets import target_warnings

    return replace(design, warnings=tuple(target_warnings(design)))


def _refuse_infinite(design: Design) -> None:
    """A gain that is infinite or undefined for every parameter value is an error, never a result."""
    for part in design.parts():
        matrices = [part.gain] + [v for v in part.extra.values() if isinstance(v, sp.MatrixBase)]
        for mat in matrices:
            if any(e.has(sp.zoo, sp.oo, -sp.oo, sp.nan) for e in mat):
                raise DesignError(f"{part.part}: the gain comes out infinite or undefined (a target value "
                                  "or a plant entry makes a denominator zero)", where=Where(design.model.source))

