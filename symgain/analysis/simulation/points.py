"""Where the true plant is sampled: nominal, the corners of the declared ranges, seeded Latin-hypercube points.

Only plant parameters with a range of nonzero width vary; design knobs and
fixed values stay at nominal. Corners are taken for up to six varied
parameters (64 corners); beyond that only the sampled points cover the box.
The Latin-hypercube points come from ``scipy.stats.qmc.LatinHypercube`` with
the given seed, so a run is repeatable.

>>> import sympy as sp
>>> from symgain.model import Model, Parameter
>>> m = Parameter.declare("m", sign="positive", range=(1, 3))
>>> c = Parameter.declare("c", sign="nonnegative", range=(0, 2))
>>> model = Model(name="cart", parameters=(m, c), states=("p", "v"), inputs=("F",),
...               A=sp.Matrix([[0, 1], [0, -c.symbol / m.symbol]]), B=sp.Matrix([[0], [1 / m.symbol]]))
>>> points = mismatch_points(model, samples=3, seed=1)
>>> [p.kind for p in points]
['nominal', 'corner', 'corner', 'corner', 'corner', 'sampled', 'sampled', 'sampled']
>>> points[1].label
'm = 1, c = 0'
>>> all(1 <= p.values["m"] <= 3 for p in points)
True
"""
from __future__ import annotations

import itertools
from dataclasses import dataclass

from scipy.stats import qmc

__all__ = ["Point", "mismatch_points", "varied_parameters", "MAX_CORNER_PARAMETERS"]

MAX_CORNER_PARAMETERS = 6


@dataclass(frozen=True)
class Point:
    """True parameter values of the plant for one run."""

    kind: str  # nominal, corner, sampled
    values: dict
    label: str


def varied_parameters(model) -> list:
    """Plant parameters with a declared range of nonzero width."""
    return [p for p in model.parameters if p.role == "plant" and p.range and p.range[0] < p.range[1]]


def _label(values: dict, nominal: dict, units: dict) -> str:
    diff = [f"{k} = {v:.4g}" + (f" {units[k]}" if units.get(k) else "") for k, v in values.items()
            if v != nominal.get(k)]
    return ", ".join(diff) if diff else "nominal"


def mismatch_points(model, *, corners: bool = True, samples: int = 16, seed: int = 0) -> list[Point]:
    """Nominal first, then the corners, then ``samples`` Latin-hypercube points of the varied ranges."""
    nominal = model.nominal_values()
    units = {p.name: p.unit for p in model.parameters}
    varied = varied_parameters(model)
    points = [Point("nominal", dict(nominal), "nominal")]
    if not varied:
        return points
    if corners and len(varied) <= MAX_CORNER_PARAMETERS:
        for combo in itertools.product(*[p.range for p in varied]):
            values = dict(nominal, **{p.name: float(v) for p, v in zip(varied, combo)})
            points.append(Point("corner", values, _label(values, nominal, units)))
    if samples > 0:
        unit_box = qmc.LatinHypercube(d=len(varied), seed=seed).random(samples)
        lows, highs = [p.range[0] for p in varied], [p.range[1] for p in varied]
        for row in qmc.scale(unit_box, lows, highs):
            values = dict(nominal, **{p.name: float(v) for p, v in zip(varied, row)})
            points.append(Point("sampled", values, _label(values, nominal, units)))
    return points
