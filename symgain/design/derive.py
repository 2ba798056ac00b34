"""Derive every part a model asks for: feedback, estimator, integral action, feedforward.

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

from dataclasses import replace

import sympy as sp

from ..errors import DesignError, ModelError, Where
from ..guard import stage
from ..model import Model, TargetSpec
from .estimator import design_estimator
from .feedforward import design_feedforward
from .integral_action import design_integral
from .result import Design
from .several_inputs import design_several_inputs, parameter_box
from .single_input import design_gain
from .targets import target_warnings

__all__ = ["derive"]


def derive(model: Model, form: str = "auto") -> Design:
    """Derive every part the model asks for (in z when the model has a sample period).

    ``form`` is how single-input gains are written: "auto" (expanded formulas unless they
    would be large, then the compact form), "expanded" or "compact" (named definitions in
    order, see :mod:`symgain.design.compact`). A gain that comes out infinite is an error.
    """
    if not isinstance(model, Model):
        raise ModelError(f"derive needs a Model (from load_model, Model or model_from_matrices), "
                         f"found {type(model).__name__}")
    counts = ((model.n_states, "state"), (model.n_inputs, "input"), (len(model.parameters), "parameter"))
    stage("derive", ", ".join(f"{n} {word}{'' if n == 1 else 's'}" for n, word in counts))
    if model.sampling is not None:
        from .sampled import derive_sampled

        design = derive_sampled(model)
        _refuse_infinite(design)
        return _with_warnings(design, tuple(design.warnings))
    avoid = set(model.symbols)
    nominal = {p.symbol: p.nominal for p in model.parameters if p.nominal is not None}
    feedback = estimator = integral = feedforward = None
    if model.feedback is not None:
        stage("derive: feedback gain")
        spec = model.feedback
        if model.pattern is not None and "pattern" not in spec.values:
            spec = TargetSpec(spec.kind, {**spec.values, "pattern": model.pattern}, spec.where)
        if model.n_inputs == 1 and "pattern" not in spec.values:
            feedback = design_gain(model.A, model.B, spec, part="feedback", symbol="K",
                                   states=model.states, avoid=avoid, form=form, nominal=nominal)
        else:
            feedback = design_several_inputs(model.A, model.B, spec, part="feedback", symbol="K",
                                             states=model.states, inputs=model.inputs, avoid=avoid,
                                             symbols=model.symbols, ranges=parameter_box(model))
    if feedback is not None:  # names of a compact form stay distinct across parts
        avoid |= {str(sym) for sym, _ in feedback.definitions}
    if model.estimator is not None:
        stage("derive: estimator gain")
        estimator = design_estimator(model, avoid, feedback, form=form, nominal=nominal)
        avoid |= {str(sym) for sym, _ in estimator.definitions}
    if model.integral is not None:
        stage("derive: integral action")
        integral = design_integral(model, avoid, form=form, nominal=nominal)
    if model.feedforward:
        stage("derive: reference feedforward")
        feedforward = design_feedforward(model, feedback, integral)
    stage("after the derivation")
    design = Design(model=model, feedback=feedback, estimator=estimator, integral=integral,
                    feedforward=feedforward)
    _refuse_infinite(design)
    return _with_warnings(design, tuple(target_warnings(design)))


def _with_warnings(design: Design, first: tuple) -> Design:
    """The design with every warning it earns: the target's, then the diagnostics'."""
    from .diagnostics import design_warnings

    stage("derive: warnings")
    extra = tuple(w for w in design_warnings(design) if w not in first)
    return replace(design, warnings=first + extra)


def _refuse_infinite(design: Design) -> None:
    """A gain that is infinite or undefined for every parameter value is an error, never a result."""
    for part in design.parts():
        matrices = [part.gain] + [v for v in part.extra.values() if isinstance(v, sp.MatrixBase)]
        for mat in matrices:
            if any(e.has(sp.zoo, sp.oo, -sp.oo, sp.nan) for e in mat):
                raise DesignError(f"{part.part}: the gain comes out infinite or undefined (a target value "
                                  "or a plant entry makes a denominator zero)", where=Where(design.model.source))
