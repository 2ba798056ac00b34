"""Model-file keys for the controller that runs: ``[discrete]``, ``[input_limits]``, anti-windup.

``[discrete]`` makes the design sampled-data (see :mod:`symgain.design.discretize`
and :mod:`symgain.design.sampled`); ``[input_limits]`` and the anti-windup
keys of ``[integral]`` shape the emitted controller only (the gains do not
depend on them).

>>> import sympy as sp
>>> T = sp.Symbol("T", positive=True)
>>> read_sampling({"sample_time": "T", "method": "zoh"}, {"T": T}).period
T
>>> read_sampling({"sample_time": 0}, {})
Traceback (most recent call last):
...
symgain.errors.ModelError: discrete.sample_time: must be positive, found 0
>>> read_input_limits({"F": {"min": "-40", "max": "40"}}, ("F",), {})[0]
('F', -40, 40, None)
"""
from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import sympy as sp

from ..errors import ModelError, Where
from .definition import Z, TargetSpec
from .expressions import parse_expression

__all__ = ["Sampling", "read_sampling", "read_input_limits", "read_anti_windup", "is_z_target",
           "DISCRETE_KEYS", "ANTI_WINDUP_KEYS", "METHODS"]

DISCRETE_KEYS = {"sample_time", "method", "compute_delay", "delay_poles", "estimator_form"}
ANTI_WINDUP_KEYS = {"anti_windup", "tracking_time"}
LIMIT_KEYS = {"min", "max", "rate"}
METHODS = ("zoh", "euler", "tustin", "series")  # the holds of symgain.design.discretize


def _check_keys(table: dict, allowed: set[str], where: Where) -> None:
    unknown = sorted(set(table) - allowed)
    if unknown:
        raise ModelError(f"unknown key {unknown[0]!r}; expected one of {', '.join(sorted(allowed))}", where=where)


def is_z_target(spec: TargetSpec) -> bool:
    """True for the targets that only make sense in z (z poles, deadbeat, a polynomial in z).

    >>> is_z_target(TargetSpec("polynomial", {"polynomial": Z**2}))
    True
    """
    if spec.kind in ("z_poles", "deadbeat"):
        return True
    return spec.kind == "polynomial" and Z in sp.sympify(spec.values["polynomial"]).free_symbols


@dataclass(frozen=True)
class Sampling:
    """How the controller is sampled: period T (a number or a declared parameter) and the hold."""

    period: sp.Expr
    method: str = "zoh"  # zoh | euler | tustin | series
    compute_delay: bool = False
    estimator_form: str = "prediction"  # prediction | current
    delay_poles: tuple = ()  # z poles of the delay states (compute_delay); () means every one at z = 0


def _choice(table: dict, key: str, choices: tuple[str, ...], default: str, where: Where) -> str:
    value = table.get(key, default)
    if value not in choices:
        raise ModelError(f"{key} must be one of {', '.join(choices)}, found {value!r}", where=where.child(key))
    return value


def read_sampling(table: Any, symbols: dict, where: Where | None = None) -> Sampling:
    """The ``[discrete]`` table."""
    where = where or Where(key="discrete")
    if not isinstance(table, dict):
        raise ModelError("must be a table", where=where)
    _check_keys(table, DISCRETE_KEYS, where)
    if "sample_time" not in table:
        raise ModelError("needs sample_time = a number or a declared parameter", where=where)
    period = parse_expression(table["sample_time"], symbols, where=where.child("sample_time"))
    if period.is_number and not period.is_positive or period.is_positive is False:
        raise ModelError(f"must be positive, found {period}", where=where.child("sample_time"))
    if not period.is_number and not (isinstance(period, sp.Symbol) and period.is_positive):
        raise ModelError(f"must be a number or one declared parameter with sign = \"positive\", found {period}",
                         where=where.child("sample_time"))
    delay = table.get("compute_delay", False)
    if not isinstance(delay, bool):
        raise ModelError(f"must be true or false, found {delay!r}", where=where.child("compute_delay"))
    poles = _delay_poles(table, delay, symbols, where)
    return Sampling(period, _choice(table, "method", METHODS, "zoh", where), delay,
                    _choice(table, "estimator_form", ("prediction", "current"), "prediction", where), poles)


def _delay_poles(table: dict, delay: bool, symbols: dict, where: Where) -> tuple:
    """``delay_poles``: the z poles given to the delay states (only with compute_delay = true).

    >>> _delay_poles({"delay_poles": ["0.1"]}, True, {}, Where(key="discrete"))
    (1/10,)
    """
    if "delay_poles" not in table:
        return ()
    if not delay:
        raise ModelError("delay_poles needs compute_delay = true", where=where.child("delay_poles"))
    values = table["delay_poles"]
    if not isinstance(values, list) or not values:
        raise ModelError("must be a list of z poles, one per input, such as [\"0\"]", where=where.child("delay_poles"))
    out = tuple(parse_expression(v, symbols, where=where.child("delay_poles")) for v in values)
    for v in out:
        if v.is_number and not v.is_real:
            raise ModelError(f"a delay pole must be real, found {v}", where=where.child("delay_poles"))
    return out


def read_input_limits(table: Any, inputs: tuple[str, ...], symbols: dict,
                      where: Where | None = None) -> tuple[tuple[str, sp.Expr | None, sp.Expr | None,
                                                               sp.Expr | None], ...]:
    """``[input_limits]``: per input name ``{ min, max, rate }`` (any may be left out)."""
    where = where or Where(key="input_limits")
    if not isinstance(table, dict):
        raise ModelError("must be a table", where=where)
    _check_keys(table, set(inputs), where)
    out = []
    for name in inputs:
        spec = table.get(name)
        if spec is None:
            continue
        iw = where.child(name)
        if not isinstance(spec, dict):
            raise ModelError("must be a table such as { min = \"-40\", max = \"40\" }", where=iw)
        _check_keys(spec, LIMIT_KEYS, iw)
        low, high, rate = (parse_expression(spec[k], symbols, where=iw.child(k)) if k in spec else None
                           for k in ("min", "max", "rate"))
        if low is not None and high is not None and (high - low).is_negative:
            raise ModelError(f"min {low} lies above max {high}", where=iw)
        if rate is not None and rate.is_positive is False:
            raise ModelError(f"rate must be positive, found {rate}", where=iw.child("rate"))
        out.append((name, low, high, rate))
    return tuple(out)


def read_anti_windup(table: Any, symbols: dict, where: Where | None = None) -> dict | None:
    """The anti-windup keys of ``[integral]``, removed from the target table's view."""
    if not isinstance(table, dict) or not (set(table) & ANTI_WINDUP_KEYS):
        return None
    where = where or Where(key="integral")
    method = _choice(table, "anti_windup", ("clamp", "back_calculation"), "clamp", where)
    out: dict = {"method": method, "tracking_time": None}
    if "tracking_time" in table:
        out["tracking_time"] = parse_expression(table["tracking_time"], symbols, where=where.child("tracking_time"))
    return out
