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

import math
import warnings
import zlib
from dataclasses import dataclass, field, replace

import numpy as np
import scipy.signal
import sympy as sp

from ..design import Design, GainDesign
from ..design.validity import holds_at
from .check_points import (CheckReport, PointResult, _distinct, _normalized_error, _real, sample_points,
                           steady_state_error)
from ..errors import DesignError, ModelError, Where, printable
from ..model import S, Model
from .numeric import lambdify

__all__ = ["PointResult", "CheckReport", "sample_points", "check_design", "DEFAULT_TOLERANCE",
           "closed_loop_matrix", "augmented_matrices", "steady_state_error"]

DEFAULT_TOLERANCE = 1e-6
MAX_POINTS = 100_000  # sampled points of one check
#: The gain is compared with scipy only where the closed loop's eigenvector matrix has a
#: condition number below this bound divided by machine precision times the tolerance
#: (beyond it, a correct placement may differ from scipy's gain by more than the tolerance).
CONDITION_FACTOR = 1e-2


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


def _evaluator(model: Model, expr, free=(), definitions=()):
    """A numpy function of the parameters (then the free gains); a compact form's
    definitions are computed first, in order."""
    from ..design.compact import numeric_function

    names = [p.symbol for p in model.parameters] + list(free)
    return numeric_function(names, expr, definitions)


def _free_values(free, seed: int, idx: int) -> dict:
    """Values for free gains at one point (uniform in [0.5, 1.5], the same for every part)."""
    return {g: float(np.random.default_rng([seed, idx, zlib.crc32(str(g).encode())]).uniform(0.5, 1.5))
            for g in free}


def _value(func, args):
    """``func(*args)`` as a real array, or None where it is not finite and real (1/0 included)."""
    try:
        return _real(func(*args))
    except (ZeroDivisionError, OverflowError, ValueError, TypeError):
        return None
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
    f_gain = _evaluator(model, full, free, part.definitions)
    f_K = _evaluator(model, feedback.gain, free, feedback.definitions) if part.part == "feedforward" else None
    named = [sym for sym, _ in part.definitions]
    f_named = _evaluator(model, named, free, part.definitions) if named else None
    f_target = _evaluator(model, sp.Poly(part.target.polynomial, S).all_coeffs()) if part.target else None
    unique = (full.rows == 1 or full.cols == 1) and not free and "direction" not in part.extra
    if part.target is not None:  # repeated target roots: scipy's place_poles is not comparable
        poly = sp.Poly(part.target.polynomial, S)
        unique = unique and sp.degree(sp.gcd(poly, poly.diff(S)), S) == 0
    results = []
    n = model.n_states
    for idx, point in enumerate(points):
        args = [float(point[name]) for name in order]
        fvals = _free_values(free, seed, idx)
        fargs = args + [fvals[g] for g in free]
        values = {p.symbol: point[p.name] for p in model.parameters} | fvals
        if f_named is not None:  # the pivots of a compact form are named quantities
            with np.errstate(all="ignore"):
                values |= dict(zip(named, (float(v) for v in f_named(*fargs))))
        failed = holds_at(part.valid_when, values)
        if failed:
            results.append(PointResult(idx, point, "skipped", None, None, "fails " + ", ".join(failed)))
            continue
        with np.errstate(all="ignore"):
            plant = [_value(f, args) if f else None for f in (f_A, f_B, f_C, f_D)]
            if any(m is None for m, f in zip(plant, (f_A, f_B, f_C, f_D)) if f):
                results.append(PointResult(idx, point, "skipped", None, None,
                                           "the plant matrices are not finite and real here"))
                continue
            A, B, C, D = plant
            gain = _value(f_gain, fargs)
            K = _value(f_K, fargs) if f_K else None
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
        note = ""
        if gain_err is not None and gain_err > tol:
            kappa = _eigenvector_condition(closed)
            if kappa * np.finfo(float).eps > CONDITION_FACTOR * tol:
                note = f"gain not compared: ill-conditioned placement (eigenvector condition {kappa:.1e})"
                gain_err = None
        bad = not cl_err <= tol or (gain_err is not None and gain_err > tol)
        results.append(PointResult(idx, point, "fail" if bad else "ok", gain_err, cl_err,
                                   f"error above tolerance {tol:g}" if bad else note))
    return results


def _eigenvector_condition(closed) -> float:
    """Condition number of the eigenvector matrix of the closed loop (inf when defective)."""
    try:
        _, vectors = np.linalg.eig(closed)
        return float(np.linalg.cond(vectors))
    except np.linalg.LinAlgError:
        return float("inf")


def check_design(design: Design, n_points: int = 20, seed: int = 0,
                 tolerance: float = DEFAULT_TOLERANCE) -> CheckReport:
    """Check every part of a design at ``n_points`` sampled points (nominal first).

    A check that would prove nothing is refused (:class:`~symgain.errors.DesignError`
    or :class:`~symgain.errors.ModelError`): no points, a tolerance that is not a
    positive finite number, or a part whose every point is skipped.
    """
    if not isinstance(design, Design):
        raise ModelError(f"check_design needs a Design (from derive), found {type(design).__name__}")
    if isinstance(n_points, bool) or not isinstance(n_points, (int, np.integer)) \
            or not 1 <= n_points <= MAX_POINTS:
        raise ModelError(f"points must be a whole number from 1 to {MAX_POINTS}, found "
                         f"{printable(repr(n_points), 30)}")
    if isinstance(seed, bool) or not isinstance(seed, (int, np.integer)) or not 0 <= seed < 2**63:
        raise ModelError(f"seed must be a whole number from 0 to 2**63 - 1, found {printable(repr(seed), 30)}")
    if isinstance(tolerance, bool) or not isinstance(tolerance, (int, float, np.floating)) \
            or not math.isfinite(tolerance) or not tolerance > 0:
        raise ModelError(f"tolerance must be a positive finite number, found {printable(repr(tolerance), 30)}")
    from ..guard import stage

    stage("numeric check", f"{n_points} points")
    n_points, seed, tolerance = int(n_points), int(seed), float(tolerance)
    if design.sampled is not None:  # sampled-data designs: Phi, Gamma and gains in z
        from .check_sampled import check_sampled_design

        return check_sampled_design(design, n_points, seed, tolerance)
    points = sample_points(design.model, n_points, seed)
    report = CheckReport(tolerance, seed)
    for part in design.parts():
        if part.target is None and part.part != "feedforward":
            continue
        results = _check_part(design.model, part, points, tolerance, seed, design.feedback)
        if not any(r.status != "skipped" for r in results):
            raise DesignError(f"{part.part}: every one of the {len(results)} points was skipped ("
                              f"{results[0].reason}); nothing was checked",
                              where=Where(design.model.source))
        report.points[part.part] = results
        shown = part.selected_branch or 1
        for b in part.branches:  # every other solution branch is checked on its own
            if b.index == shown:
                continue
            alt = replace(part, gain=b.gain, valid_when=b.valid_when, extra={**part.extra, **b.extra})
            report.points[f"{part.part} branch {b.index}"] = _check_part(design.model, alt, points, tolerance,
                                                                       seed, design.feedback)
    return report
