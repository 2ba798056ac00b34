"""Gain schedules: every designed gain over a grid of one or two parameters.

The other parameters stay at their nominal values. Grid points where a
``valid_when`` condition fails (or a gain is not a finite real number) are
marked invalid and left empty in the table: they are never filled in.

>>> import sympy as sp
>>> from symgain.model import Model, Parameter, TargetSpec
>>> from symgain.design import derive
>>> m = Parameter.declare("m", sign="positive", range=(1, 3), unit="kg")
>>> model = Model(name="cart", parameters=(m,), states=("p", "v"), inputs=("F",),
...               A=sp.Matrix([[0, 1], [0, 0]]), B=sp.Matrix([[0], [1 / m.symbol]]),
...               feedback=TargetSpec("poles", {"poles": (-1, -2)}))
>>> axis = parse_axis("m=1:3:3", model)
>>> axis.values.tolist()
[1.0, 2.0, 3.0]
>>> sched = compute_schedule(derive(model), [axis])
>>> print(schedule_csv(sched), end="")
m [kg],K_F_p,K_F_v,valid,failed_conditions
1,2,3,yes,
2,4,6,yes,
3,6,9,yes,
"""
from __future__ import annotations

import io
import csv
from dataclasses import dataclass, field

import numpy as np

from ..design import Design
from ..errors import ModelError, Where, printable
from ..model.definition import _shown
from ..model import Model
from .evaluate import GainEntry, GainEvaluator

__all__ = ["GridAxis", "Schedule", "parse_axis", "compute_schedule", "schedule_csv", "DEFAULT_POINTS",
           "MAX_AXIS_POINTS", "MAX_GRID_POINTS"]

DEFAULT_POINTS = 11
MAX_AXIS_POINTS = 100_000  # grid points along one scheduled parameter
MAX_GRID_POINTS = 40_000  # grid points of a two-parameter schedule (the error grid is 64 times finer)


@dataclass(frozen=True)
class GridAxis:
    """One scheduled parameter: its name, unit and grid values (evenly spaced)."""

    name: str
    values: np.ndarray
    unit: str = ""

    @property
    def label(self) -> str:
        from ..emit.escape import csv_text

        return csv_text(f"{self.name} [{self.unit}]" if self.unit else self.name)


@dataclass
class Schedule:
    """Gains on a grid: ``gains[k, i(, j)]`` for entry k; ``valid[i(, j)]``."""

    design: Design
    axes: list[GridAxis]
    entries: list[GainEntry]
    gains: np.ndarray
    valid: np.ndarray
    reasons: dict = field(default_factory=dict)  # grid index tuple -> failed conditions text

    @property
    def fixed(self) -> dict[str, float]:
        """The parameters held at nominal."""
        names = {a.name for a in self.axes}
        return {k: v for k, v in self.design.model.nominal_values().items() if k not in names}


def _number(text: str, where: Where) -> float:
    try:
        value = float(text)
    except ValueError:
        raise ModelError(f"expected a number, found {_shown(text)}", where=where) from None
    if not np.isfinite(value) or abs(value) > 1e300:
        raise ModelError(f"expected a finite number, found {_shown(text)}", where=where)
    return value


def parse_axis(text: str, model: Model) -> GridAxis:
    """``NAME=LOW:HIGH:COUNT``, ``NAME=LOW:HIGH`` or ``NAME`` (declared range, 11 points)."""
    if not isinstance(text, str):
        raise ModelError(f"a grid is text such as 'm=1:2:11', found {type(text).__name__}")
    where = Where(key=f"--over {printable(text, 60)}")
    name, _, spec = text.partition("=")
    name = name.strip()
    try:
        param = model.parameter(name)
    except KeyError:
        raise ModelError(f"unknown parameter {_shown(name)}; declared: "
                         + ", ".join(p.name for p in model.parameters), where=where) from None
    pieces = [p.strip() for p in spec.split(":")] if spec else []
    if len(pieces) not in (0, 2, 3):
        raise ModelError("expected NAME=LOW:HIGH:COUNT", where=where)
    if pieces:
        low, high = _number(pieces[0], where), _number(pieces[1], where)
    elif param.range is not None:
        low, high = param.range
    else:
        raise ModelError(f"parameter {name!r} has no declared range; give NAME=LOW:HIGH:COUNT", where=where)
    count = DEFAULT_POINTS
    if len(pieces) == 3:
        try:
            count = int(pieces[2]) if len(pieces[2]) <= 12 else MAX_AXIS_POINTS + 1
        except ValueError:
            raise ModelError(f"COUNT must be an integer, found {_shown(pieces[2])}", where=where) from None
    if count < 2 or count > MAX_AXIS_POINTS:
        raise ModelError(f"COUNT must be at least 2 and at most {MAX_AXIS_POINTS}, found {_shown(pieces[2])}", where=where)
    if not low < high:
        raise ModelError(f"LOW must be below HIGH, found {low:g}:{high:g}", where=where)
    values = np.linspace(low, high, count)
    if not np.all(np.diff(values) > 0) or not np.isfinite(values[-1] - values[0]):
        raise ModelError(f"the grid {low:g}:{high:g}:{count} is not resolvable in floating point", where=where)
    return GridAxis(name, values, param.unit)


def compute_schedule(design: Design, axes: list[GridAxis], *, evaluator: GainEvaluator | None = None,
                     progress=None) -> Schedule:
    """Evaluate every gain on the grid spanned by ``axes`` (one or two of them).

    ``progress``, when given, is called with the number of grid points done after each chunk.
    """
    if not 1 <= len(axes) <= 2:
        raise ModelError(f"a schedule runs over one or two parameters, found {len(axes)}")
    if len(axes) == 2 and axes[0].name == axes[1].name:
        raise ModelError(f"parameter {axes[0].name!r} is scheduled twice")
    if len(axes) == 2 and axes[0].values.size * axes[1].values.size > MAX_GRID_POINTS:
        raise ModelError(f"a two-parameter grid of {axes[0].values.size} x {axes[1].values.size} points; at "
                         f"most {MAX_GRID_POINTS} points in all")
    evaluator = evaluator or GainEvaluator(design)
    mesh = np.meshgrid(*(a.values for a in axes), indexing="ij")
    shape = mesh[0].shape
    flat = [g.ravel() for g in mesh]
    n = flat[0].size
    gains = np.empty((len(evaluator.entries), n))
    valid = np.empty(n, dtype=bool)
    chunk = 65536
    for start in range(0, n, chunk):
        stop = min(n, start + chunk)
        g, v = evaluator({a.name: f[start:stop] for a, f in zip(axes, flat)})
        gains[:, start:stop] = g
        valid[start:stop] = v
        if progress is not None:
            progress(stop - start)
    gains = gains.reshape((len(evaluator.entries), *shape))
    valid = valid.reshape(shape)
    reasons = {}
    for index in zip(*np.nonzero(~valid)):
        point = {a.name: float(a.values[i]) for a, i in zip(axes, index)}
        failed = evaluator.failed_conditions(point)
        reasons[tuple(int(i) for i in index)] = "; ".join(failed) or "gain not a finite real number"
    return Schedule(design, list(axes), evaluator.entries, gains, valid, reasons)


def _fmt(x: float) -> str:
    return f"{x:.12g}"


def schedule_csv(schedule: Schedule, progress=None) -> str:
    """The table: one row per grid point; invalid points have empty gain cells and the reason.

    ``progress``, when given, is called with the number of rows written, every 4096 rows.
    """
    out = io.StringIO()
    writer = csv.writer(out, lineterminator="\n")
    writer.writerow([a.label for a in schedule.axes] + [e.identifier for e in schedule.entries]
                    + ["valid", "failed_conditions"])
    for n, index in enumerate(np.ndindex(schedule.valid.shape), 1):
        if progress is not None and n % 4096 == 0:
            progress(4096)
        coords = [_fmt(a.values[i]) for a, i in zip(schedule.axes, index)]
        ok = bool(schedule.valid[index])
        cells = [_fmt(schedule.gains[(k, *index)]) if ok else "" for k in range(len(schedule.entries))]
        writer.writerow(coords + cells + ["yes" if ok else "no", schedule.reasons.get(index, "")])
    if progress is not None:
        progress(schedule.valid.size % 4096)
    return out.getvalue()
