"""One closed-loop run: the emitted controller sampling the simulated plant.

Per sample k (time t_k = k T): the plant's output (or state, when the
controller reads the state) plus seeded measurement noise goes to
``Controller.step(y, r)``; the returned input, plus any input disturbance,
is held until t_(k+1) while the plant advances. A run stops early when the
state grows beyond a million times the scenario's size (the loop diverged).

>>> import sympy as sp, tempfile
>>> from symgain.model import Model, Parameter, TargetSpec
>>> from symgain.design import derive
>>> from symgain.analysis.simulation.controller import write_controller_module, new_controller
>>> from symgain.analysis.simulation.plant import PlantSpec
>>> a = Parameter.declare("a", sign="positive", range=(1, 2))
>>> model = Model(name="tank", parameters=(a,), states=("h",), inputs=("u",), outputs=("h",),
...               A=sp.Matrix([[-a.symbol]]), B=sp.Matrix([[1]]), C=sp.Matrix([[1]]),
...               feedback=TargetSpec("poles", {"poles": (-4,)}))
>>> path = write_controller_module(derive(model), tempfile.mkdtemp())
>>> case = Case("offset", T=0.001, duration=2.0, initial=np.array([1.0]))
>>> trace = simulate(PlantSpec.from_model(model).at({"a": 1.0}, {"a": 1.0}),
...                  new_controller(path, 0.001, {"a": 1.0}), case, measures_outputs=False)
>>> bool(abs(trace.y[-1, 0] - np.exp(-4 * 2.0)) < 1e-3)     # h(t) = exp(-4 t)
True
"""
from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

__all__ = ["Case", "Trace", "simulate"]


@dataclass(frozen=True)
class Case:
    """A scenario with numbers: steps and noise in deviation coordinates, the run's timing."""

    name: str
    T: float
    duration: float
    reference: np.ndarray | None = None  # per output
    reference_time: float = 0.0
    initial: np.ndarray | None = None  # per state
    disturbance: np.ndarray | None = None  # per input
    disturbance_time: float = 0.0
    noise: np.ndarray | None = None  # standard deviation per measured entry
    index: int = 0  # position among the scenarios (seeds its noise)

    @property
    def samples(self) -> int:
        return max(1, int(np.ceil(self.duration / self.T - 1e-9)))

    def size(self) -> float:
        """The scenario's scale: the largest step or offset (1 when none)."""
        values = [np.max(np.abs(v)) for v in (self.reference, self.initial, self.disturbance)
                  if v is not None and v.size]
        return max([v for v in values if v > 0] or [1.0])


@dataclass
class Trace:
    """Time series of one run; ``u`` is the controller's applied input, held over each sample."""

    t: np.ndarray  # samples + 1 times
    y: np.ndarray  # (samples + 1, outputs): true output deviations
    x: np.ndarray  # (samples + 1, states)
    u: np.ndarray  # (samples, inputs)
    saturated: np.ndarray  # (samples, inputs) bool
    r: np.ndarray  # (samples + 1, outputs)
    diverged: bool = False
    notes: list = field(default_factory=list)


def _vector(value, size):
    return np.zeros(size) if value is None else np.asarray(value, dtype=float).reshape(size)


def simulate(plant, controller, case: Case, *, measures_outputs: bool, seed=(0,)) -> Trace:
    """Run the closed loop; ``measures_outputs``: the controller reads y (it has an estimator), else x."""
    n, m = plant.n_states, plant.n_inputs
    p = plant.C.shape[0]
    K, T = case.samples, case.T
    rng = np.random.default_rng([*seed, case.index])
    x = _vector(case.initial, n)
    ref, dist = _vector(case.reference, p), _vector(case.disturbance, m)
    noise = None if case.noise is None or not np.any(case.noise) else np.asarray(case.noise, dtype=float)
    ts = np.arange(K + 1) * T
    ys, xs, rs = np.full((K + 1, p), np.nan), np.full((K + 1, n), np.nan), np.zeros((K + 1, p))
    us, sat = np.full((K, m), np.nan), np.zeros((K, m), dtype=bool)
    limit = 1e6 * case.size()
    controller.reset()
    u = np.zeros(m)
    diverged = False
    for k in range(K):
        t = ts[k]
        y = plant.output(x, u)
        ys[k], xs[k] = y, x
        r = ref if t >= case.reference_time - 1e-12 else np.zeros(p)
        rs[k] = r
        measured = (y if measures_outputs else x).copy()
        if noise is not None:
            measured = measured + noise * rng.standard_normal(measured.size)
        u = np.asarray(controller.step(measured, r), dtype=float).reshape(m)
        us[k] = u
        sat[k] = np.asarray(controller.saturated, dtype=bool).reshape(m)
        d = dist if t >= case.disturbance_time - 1e-12 else 0.0
        x = plant.advance(x, u + d, t, t + T)
        if not np.all(np.isfinite(x)) or np.max(np.abs(x)) > limit:
            diverged = True
            break
    else:
        ys[K], xs[K], rs[K] = plant.output(x, u), x, rs[K - 1]
    return Trace(ts, ys, xs, us, sat, rs, diverged)
