"""Closed-loop step responses at nominal and at the corners of the declared ranges (scipy.signal).

The reference enters as u = -K x + N r. With ``gains="fixed"`` the controller
(K and N) is computed once at nominal values while the plant takes each
corner's values: the response shows what a wrong assumption costs. With
``gains="scheduled"`` K is the formula evaluated at each corner.

>>> import sympy as sp
>>> from symgain.model import Model, Parameter, TargetSpec
>>> from symgain.design import derive
>>> m = Parameter.declare("m", sign="positive", range=(1, 3))
>>> model = Model(name="cart", parameters=(m,), states=("p", "v"), inputs=("F",), outputs=("p",),
...               A=sp.Matrix([[0, 1], [0, 0]]), B=sp.Matrix([[0], [1 / m.symbol]]),
...               C=sp.Matrix([[1, 0]]), feedback=TargetSpec("poles", {"poles": (-1, -2)}))
>>> runs = step_responses(derive(model))
>>> [r.label for r in runs]
['nominal', 'm = 1', 'm = 3']
>>> round(float(runs[0].output[-1]), 2)   # unit steady state at nominal
1.0
"""
from __future__ import annotations

import itertools
import warnings
from dataclasses import dataclass

import numpy as np
import scipy.signal
import sympy as sp

from .numeric import lambdify

from ..design import Design
from ..design.compact import numeric_function
from ..errors import DesignError, Where

__all__ = ["StepRun", "step_responses", "corner_points"]


@dataclass(frozen=True)
class StepRun:
    label: str
    values: dict
    time: np.ndarray
    output: np.ndarray
    stable: bool


def corner_points(design: Design, max_parameters: int = 6) -> list[dict[str, float]]:
    """Nominal first, then every corner of the plant parameters' declared ranges (design knobs at nominal)."""
    model = design.model
    nominal = model.nominal_values()
    varied = [p for p in model.parameters if p.role == "plant" and p.range and p.range[0] < p.range[1]]
    varied = varied[:max_parameters]
    points = [dict(nominal)]
    for combo in itertools.product(*[p.range for p in varied]):
        points.append(dict(nominal, **{p.name: float(v) for p, v in zip(varied, combo)}))
    return points


def _label(point: dict, nominal: dict, units: dict) -> str:
    diff = [f"{k} = {v:g}" + (f" {units[k]}" if units.get(k) else "") for k, v in point.items()
            if v != nominal.get(k)]
    return ", ".join(diff) if diff else "nominal"


def step_responses(design: Design, gains: str = "fixed", n_samples: int = 800, progress=None) -> list[StepRun]:
    """One step response per point of :func:`corner_points` (first output, first input)."""
    model = design.model
    if design.feedback is None:
        raise DesignError("a step response needs a [feedback] design", where=Where(model.source))
    if model.n_inputs != 1:
        raise DesignError("step responses are drawn for single-input plants only", where=Where(model.source))
    args = [p.symbol for p in model.parameters]
    names = [p.name for p in model.parameters]
    f_A, f_B = lambdify(args, model.A, "numpy"), lambdify(args, model.B, "numpy")
    C = model.C if model.C is not None else sp.Matrix([[1] + [0] * (model.n_states - 1)])
    f_C = lambdify(args, C[0, :], "numpy")
    f_K = numeric_function(args, design.feedback.gain, design.feedback.definitions)

    def numeric(point):
        vals = [point[n] for n in names]
        return (np.array(f_A(*vals), dtype=float), np.array(f_B(*vals), dtype=float),
                np.array(f_C(*vals), dtype=float), np.real(np.array(f_K(*vals), dtype=complex)))

    points = corner_points(design)
    nominal = points[0]
    units = {p.name: p.unit for p in model.parameters}
    A0, B0, C0, K0 = numeric(nominal)
    closed0 = A0 - B0 @ K0
    N0 = -1.0 / float((C0 @ np.linalg.solve(closed0, B0)).item())
    loops = []
    for point in points:
        A, B, Cm, K = numeric(point)
        if gains == "scheduled":
            closed = A - B @ K
            N = -1.0 / float((Cm @ np.linalg.solve(closed, B)).item())
        else:
            closed, N = A - B @ K0, N0
        eig = np.linalg.eigvals(closed)
        loops.append((point, closed, B * N, Cm, bool(np.max(eig.real) < 0), float(np.min(np.abs(eig.real)))))
    slowest0 = loops[0][5]
    slowest = min([lp[5] for lp in loops if lp[4]] + [slowest0])
    horizon = min(6.0 / max(slowest, 1e-9), 10 * 6.0 / max(slowest0, 1e-9))  # at most 10x the nominal
    t = np.linspace(0.0, horizon, n_samples)
    runs = []
    for point, closed, BN, Cm, stable, _ in loops:
        system = scipy.signal.StateSpace(closed, BN, Cm, np.zeros((1, 1)))
        with np.errstate(all="ignore"), warnings.catch_warnings():
            warnings.simplefilter("ignore")  # an unstable corner may overflow; it is drawn clipped
            _, y = scipy.signal.step(system, T=t)
        runs.append(StepRun(_label(point, nominal, units), point, t, np.asarray(y).ravel(), stable))
        if progress is not None:
            progress(1)
    return runs
