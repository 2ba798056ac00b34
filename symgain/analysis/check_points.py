"""What a numeric check reports, and the numeric helpers shared by the continuous and sampled checks.

>>> report = CheckReport(1e-6, 0, {"feedback": [PointResult(0, {"m": 1.0}, "ok", 0.0, 0.0)]})
>>> report.passed, report.counts("feedback")
(True, {'ok': 1, 'fail': 0, 'skipped': 0})
"""
from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from ..errors import ModelError, Where
from ..model import Model

__all__ = ["PointResult", "CheckReport", "sample_points", "steady_state_error"]


@dataclass(frozen=True)
class PointResult:
    index: int
    values: dict
    status: str  # "ok", "fail" or "skipped"
    gain_error: float | None  # relative difference from scipy's place_poles (None: not comparable)
    closed_loop_error: float | None  # normalized coefficient error of the closed loop vs the target
    reason: str = ""


@dataclass(frozen=True)
class CheckReport:
    tolerance: float
    seed: int
    points: dict = field(default_factory=dict)  # part -> list[PointResult]

    @property
    def passed(self) -> bool:
        """No point failed and every part had at least one point actually checked."""
        return all(p.status != "fail" for pts in self.points.values() for p in pts) and all(
            any(p.status == "ok" for p in pts) for pts in self.points.values())

    def counts(self, part: str) -> dict[str, int]:
        out = {"ok": 0, "fail": 0, "skipped": 0}
        for p in self.points[part]:
            out[p.status] += 1
        return out


def sample_points(model: Model, n_points: int = 20, seed: int = 0) -> list[dict[str, float]]:
    """The nominal point first, then seeded uniform samples inside the declared ranges."""
    missing = [p.name for p in model.parameters if p.nominal is None]
    if missing:
        raise ModelError("has neither range nor nominal value; the check needs one",
                         where=Where(model.source, f"parameters.{missing[0]}"))
    rng = np.random.default_rng(seed)
    points = [model.nominal_values()]
    for _ in range(max(0, n_points - 1)):
        point = {}
        for p in model.parameters:
            point[p.name] = float(rng.uniform(*p.range)) if p.range else p.nominal
        points.append(point)
    return points


def steady_state_error(A, B, C, D, K, N) -> float:
    """max |G(0) - I| of the closed loop x' = (A - B K) x + B N r, y = (C - D K) x + D N r.

    >>> A = np.array([[0.0, 1.0], [0.0, 0.0]]); B = np.array([[0.0], [1.0]]); C = np.array([[1.0, 0.0]])
    >>> steady_state_error(A, B, C, None, np.array([[6.0, 5.0]]), np.array([[6.0]])) < 1e-12
    True
    """
    D = np.zeros((C.shape[0], B.shape[1])) if D is None else D
    dc = -(C - D @ K) @ np.linalg.solve(A - B @ K, B @ N) + D @ N
    return float(np.max(np.abs(dc - np.eye(dc.shape[0]))))


def _normalized_error(char, target) -> float:
    """Max difference of coefficients after scaling s by the size of the target roots."""
    n = len(target) - 1
    r = abs(target[-1]) ** (1.0 / n) if target[-1] != 0 else max(1.0, np.max(np.abs(np.roots(target))))
    r = r or 1.0
    scale = r ** np.arange(n + 1)
    t = np.asarray(target) / scale
    c = np.asarray(char) / scale
    return float(np.max(np.abs(c - t)) / np.max(np.abs(t)))


def _distinct(roots, rel=1e-3) -> bool:
    scale = max(1.0, float(np.max(np.abs(roots))))
    for i in range(len(roots)):
        for j in range(i + 1, len(roots)):
            if abs(roots[i] - roots[j]) < rel * scale:
                return False
    return True


def _real(x):
    try:
        x = np.array(x, dtype=complex)
    except (TypeError, ValueError, ZeroDivisionError, OverflowError):
        return None
    if not np.all(np.isfinite(x)) or np.max(np.abs(x.imag), initial=0) > 1e-9 * max(1.0, np.max(np.abs(x))):
        return None
    return x.real
