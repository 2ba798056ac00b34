"""The model file's simulation tables: scenarios and requirements.

``[simulation]`` sets the run (duration, controller sample period, how many
mismatch points) and lists scenarios; ``[requirements]`` gives the limits a
run must meet. (The actuator's ``[input_limits]`` belong to the controller:
:mod:`symgain.sampling_keys`.)
Every value is a TOML number or an expression in the declared parameters,
evaluated at their nominal values when the simulation starts.

>>> import sympy as sp
>>> m = sp.Symbol("m", positive=True)
>>> tables = read_simulation_tables(
...     {"simulation": {"duration": 5, "scenario": [{"name": "move", "reference": {"p": 0.5}}]},
...      "requirements": {"settling_time": 2.0, "peak_input": "4*m"}},
...     {"m": m}, ("p", "v"), ("F",), ("p",), "cart.toml")
>>> tables["simulation"].duration, tables["simulation"].scenarios[0].reference
(5.0, {'p': 1/2})
>>> tables["requirements"].peak_input
{'F': 4*m}
>>> read_simulation_tables({"requirements": {"rise": 1}}, {}, ("p",), ("F",), (), "cart.toml")
Traceback (most recent call last):
...
symgain.errors.ModelError: cart.toml: requirements: unknown key 'rise'; expected one of overshoot, peak_input, settling_time, steady_state_error
"""
from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import sympy as sp

from ..errors import ModelError, Where
from .expressions import parse_expression

__all__ = ["Scenario", "SimulationTable", "Requirements", "read_simulation_tables", "GAINS_CHOICES"]

SIMULATION_KEYS = {"duration", "sample_time", "points", "seed", "gains", "corners", "scenario"}
SCENARIO_KEYS = {"name", "reference", "reference_time", "initial", "disturbance", "disturbance_time",
                 "noise"}
REQUIREMENT_KEYS = {"settling_time", "overshoot", "steady_state_error", "peak_input"}
GAINS_CHOICES = ("nominal", "scheduled")


@dataclass(frozen=True)
class Scenario:
    """One closed-loop run: what moves the loop, in the linear model's deviation coordinates.

    ``reference`` (output -> step size, applied at ``reference_time``),
    ``initial`` (state -> offset at t = 0), ``disturbance`` (input -> step
    added to the plant input at ``disturbance_time``), ``noise`` (measured
    output, or state when the controller reads the state -> standard deviation
    of seeded Gaussian noise). Values are expressions until evaluated.
    """

    name: str
    reference: dict = field(default_factory=dict)
    reference_time: Any = 0
    initial: dict = field(default_factory=dict)
    disturbance: dict = field(default_factory=dict)
    disturbance_time: Any = 0
    noise: dict = field(default_factory=dict)


@dataclass(frozen=True)
class SimulationTable:
    """The ``[simulation]`` table; ``None`` means the default chosen from the design."""

    duration: float | None = None
    sample_time: float | None = None
    points: int = 16
    seed: int = 0
    gains: str = "nominal"
    corners: bool = True
    scenarios: tuple[Scenario, ...] = ()


@dataclass(frozen=True)
class Requirements:
    """Limits every run must meet (``None``: not required); peak_input maps input -> limit."""

    settling_time: Any = None
    overshoot: Any = None
    steady_state_error: Any = None
    peak_input: dict = field(default_factory=dict)

    def any(self) -> bool:
        return any(v is not None for v in (self.settling_time, self.overshoot, self.steady_state_error)) \
            or bool(self.peak_input)


def _table(value, where: Where, allowed: set[str]) -> dict:
    if not isinstance(value, dict):
        raise ModelError("must be a table", where=where)
    unknown = sorted(set(value) - allowed)
    if unknown:
        raise ModelError(f"unknown key {unknown[0]!r}; expected one of {', '.join(sorted(allowed))}",
                         where=where)
    return value


def _expr(value, symbols, where: Where) -> sp.Expr:
    if isinstance(value, bool):
        raise ModelError(f"must be a number or an expression, found {value!r}", where=where)
    return parse_expression(value, symbols, where=where)


def _number(value, where: Where, *, integer=False, positive=True):
    ok = isinstance(value, (int, float)) and not isinstance(value, bool) and (not integer or isinstance(value, int))
    if not ok or (positive and value <= 0) or value < 0:
        kind = "a whole number" if integer else "a number"
        raise ModelError(f"must be {kind}{' above zero' if positive else ' (zero or more)'}, found {value!r}",
                         where=where)
    return int(value) if integer else float(value)


def _named(value, names, label: str, symbols, where: Where) -> dict:
    table = _table(value, where, set(names))
    if not names:
        raise ModelError(f"the plant has no {label}s to name here", where=where)
    return {str(k): _expr(v, symbols, where.child(str(k))) for k, v in table.items()}


def _scenario(value, k: int, symbols, states, inputs, outputs, where: Where) -> Scenario:
    table = _table(value, where, SCENARIO_KEYS)
    measured = tuple(dict.fromkeys((*outputs, *states)))
    name = table.get("name", f"scenario {k + 1}")
    if not isinstance(name, str) or not name.strip():
        raise ModelError(f"name must be text, found {name!r}", where=where.child("name"))
    return Scenario(
        name=name.strip(),
        reference=_named(table.get("reference", {}), outputs or states, "output", symbols, where.child("reference")),
        reference_time=_expr(table.get("reference_time", 0), symbols, where.child("reference_time")),
        initial=_named(table.get("initial", {}), states, "state", symbols, where.child("initial")),
        disturbance=_named(table.get("disturbance", {}), inputs, "input", symbols, where.child("disturbance")),
        disturbance_time=_expr(table.get("disturbance_time", 0), symbols, where.child("disturbance_time")),
        noise=_named(table.get("noise", {}), measured, "output", symbols, where.child("noise")))


def _simulation(value, symbols, states, inputs, outputs, where: Where) -> SimulationTable:
    table = _table(value, where, SIMULATION_KEYS)
    kw: dict[str, Any] = {}
    for key in ("duration", "sample_time"):
        if key in table:
            kw[key] = _number(table[key], where.child(key))
    if "points" in table:
        kw["points"] = _number(table["points"], where.child("points"), integer=True, positive=False)
    if "seed" in table:
        kw["seed"] = _number(table["seed"], where.child("seed"), integer=True, positive=False)
    if "gains" in table:
        if table["gains"] not in GAINS_CHOICES:
            raise ModelError(f"gains must be one of {', '.join(GAINS_CHOICES)}, found {table['gains']!r}",
                             where=where.child("gains"))
        kw["gains"] = table["gains"]
    if "corners" in table:
        if not isinstance(table["corners"], bool):
            raise ModelError(f"corners must be true or false, found {table['corners']!r}", where=where.child("corners"))
        kw["corners"] = table["corners"]
    scenarios = table.get("scenario", [])
    if isinstance(scenarios, dict):
        scenarios = [scenarios]
    if not isinstance(scenarios, list):
        raise ModelError("scenario must be a list of tables ([[simulation.scenario]])", where=where.child("scenario"))
    kw["scenarios"] = tuple(_scenario(s, k, symbols, states, inputs, outputs, where.child("scenario").at(k))
                            for k, s in enumerate(scenarios))
    names = [s.name for s in kw["scenarios"]]
    if len(set(names)) != len(names):
        raise ModelError(f"scenario names repeat: {', '.join(names)}", where=where.child("scenario"))
    return SimulationTable(**kw)


def _requirements(value, symbols, inputs, where: Where) -> Requirements:
    table = _table(value, where, REQUIREMENT_KEYS)
    kw: dict[str, Any] = {}
    for key in ("settling_time", "overshoot", "steady_state_error"):
        if key in table:
            kw[key] = _expr(table[key], symbols, where.child(key))
    if "peak_input" in table:
        peak = table["peak_input"]
        if isinstance(peak, dict):
            kw["peak_input"] = _named(peak, inputs, "input", symbols, where.child("peak_input"))
        else:
            value = _expr(peak, symbols, where.child("peak_input"))
            kw["peak_input"] = {name: value for name in inputs}
    return Requirements(**kw)


def read_simulation_tables(data: dict, symbols: dict, states, inputs, outputs, file: str) -> dict:
    """``simulation`` and ``requirements`` entries for ``Model.extra`` (only those given)."""
    top = Where(file)
    out: dict[str, Any] = {}
    if "simulation" in data:
        out["simulation"] = _simulation(data["simulation"], symbols, states, inputs, outputs, top.child("simulation"))
    if "requirements" in data:
        out["requirements"] = _requirements(data["requirements"], symbols, inputs, top.child("requirements"))
    return out
