"""Numeric cross-check of a design: numbers only (numpy, scipy).

At sampled parameter points, the closed-form gains are evaluated and
compared with ``scipy.signal.place_poles`` (when the target poles are
distinct and the gain is unique) and the closed-loop characteristic
polynomial with the target polynomial. This module shares no code with the
symbolic derivation: it is a second opinion, not the same code run twice.

>>> import sympy as sp
>>> from symgain.model import Model, Parameter, TargetSpec
>>> from symgain.design import derive
>>> m = Parameter.declare("m", sign="positive", range=(1, 2))
>>> model = Model(name="cart", parameters=(m,), states=("p", "v"), inputs=("F",),
...               A=sp.Matrix([[0, 1], [0, 0]]), B=sp.Matrix([[0], [1 / m.symbol]]),
...               feedback=TargetSpec("poles", {"poles": (-2, -3)}))
>>> report = check_design(derive(model), n_points=5)
>>> report.passed, len(report.points["feedback"])
(True, 5)
"""
from __future__ import annotations

import warnings
from dataclasses import dataclass, field

import numpy as np
import scipy.signal
import sympy as sp

from .design import Design, GainDesign
from .errors import ModelError, Where
from .model import S, Model
from .validity import holds_at

__all__ = ["PointResult", "CheckReport", "sample_points", "check_design", "DEFAULT_TOLERANCE",
           "closed_loop_matrix"]

DEFAULT_TOLERANCE = 1e-6


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
        return all(p.status != "fail" for pts in self.points.values() for p in pts)

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


def closed_loop_matrix(part: str, A, B, C, gain, extra=None):
    """The numeric closed-loop matrix whose poles the part places."""
    if part == "feedback":
        return A - B @ gain
    if part == "estimator":
        return A - gain @ C
    raise ValueError(f"no closed-loop rule for part {part!r}")


def _reference_gain(part: str, A, B, C, poles):
    """scipy.signal.place_poles for the same problem."""
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        if part == "feedback":
            return scipy.signal.place_poles(A, B, poles, rtol=1e-13, maxiter=200).gain_matrix
        if part == "estimator":
            return scipy.signal.place_poles(A.T, C.T, poles, rtol=1e-13, maxiter=200).gain_matrix.T
    return None


def _normalized_error(char, target) -> float:
    """Max difference of coefficients after scaling s by the size of the target roots."""
    n = len(target) - 1
    r = abs(target[-1]) ** (1.0 / n) if target[-1] != 0 else max(1.0, np.max(np.abs(np.roots(target))))
    r = r or 1.0
    scale = r ** np.arange(n + 1)
    t = np.asarray(target) / scale
    c = np.asarray(char) / scale
    return float(np.max(np.abs(c - t)) / np.max(np.abs(t)))


def _distinct(roots, rel=1e-6) -> bool:
    scale = max(1.0, float(np.max(np.abs(roots))))
    for i in range(len(roots)):
        for j in range(i + 1, len(roots)):
            if abs(roots[i] - roots[j]) < rel * scale:
                return False
    return True


def _evaluator(model: Model, expr):
    names = [p.symbol for p in model.parameters]
    return sp.lambdify(names, expr, modules="numpy")


def _check_part(model: Model, part: GainDesign, points, tol: float) -> list[PointResult]:
    order = [p.name for p in model.parameters]
    f_A, f_B = _evaluator(model, model.A), _evaluator(model, model.B)
    f_C = _evaluator(model, model.C) if model.C is not None else None
    f_gain = _evaluator(model, part.gain)
    coeffs = sp.Poly(part.target.polynomial, S).all_coeffs()
    f_target = _evaluator(model, coeffs)
    unique = part.gain.rows == 1 or part.gain.cols == 1
    results = []
    for idx, point in enumerate(points):
        args = [point[name] for name in order]
        values = {p.symbol: point[p.name] for p in model.parameters}
        failed = holds_at(part.valid_when, values)
        if failed:
            results.append(PointResult(idx, point, "skipped", None, None, "fails " + ", ".join(failed)))
            continue
        with np.errstate(all="ignore"):
            A = np.array(f_A(*args), dtype=float)
            B = np.array(f_B(*args), dtype=float)
            C = np.array(f_C(*args), dtype=float) if f_C else None
            gain = np.array(f_gain(*args), dtype=complex)
            target = np.array(f_target(*args), dtype=complex)
        if np.max(np.abs(gain.imag)) > 1e-9 * max(1.0, np.max(np.abs(gain))) or not np.all(np.isfinite(gain)):
            results.append(PointResult(idx, point, "fail", None, None, "gain is not finite and real here"))
            continue
        gain, target = gain.real, target.real
        closed = closed_loop_matrix(part.part, A, B, C, gain)
        cl_err = _normalized_error(np.poly(closed), target)
        roots = np.roots(target)
        gain_err = None
        if unique and _distinct(roots):
            try:
                ref = _reference_gain(part.part, A, B, C, roots)
            except ValueError:
                ref = None
            if ref is not None:
                gain_err = float(np.max(np.abs(ref - gain)) / max(np.max(np.abs(ref)), 1e-300))
        bad = cl_err > tol or (gain_err is not None and gain_err > tol)
        results.append(PointResult(idx, point, "fail" if bad else "ok", gain_err, cl_err,
                                   f"error above tolerance {tol:g}" if bad else ""))
    return results


def check_design(design: Design, n_points: int = 20, seed: int = 0,
                 tolerance: float = DEFAULT_TOLERANCE) -> CheckReport:
    """Check every part of a design at ``n_points`` sampled points (nominal first)."""
    points = sample_points(design.model, n_points, seed)
    report = CheckReport(tolerance, seed)
    for part in design.parts():
        if part.target is None:
            continue
        report.points[part.part] = _check_part(design.model, part, points, tolerance)
    return report
