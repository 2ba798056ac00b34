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
import zlib
from dataclasses import dataclass, field

import numpy as np
import scipy.signal
import sympy as sp

from ..design import Design, GainDesign
from ..errors import ModelError, Where
from ..model import S, Model
from ..design.validity import holds_at
from .check_points import (CheckReport, PointResult, _distinct, _normalized_error, _real, sample_points,
                           steady_state_error)

__all__ = ["PointResult", "CheckReport", "sample_points", "check_design", "DEFAULT_TOLERANCE",
           "closed_loop_matrix", "augmented_matrices", "steady_state_error"]

DEFAULT_TOLERANCE = 1e-6


def augmented_matrices(A, B, C, D=None):
    """Numeric plant with one integrator per output: [[A, 0], [C, 0]], [[B], [D]]."""
    n, m, p = A.shape[0], B.shape[1], C.shape[0]
    D = np.zeros((p, m)) if D is None else D
    Aa = np.block([[A, np.zeros((n, p))], [C, np.zeros((p, p))]])
    return Aa, np.vstack([B, D])


def closed_loop_matrix(part: str, A, B, C, gain, extra=None, D=None):
    """The numeric closed-loop matrix whose poles the part places.

    For "integral", ``gain`` is K and ``extra`` is Ki (u = -K x - Ki q, q' = y - r).
    """
    if part == "feedback":
        return A - B @ gain
    if part == "estimator":
        return A - gain @ C
    if part == "integral":
        Aa, Ba = augmented_matrices(A, B, C, D)
        return Aa - Ba @ np.hstack([gain, extra])
    raise ValueError(f"no closed-loop rule for part {part!r}")


def _reference_gain(part: str, A, B, C, poles, D=None):
    """scipy.signal.place_poles for the same problem."""
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        if part == "feedback":
            return scipy.signal.place_poles(A, B, poles, rtol=1e-13, maxiter=200).gain_matrix
        if part == "estimator":
            return scipy.signal.place_poles(A.T, C.T, poles, rtol=1e-13, maxiter=200).gain_matrix.T
        if part == "integral":
            Aa, Ba = augmented_matrices(A, B, C, D)
            return scipy.signal.place_poles(Aa, Ba, poles, rtol=1e-13, maxiter=200).gain_matrix
    return None


def _evaluator(model: Model, expr, free=()):
    names = [p.symbol for p in model.parameters] + list(free)
    return sp.lambdify(names, expr, modules="numpy")


def _free_values(free, seed: int, idx: int) -> dict:
    """Values for free gains at one point (uniform in [0.5, 1.5], the same for every part)."""
    return {g: float(np.random.default_rng([seed, idx, zlib.crc32(str(g).encode())]).uniform(0.5, 1.5))
            for g in free}


def _check_part(model: Model, part: GainDesign, points, tol: float, seed: int = 0,
                feedback: GainDesign | None = None) -> list[PointResult]:
    order = [p.name for p in model.parameters]
    free = tuple(part.free_gains)
    f_A, f_B = _evaluator(model, model.A), _evaluator(model, model.B)
    f_C = _evaluator(model, model.C) if model.C is not None else None
    f_D = _evaluator(model, model.D) if model.D is not None else None
    full = part.gain
    if part.part == "integral":
        full = sp.Matrix.hstack(sp.Matrix(part.gain), sp.Matrix(part.extra["integral_gain"]))
    f_gain = _evaluator(model, full, free)
    f_K = _evaluator(model, feedback.gain, free) if part.part == "feedforward" else None
    f_target = _evaluator(model, sp.Poly(part.target.polynomial, S).all_coeffs()) if part.target else None
    unique = (full.rows == 1 or full.cols == 1) and not free and "direction" not in part.extra
    if part.target is not None:  # repeated target roots: scipy's place_poles is not comparable
        poly = sp.Poly(part.target.polynomial, S)
        unique = unique and sp.degree(sp.gcd(poly, poly.diff(S)), S) == 0
    results = []
    n = model.n_states
    for idx, point in enumerate(points):
        args = [point[name] for name in order]
        fvals = _free_values(free, seed, idx)
        fargs = args + [fvals[g] for g in free]
        values = {p.symbol: point[p.name] for p in model.parameters} | fvals
        failed = holds_at(part.valid_when, values)
        if failed:
            results.append(PointResult(idx, point, "skipped", None, None, "fails " + ", ".join(failed)))
            continue
        with np.errstate(all="ignore"):
            A = np.array(f_A(*args), dtype=float)
            B = np.array(f_B(*args), dtype=float)
            C = np.array(f_C(*args), dtype=float) if f_C else None
            D = np.array(f_D(*args), dtype=float) if f_D else None
            gain = _real(f_gain(*fargs))
            K = _real(f_K(*fargs)) if f_K else None
        if gain is None or (f_K is not None and K is None):
            results.append(PointResult(idx, point, "fail", None, None, "gain is not finite and real here"))
            continue
        if part.part == "feedforward":
            try:
                err = steady_state_error(A, B, C, D, K, gain)
            except np.linalg.LinAlgError:
                err = float("inf")
            bad = not err <= tol
            results.append(PointResult(idx, point, "fail" if bad else "ok", None, err,
                                       f"steady-state gain from r to y differs from I by {err:.1e}" if bad else ""))
            continue
        target = np.array(f_target(*args), dtype=complex).real
        if part.part == "integral":
            closed = closed_loop_matrix("integral", A, B, C, gain[:, :n], gain[:, n:], D)
        else:
            closed = closed_loop_matrix(part.part, A, B, C, gain)
        cl_err = _normalized_error(np.poly(closed), target)
        roots = np.roots(target)
        gain_err = None
        if unique and _distinct(roots):
            try:
                ref = _reference_gain(part.part, A, B, C, roots, D)
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
    if design.sampled is not None:  # sampled-data designs: Phi, Gamma and gains in z
        from .check_sampled import check_sampled_design

        return check_sampled_design(design, n_points, seed, tolerance)
    points = sample_points(design.model, n_points, seed)
    report = CheckReport(tolerance, seed)
    for part in design.parts():
        if part.target is None and part.part != "feedforward":
            continue
        report.points[part.part] = _check_part(design.model, part, points, tolerance, seed, design.feedback)
    return report
