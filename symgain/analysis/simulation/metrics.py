"""What a run achieved, and whether it meets the requirements.

For each output the scenario moves (a reference step, or an initial offset
that shows in the output; with neither, every output, for a disturbance or
noise), measured from the moment of the step:

* final value: the mean over the last 5 % of the run;
* settling time (2 %, common practice): the last time the output lies
  outside the band of 2 % of the move around the final value; for an output
  that is not moved, 2 % of its largest deviation. An output still outside
  the band in the last 5 % of the run has not settled (infinite);
* overshoot: the largest excursion beyond the final value as a fraction of
  the move (common practice), only for moved outputs;
* steady-state error: |target - final value|, in the output's units;
* per input: the peak |u| (the controller's input, a deviation from the
  equilibrium for models from equations of motion) and the time spent at
  a limit.

>>> t = np.linspace(0.0, 10.0, 1001)
>>> y = 1.0 - np.exp(-t)                        # first order, time constant 1 s
>>> metrics = output_metrics(t, y, start=0.0, target=1.0, event_time=0.0, moved=True)
>>> round(metrics["settling_time"], 1), round(metrics["overshoot"], 4)   # 2 % settling: 4 time constants
(3.9, 0.0)
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

__all__ = ["Metric", "output_metrics", "measure", "score"]

BAND = 0.02  # 2 % settling band
TAIL = 0.05  # the final value is the mean of the last 5 % of the run


@dataclass(frozen=True)
class Metric:
    """One row of a result table: value against limit (``None``: no limit, reported only)."""

    name: str  # settling_time, overshoot, steady_state_error, peak_input, time_saturated, settles
    signal: str  # output or input name
    value: float
    limit: float | None = None
    unit: str = ""

    @property
    def passed(self) -> bool | None:
        if self.limit is None:
            return None
        return bool(np.isfinite(self.value) and self.value <= self.limit * (1 + 1e-9) + 1e-15)

    @property
    def ratio(self) -> float:
        """value / limit (infinite for a failed run; 0 without a limit)."""
        if self.limit is None:
            return 0.0
        if not np.isfinite(self.value):
            return float("inf")
        return self.value / self.limit if self.limit > 0 else (0.0 if self.value <= 0 else float("inf"))


def output_metrics(t, y, *, start: float, target: float, event_time: float, moved: bool) -> dict:
    """Settling time, overshoot, steady-state error and final value of one output."""
    t, y = np.asarray(t, dtype=float), np.asarray(y, dtype=float)
    if not np.all(np.isfinite(y)):
        return {"settling_time": float("inf"), "overshoot": float("inf") if moved else None,
                "steady_state_error": float("inf"), "final": float("nan"), "settled": False,
                "tail_spread": float("inf")}
    after = t >= event_time - 1e-12
    t, y = t[after], y[after]
    tail = max(5, int(np.ceil(TAIL * y.size)))
    final = float(np.mean(y[-tail:]))
    move = final - start
    if moved and abs(move) < 1e-9 * max(1.0, abs(target - start)):
        move = target - start
    scale = abs(move) if moved else float(np.max(np.abs(y - final)))
    band = BAND * scale
    outside = np.flatnonzero(np.abs(y - final) > band + 1e-15)
    spread = float(np.max(np.abs(y[-tail:] - final))) / band if band > 0 else 0.0  # <= 1: settled
    if outside.size == 0:
        settling, settled = 0.0, True
    elif outside[-1] >= y.size - tail:
        settling, settled = float("inf"), False
    else:
        settling, settled = float(t[outside[-1] + 1] - event_time), True
    overshoot = None
    if moved:
        overshoot = float(max(0.0, np.max(np.sign(move) * (y - final)) / abs(move))) if move else 0.0
    return {"settling_time": settling, "overshoot": overshoot, "steady_state_error": abs(target - final),
            "final": final, "settled": settled, "tail_spread": spread}


def measure(trace, case, outputs, inputs, requirements: dict, peak_limits: dict) -> list[Metric]:
    """The result table of one run. ``requirements``: settling_time, overshoot, steady_state_error
    limits (floats or None); ``peak_limits``: input name -> limit."""
    rows: list[Metric] = []
    ref = np.zeros(len(outputs)) if case.reference is None else case.reference
    y0 = trace.y[0]
    moved_ref = np.abs(ref) > 0
    moved_initial = np.abs(y0) > 1e-12
    tracked = [j for j in range(len(outputs)) if moved_ref[j] or moved_initial[j]] or list(range(len(outputs)))
    for j in tracked:
        if moved_ref[j]:
            event, start_index = case.reference_time, int(np.searchsorted(trace.t, case.reference_time - 1e-12))
            start, moved = float(trace.y[min(start_index, len(trace.t) - 1), j]), True
            target = float(ref[j])
        elif moved_initial[j]:
            event, start, moved, target = 0.0, float(y0[j]), True, 0.0
        else:
            event = case.disturbance_time if case.disturbance is not None and np.any(case.disturbance) else 0.0
            start, moved, target = 0.0, False, 0.0
        if trace.diverged:
            om = output_metrics(trace.t, np.full_like(trace.t, np.nan), start=start, target=target,
                                event_time=event, moved=moved)
        else:
            om = output_metrics(trace.t, trace.y[:, j], start=start, target=target, event_time=event, moved=moved)
        name = outputs[j]
        spread = om["tail_spread"] if not om["settled"] else min(om["tail_spread"], 1.0)
        rows.append(Metric("settles", name, spread, 1.0))  # largest swing in the last 5 % / the 2 % band
        rows.append(Metric("settling_time", name, om["settling_time"], requirements.get("settling_time"), "s"))
        if om["overshoot"] is not None:
            rows.append(Metric("overshoot", name, om["overshoot"], requirements.get("overshoot")))
        rows.append(Metric("steady_state_error", name, om["steady_state_error"],
                           requirements.get("steady_state_error")))
    u = np.where(np.isfinite(trace.u), trace.u, 0.0)
    for i, name in enumerate(inputs):
        peak = float("inf") if trace.diverged else float(np.max(np.abs(u[:, i]))) if u.size else 0.0
        rows.append(Metric("peak_input", name, peak, peak_limits.get(name)))
        rows.append(Metric("time_saturated", name, float(np.sum(trace.saturated[:, i]) * case.T), None, "s"))
    return rows


def score(rows: list[Metric], duration: float) -> tuple[int, float]:
    """How bad a run is, for ranking: (tier, size). Tier 1: an output does not settle (size: its
    largest swing in the last 5 % of the run over the 2 % band); tier 0: the largest value/limit
    (above 1 fails), or without limits the slowest settling time over the run length."""
    unsettled = [r.value for r in rows if r.name == "settles" and not r.passed]
    if unsettled:
        return 1, max(unsettled)
    ratios = [r.ratio for r in rows if r.limit is not None and r.name != "settles"]
    if ratios:
        return 0, max(ratios)
    return 0, max([r.value / duration for r in rows if r.name == "settling_time"] or [0.0])
