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
from ..errors import DesignError, SymgainError, Where

__all__ = ["StepRun", "step_responses", "corner_points", "loop_description"]


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
    """One step response per point of :func:`corner_points` (first reference, first output).

    The loop holds every designed part (:func:`symgain.analysis.loops.closed_loop`): integral action
    when the design has it, the estimator in the loop when it has one.
    """
    from .loops import closed_loop

    model = design.model
    loop_design = design
    if design.feedback is None and design.integral is None:
        raise DesignError("a step response needs a loop: [feedback] or [integral]", where=Where(model.source))
    if model.n_inputs != 1 and design.integral is None:
        raise DesignError("step responses of state feedback are drawn for single-input plants only "
                          "(add [integral] for a reference per output)", where=Where(model.source))
    true = [p.symbol for p in model.parameters]
    hats = [sp.Dummy(f"{p.name}_hat", **p.symbol.assumptions0) for p in model.parameters]
    from .evaluate import GainEvaluator

    try:  # the gains by the emitted module's arithmetic (short-period forms), put into the loop
        gains = GainEvaluator(loop_design)
    except (SymgainError, TypeError, ValueError, KeyError):
        gains = None  # the formulas go into the loop as written
    loop = closed_loop(loop_design, dict(zip(true, hats)), gain_slots=gains is not None)
    slots = gains.slot_indices(loop.slots) if gains is not None else []
    f_loop = lambdify(true + hats + [s[0] for s in loop.slots],
                      [loop.matrix, loop.reference[:, 0], loop.output[0, :], loop.feedthrough[0, 0]], "numpy")
    names = [p.name for p in model.parameters]

    def numeric(point, controller):
        vals = [complex(point[n]) for n in names] + [complex(controller[n]) for n in names]  # (sqrt of D < 0)
        if gains is not None:
            values, _ = gains({n: controller[n] for n in names})
            vals += [float(values[k]) for k in slots]
        with np.errstate(all="ignore"):
            M, R, Cm, Dm = f_loop(*vals)
        return (np.real(np.array(M, dtype=complex)), np.real(np.array(R, dtype=complex)).reshape(-1, 1),
                np.real(np.array(Cm, dtype=complex)).reshape(1, -1), float(np.real(complex(Dm))))

    period = None
    if loop.discrete:
        f_period = lambdify(true, sp.sympify(loop.period), "numpy")

        def period(point) -> float:
            return float(f_period(*[point[n] for n in names]))

    def reference_gain(M, R, Cm, Dm) -> float:
        if not loop.needs_reference_gain:
            return 1.0
        size = M.shape[0]
        steady = np.eye(size) - M if loop.discrete else -M  # x_ss = (I - M)^-1 R r, or -M^-1 R r
        try:
            dc = float((Dm + Cm @ np.linalg.solve(steady, R)).item())
        except np.linalg.LinAlgError:
            return 1.0
        return 1.0 / dc if dc != 0 else 1.0

    def rates(eig, point) -> np.ndarray:
        """Decay rates in 1/s (continuous: -Re s; discrete: -ln|z| / T)."""
        if loop.discrete:
            with np.errstate(divide="ignore"):
                return -np.log(np.maximum(np.abs(eig), 1e-300)) / period(point)
        return -eig.real

    points = corner_points(design)
    nominal = points[0]
    units = {p.name: p.unit for p in model.parameters}
    N0 = reference_gain(*numeric(nominal, nominal))
    loops = []
    for point in points:
        controller = point if gains == "scheduled" else nominal
        M, R, Cm, Dm = numeric(point, controller)
        N = reference_gain(M, R, Cm, Dm) if gains == "scheduled" else N0
        if not np.all(np.isfinite(M)):
            M = np.nan_to_num(M)
        eig = np.linalg.eigvals(M)
        loops.append((point, M, R * N, Cm, Dm * N, loop.stable(eig), float(np.min(np.abs(rates(eig, point))))))
    slowest0 = loops[0][6]
    slowest = min([lp[6] for lp in loops if lp[5]] + [slowest0])
    horizon = min(6.0 / max(slowest, 1e-9), 10 * 6.0 / max(slowest0, 1e-9))  # at most 10x the nominal
    t = np.linspace(0.0, horizon, n_samples)
    runs = []
    for point, M, RN, Cm, DN, stable, _ in loops:
        if loop.discrete:  # x[k+1] = M x[k] + R N r, the output held between samples
            dt = period(point)
            steps = int(min(max(horizon / dt, 2), 20000))
            x, ys = np.zeros((M.shape[0], 1)), []
            with np.errstate(all="ignore"):
                for _ in range(steps + 1):
                    ys.append(float((Cm @ x).item() + DN))
                    x = M @ x + RN
            times = np.arange(steps + 1) * dt
            run_t, y = times, np.array(ys)
        else:
            system = scipy.signal.StateSpace(M, RN, Cm, np.array([[DN]]))
            with np.errstate(all="ignore"), warnings.catch_warnings():
                warnings.simplefilter("ignore")  # an unstable corner may overflow; it is drawn clipped
                _, y = scipy.signal.step(system, T=t)
            run_t = t
        runs.append(StepRun(_label(point, nominal, units), point, run_t, np.asarray(y).ravel(), stable))
        if progress is not None:
            progress(1)
    return runs


def loop_description(design: Design) -> str:
    """Which loop :func:`step_responses` draws, in words."""
    from .loops import closed_loop

    return closed_loop(design).description
