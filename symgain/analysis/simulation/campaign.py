"""Every scenario at every mismatch point: the runs, their tables, the worst point.

:func:`prepare` turns a design and its model's simulation tables (or
overrides) into a picklable :class:`Setup`: the plant, the path of the
emitted controller module, the numeric scenarios, the requirement limits,
the sample period and the run length. :func:`run_campaign` runs it, across
a process pool when there are many points.

Defaults, chosen from the design's closed-loop poles at nominal values: the
controller's sample period T = 0.02 / |fastest pole| (Euler emulation of a
continuous design is then close to the continuous loop), the run length
20 / |slowest real part| (five times the 2 % settling estimate 4 / sigma,
common practice, so that slower mismatched plants still show whether they
settle), at most 20 000 samples; a sampled-data design keeps its own period.
Without declared scenarios: a step of 0.1 in the first output's reference
when the controller follows a reference (integral action or feedforward),
made smaller (one significant digit) when holding it would take more than
half of an actuator limit; else an initial offset of 0.1 in the state the
first output measures.
"""
from __future__ import annotations

import os
import time
from dataclasses import dataclass, field, replace

import numpy as np
import sympy as sp

from ...design import Design
from ...errors import ModelError, Where
from .controller import fix_free_gains, load_controller_module, new_controller, write_controller_module
from .metrics import Metric, measure, score
from .plant import PlantSpec
from .points import Point, mismatch_points
from .run import Case, Trace, simulate
from ...model.simulation_keys import Requirements, Scenario, SimulationTable

__all__ = ["Setup", "Run", "Campaign", "prepare", "run_campaign", "DEFAULT_STEP", "MAX_SAMPLES"]

DEFAULT_STEP = 0.1
MAX_SAMPLES = 20_000


@dataclass(frozen=True)
class Setup:
    """Everything a worker process needs for its runs (picklable)."""

    name: str
    plant: PlantSpec
    module_path: str
    measures_outputs: bool
    outputs: tuple[str, ...]
    inputs: tuple[str, ...]
    measured: tuple[str, ...]
    cases: tuple[Case, ...]
    points: tuple[Point, ...]
    nominal: dict
    gains: str
    T: float | None  # the controller's period for a continuous design; None: the sampled design's own
    duration: float
    limits: dict  # settling_time, overshoot, steady_state_error -> float or None
    peak_limits: dict  # input -> float
    input_range: dict  # input -> (min, max) for the figures
    seed: int = 0
    notes: tuple[str, ...] = ()


@dataclass
class Run:
    case: int
    point: int
    trace: Trace | None
    rows: list[Metric]
    score: tuple  # (tier, size) from metrics.score; (2, inf) when the controller refused the point
    error: str | None = None

    @property
    def passed(self) -> bool:
        return self.error is None and all(r.passed is not False for r in self.rows)


@dataclass
class Campaign:
    setup: Setup
    runs: list[Run]
    elapsed: float
    workers: int
    notes: list = field(default_factory=list)

    @property
    def passed(self) -> bool:
        return all(r.passed for r in self.runs)

    @property
    def worst(self) -> Run:
        """The run with the highest score (first among equals)."""
        return max(self.runs, key=lambda r: (*r.score, -r.point))

    def runs_of(self, case: int) -> list[Run]:
        return [r for r in self.runs if r.case == case]


def _value(expr, nominal: dict, symbols: dict, where: str) -> float:
    value = sp.sympify(expr).xreplace({symbols[k]: v for k, v in nominal.items() if k in symbols})
    try:
        return float(value)
    except TypeError:
        raise ModelError(f"{where}: needs a nominal value for {', '.join(sorted(map(str, value.free_symbols)))}") \
            from None


def _vector(mapping: dict, names, nominal, symbols, where) -> np.ndarray | None:
    if not mapping:
        return None
    return np.array([_value(mapping[n], nominal, symbols, f"{where}.{n}") if n in mapping else 0.0 for n in names])


def _poles(controller) -> np.ndarray:
    """Closed-loop poles at nominal in s (regulator with integrator, and estimator), from the emitted
    controller's own matrices; a sampled-data design's z poles map back by s = ln(z) / T."""
    A, B, C, D = controller.A, controller.B, controller.C, controller.D
    K, Ki, L = controller.K, controller.Ki, controller.L
    discrete = bool(getattr(controller, "DISCRETE", False))
    n, m = B.shape
    Ap, Bp, Cp, Dp = A, B, C, D
    if getattr(controller, "DELAY", False):  # the input of the previous sample is a state: [x; u[k-1]]
        Ap = np.block([[A, B], [np.zeros((m, n + m))]])
        Bp = np.vstack([np.zeros((n, m)), np.eye(m)])
        Cp, Dp = np.hstack([C, D]), np.zeros_like(D)
    if Ki is not None:  # the pair augmented with q[k+1] = q[k] + T (y - r), or q' = y - r
        p = Ki.shape[1]
        h = controller.T if discrete else 1.0
        Ap = np.block([[Ap, np.zeros((Ap.shape[0], p))], [h * Cp, np.eye(p) if discrete else np.zeros((p, p))]])
        Bp = np.vstack([Bp, h * Dp])
        K = np.hstack([K, Ki])
    poles = [np.linalg.eigvals(Ap - Bp @ K)]
    if L is not None:
        current = bool(getattr(controller, "CURRENT_FORM", False))
        poles.append(np.linalg.eigvals(A - L @ C @ A if current else A - L @ C))
    poles = np.concatenate(poles).astype(complex)
    if discrete:
        with np.errstate(divide="ignore", invalid="ignore"):
            poles = np.log(poles) / controller.T
        # a pole at z = 0 (deadbeat; numerically a few 1e-6) maps to -inf; a sampled loop moves once per
        # sample, so a pole faster than one e-fold per sample counts as -1/T
        fast = ~np.isfinite(poles) | (poles.real < -1.0 / controller.T)
        poles = np.where(fast, -1.0 / controller.T, poles)
    return poles


def _default_step(plant, limits, output_index: int) -> float:
    """DEFAULT_STEP, made smaller when holding it would need more than half an actuator limit
    (the steady state [A B; C D] [x; u] = [0; r], least squares)."""
    A, B, C, D = plant.A, plant.B, plant.C, plant.D
    n, p = A.shape[0], C.shape[0]
    r = np.zeros(p)
    r[output_index] = 1.0
    M = np.block([[A, B], [C, D]])
    u = np.linalg.lstsq(M, np.concatenate([np.zeros(n), r]), rcond=None)[0][n:]
    step = DEFAULT_STEP
    low, high = limits
    for i, ui in enumerate(u):
        bound = min(abs(v[i]) for v in (low, high) if v is not None and np.isfinite(v[i]) and v[i] != 0) \
            if any(v is not None and np.isfinite(v[i]) and v[i] != 0 for v in (low, high)) else np.inf
        if abs(ui) * step > 0.5 * bound:
            step = float(f"{0.5 * bound / abs(ui):.1g}")
    return step


def _default_scenario(design: Design, plant, limits) -> Scenario:
    model = design.model
    follows = design.integral is not None or design.feedforward is not None
    outputs = model.outputs or model.states
    if follows:
        step = _default_step(plant, limits, 0)
        return Scenario(name=f"step of {step:g} in the reference of {outputs[0]}",
                        reference={outputs[0]: sp.Float(step)})
    state = model.states[0]
    if model.C is not None and model.C.rows:
        row = list(model.C[0, :])
        nonzero = [j for j, v in enumerate(row) if v != 0]
        if len(nonzero) == 1:
            state = model.states[nonzero[0]]
    return Scenario(name=f"initial offset of {DEFAULT_STEP:g} in {state}", initial={state: sp.Float(DEFAULT_STEP)})


def prepare(design: Design, folder, *, table: SimulationTable | None = None, requirements: Requirements | None = None,
            scenarios=None, duration=None, sample_time=None, points=None, seed=None, gains=None,
            corners=None, free_gains=None) -> Setup:
    """The setup of a campaign; keyword arguments override the model file's [simulation] table."""
    model = design.model
    if design.feedback is None and design.integral is None:
        raise ModelError("simulation needs a controller: the model has no [feedback] or [integral] design",
                         where=Where(model.source))
    table = table or model.extra.get("simulation") or SimulationTable()
    requirements = requirements or model.extra.get("requirements") or Requirements()
    nominal = model.nominal_values()
    missing = [p.name for p in model.parameters if p.nominal is None]
    if missing:
        raise ModelError(f"simulation needs a nominal value (or range) for {', '.join(missing)}",
                         where=Where(model.source, "parameters"))
    symbols = model.symbols
    notes = []
    design, free = fix_free_gains(design, free_gains)
    if free:
        notes.append("free gains fixed for the simulation (any value places the poles): "
                     + ", ".join(f"{k} = {v:g}" for k, v in free.items()))
    path = str(write_controller_module(design, folder))
    load_controller_module(path)
    sampled = getattr(design, "sampled", None) is not None
    try:
        probe = new_controller(path, None if sampled else 1.0, nominal)
    except ValueError as exc:
        raise ModelError(f"the emitted controller refuses the nominal values: {exc}", where=Where(model.source)) \
            from None
    poles = _poles(probe)
    fastest = float(np.max(np.abs(poles))) if poles.size else 1.0
    slowest = float(np.min(np.abs(poles.real))) if poles.size else 1.0
    if not slowest > 1e-12:
        slowest = fastest
        notes.append("a closed-loop pole lies on the imaginary axis at nominal values")
    duration = float(duration or table.duration or 20.0 / slowest)
    if sampled:  # the design fixes the period
        T = float(probe.T)
        if sample_time and abs(sample_time - T) > 1e-12 * T:
            raise ModelError(f"the design is sampled at {T:g} s; --sample-time {sample_time:g} does not apply")
    else:
        T = float(sample_time or table.sample_time or 0.02 / fastest)
    if duration / T > MAX_SAMPLES and not sampled:
        T = duration / MAX_SAMPLES
        notes.append(f"sample period raised to {T:.3g} s to keep {MAX_SAMPLES} samples per run")
    outputs = tuple(model.outputs) if model.C is not None and model.C.rows else tuple(model.states)
    measures_outputs = design.estimator is not None
    measured = outputs if measures_outputs else tuple(model.states)
    chosen = tuple(scenarios) if scenarios else table.scenarios
    if not chosen:
        limits_now = tuple(getattr(probe, k, None) for k in ("u_min", "u_max"))
        chosen = (_default_scenario(design, PlantSpec.from_model(model).at(nominal, nominal), limits_now),)
    cases = []
    for k, sc in enumerate(chosen):
        w = f"simulation.scenario {sc.name!r}"
        cases.append(Case(sc.name, T=T, duration=duration, index=k,
                          reference=_vector(sc.reference, outputs, nominal, symbols, w + ".reference"),
                          reference_time=_value(sc.reference_time, nominal, symbols, w),
                          initial=_vector(sc.initial, model.states, nominal, symbols, w + ".initial"),
                          disturbance=_vector(sc.disturbance, model.inputs, nominal, symbols, w + ".disturbance"),
                          disturbance_time=_value(sc.disturbance_time, nominal, symbols, w),
                          noise=_vector(sc.noise, measured, nominal, symbols, w + ".noise")))
    limits = {key: (None if getattr(requirements, key) is None
                    else _value(getattr(requirements, key), nominal, symbols, f"requirements.{key}"))
              for key in ("settling_time", "overshoot", "steady_state_error")}
    peak = {k: _value(v, nominal, symbols, f"requirements.peak_input.{k}") for k, v in requirements.peak_input.items()}
    low, high = (getattr(probe, k, None) for k in ("u_min", "u_max"))  # the limits the controller applies
    ranges = {name: (float(low[i]) if low is not None else None, float(high[i]) if high is not None else None)
              for i, name in enumerate(model.inputs)}
    seed = table.seed if seed is None else seed
    pts = mismatch_points(model, corners=table.corners if corners is None else corners,
                          samples=table.points if points is None else points, seed=seed)
    return Setup(model.name, PlantSpec.from_model(model), path, measures_outputs, outputs, tuple(model.inputs),
                 measured, tuple(cases), tuple(pts), nominal, gains or table.gains, None if sampled else T, duration,
                 limits, peak,
                 ranges, seed, tuple(notes))


def run_point(setup: Setup, index: int) -> list[Run]:
    """Every scenario at one mismatch point."""
    point = setup.points[index]
    assumed = dict(point.values) if setup.gains == "scheduled" else dict(setup.nominal)
    runs = []
    try:
        controller = new_controller(setup.module_path, setup.T, assumed)
    except ValueError as exc:  # the controller refuses these values (a validity condition fails)
        return [Run(k, index, None, [], (2, float("inf")), f"controller refused: {exc}") for k in range(len(setup.cases))]
    plant = setup.plant.at(point.values, assumed)
    for case in setup.cases:
        trace = simulate(plant, controller, case, measures_outputs=setup.measures_outputs,
                         seed=(setup.seed, index))
        rows = measure(trace, case, setup.outputs, setup.inputs, setup.limits, setup.peak_limits)
        runs.append(Run(case.index, index, trace, rows, score(rows, case.duration)))
    return runs


_SETUP: Setup | None = None  # the setup of a worker process


def _init_worker(setup: Setup) -> None:
    global _SETUP
    _SETUP = setup


def _work(index: int) -> list[Run]:
    return run_point(_SETUP, index)


def run_campaign(setup: Setup, *, jobs: int | None = None, progress=None) -> Campaign:
    """Run every scenario at every point; a process pool when there are several points and jobs > 1."""
    import concurrent.futures
    import multiprocessing

    jobs = jobs if jobs is not None else min(4, os.cpu_count() or 1)
    indices = list(range(len(setup.points)))
    start = time.perf_counter()
    runs: list[Run] = []
    workers = 1
    if jobs > 1 and len(indices) >= 4:
        methods = multiprocessing.get_all_start_methods()
        context = multiprocessing.get_context("fork" if "fork" in methods else "spawn")
        workers = min(jobs, len(indices))
        with concurrent.futures.ProcessPoolExecutor(workers, mp_context=context, initializer=_init_worker,
                                                    initargs=(setup,)) as pool:
            for result in pool.map(_work, indices, chunksize=max(1, len(indices) // (4 * workers))):
                runs.extend(result)
                if progress:
                    progress(1)
    else:
        for index in indices:
            runs.extend(run_point(setup, index))
            if progress:
                progress(1)
    return Campaign(setup, runs, time.perf_counter() - start, workers, list(setup.notes))


def with_points(setup: Setup, points) -> Setup:
    """The same setup at other points (for tests and for re-running one point)."""
    return replace(setup, points=tuple(points))
