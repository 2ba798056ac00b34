"""Numeric cross-check of a sampled-data design (numbers only: numpy, scipy).

At each sampled parameter point (the sample period included when it is a
parameter):

* the closed-form Phi, Gamma against ``scipy.signal.cont2discrete`` of the
  numeric A, B (method "zoh", "euler" or "bilinear"; the Taylor series of
  method "series" against the exact hold, so its truncation error shows);
* each gain against ``scipy.signal.place_poles`` on scipy's sampled plant
  (distinct target poles and a unique gain only);
* the closed-loop characteristic polynomial in z (of Phi - Gamma K,
  Phi - L C or Phi - L C Phi, the augmented integral loop) against the target;
  with ``compute_delay`` the gains are checked on the pair with the delay
  states, [[Phi, Gamma], [0, 0]], [[0], [I]], built here from scipy's Phi, Gamma.

The gains are evaluated by mpmath at 30 digits: at short sample periods the closed
forms cancel to several orders in T, and a double-precision evaluation of the
formula as written would blame the formula for the round-off. The conditions are
judged in their short-period form (:func:`symgain.design.short_period.stable_condition`,
positive factors such as T^3 removed) where the period is a parameter. What the
emitted code computes in double and single precision is measured by the tests of
the emitters.

>>> import sympy as sp
>>> from symgain.model import Model, Parameter, TargetSpec
>>> from symgain.model.sampling_keys import Sampling
>>> from symgain.design import derive
>>> T = Parameter.declare("T", sign="positive", range=(0.01, 0.1), role="design")
>>> model = Model(name="cart", parameters=(T,), states=("p", "v"), inputs=("F",),
...               A=sp.Matrix([[0, 1], [0, 0]]), B=sp.Matrix([[0], [1]]),
...               feedback=TargetSpec("z_poles", {"z_poles": (0.5, 0.6)}), sampling=Sampling(T.symbol))
>>> report = check_sampled_design(derive(model), n_points=4)
>>> report.passed, sorted(report.points)
(True, ['feedback', 'sampled_plant'])
"""
from __future__ import annotations

import warnings

import numpy as np
import scipy.signal
import sympy as sp

from ..design import Design
from ..design.validity import holds_at
from ..model import Z
from .check_points import CheckReport, PointResult, _distinct, _normalized_error, _real, sample_points, steady_state_error

__all__ = ["check_sampled_design", "scipy_sampled_plant", "loop_pair"]

_SCIPY_METHOD = {"zoh": "zoh", "series": "zoh", "euler": "euler", "tustin": "bilinear"}


def scipy_sampled_plant(A, B, T: float, method: str = "zoh"):
    """(ad, bd) of scipy.signal.cont2discrete for the numeric A, B."""
    n, m = B.shape
    ad, bd, *_ = scipy.signal.cont2discrete((A, B, np.eye(n), np.zeros((n, m))), T, method=_SCIPY_METHOD[method])
    return ad, bd


def loop_pair(part: str, Pd, Gd, C, D, T: float, delay: bool = False):
    """The numeric pair whose gain the part places: (Phi, Gamma), with the delay states and/or
    the integrator states appended (integral action: q[k+1] = q[k] + T (y - r)).

    >>> Pa, Ga = loop_pair("feedback", np.eye(1), np.ones((1, 1)), None, None, 0.1, delay=True)
    >>> Pa.tolist(), Ga.tolist()
    ([[1.0, 1.0], [0.0, 0.0]], [[0.0], [1.0]])
    """
    n, m = Gd.shape
    if delay:
        Pd = np.block([[Pd, Gd], [np.zeros((m, n + m))]])
        Gd = np.vstack([np.zeros((n, m)), np.eye(m)])
    if part != "integral":
        return Pd, Gd
    p = C.shape[0]
    D = np.zeros((p, m)) if D is None else D
    Cx = np.hstack([C, D]) if delay else C
    Pa = np.block([[Pd, np.zeros((Pd.shape[0], p))], [T * Cx, np.eye(p)]])
    Ga = np.vstack([Gd, np.zeros((p, m)) if delay else T * D])
    return Pa, Ga


def _closed(part: str, Pd, Gd, C, D, gain, T: float, form: str, delay: bool = False):
    if part == "estimator":
        return Pd - gain @ (C @ Pd if form == "current" else C)
    Pa, Ga = loop_pair(part, Pd, Gd, C, D, T, delay)
    return Pa - Ga @ gain


def _reference(part: str, Pd, Gd, C, D, roots, T: float, form: str, delay: bool = False):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        if part == "estimator":
            Cx = C @ Pd if form == "current" else C
            return scipy.signal.place_poles(Pd.T, Cx.T, roots, rtol=1e-13, maxiter=200).gain_matrix.T
        Pa, Ga = loop_pair(part, Pd, Gd, C, D, T, delay)
        return scipy.signal.place_poles(Pa, Ga, roots, rtol=1e-13, maxiter=200).gain_matrix


MPMATH_DIGITS = 30  # working precision of the gain evaluation


def _precise(symbols, expr):
    """A function of float arguments that evaluates ``expr`` by mpmath at MPMATH_DIGITS, as a numpy array."""
    import mpmath

    f = sp.lambdify(symbols, expr, modules="mpmath")

    def call(*args):
        with mpmath.workdps(MPMATH_DIGITS):
            value = f(*(mpmath.mpf(float(a)) for a in args))
            return np.array(value.tolist() if isinstance(value, mpmath.matrix) else value, dtype=complex)

    return call


def _failing(conditions, values, period) -> list[str]:
    """holds_at on the conditions, each ``f != 0`` judged in its short-period form where T is a symbol."""
    from ..design.short_period import stable_condition
    from ..mathtext import condition_text

    failed = []
    for cond in conditions:
        judged = cond
        if isinstance(period, sp.Symbol) and isinstance(cond, sp.Ne):
            judged = sp.Ne(stable_condition(cond.lhs - cond.rhs, period), 0)
        if holds_at([judged], values):
            failed.append(condition_text(cond))
    return failed


def _judged_conditions(design: Design):
    """(period, extra values, {part: conditions}, plant conditions) used to judge validity at a point.

    A fixed numeric period is judged through the symbolic-period twin of the design
    (:func:`symgain.design.sampled.symbolic_period_twin`): its conditions hold T, so their
    short-period forms see quantities of natural size, not ones that vanish with T.
    """
    from ..design.sampled import symbolic_period_twin
    from ..design.short_period import TWIN_LOSS, printed_error

    sampled = design.sampled
    period = sp.sympify(sampled.period)
    own = {part.part: part.valid_when for part in design.parts()}
    if not period.is_number or not printed_error(design) > TWIN_LOSS:
        return period, {}, own, sampled.valid_when  # (the printed forms keep their digits: judged as they are)
    found = symbolic_period_twin(design)
    if found is None:
        return period, {}, own, sampled.valid_when
    twin, T, value = found
    theirs = {part.part: part.valid_when for part in twin.parts()}
    if set(theirs) != set(own):
        return period, {}, own, sampled.valid_when
    return T, {T: float(value)}, theirs, twin.sampled.valid_when


def check_sampled_design(design: Design, n_points: int = 20, seed: int = 0, tolerance: float = 1e-6) -> CheckReport:
    """Check the sampled plant and every part of a sampled-data design at sampled points."""
    model, sampled = design.model, design.sampled
    form = model.sampling.estimator_form
    delay = model.sampling.compute_delay
    symbols = [p.symbol for p in model.parameters]
    ev = lambda expr: sp.lambdify(symbols, expr, modules="numpy")  # noqa: E731
    period, extra, judged, plant_conditions = _judged_conditions(design)
    f_A, f_B, f_T = ev(model.A), ev(model.B), ev(sampled.period)
    f_C = ev(model.C) if model.C is not None else None
    f_D = ev(model.D) if model.D is not None else None
    f_Phi, f_Gamma = ev(sampled.Phi), ev(sampled.Gamma)
    parts = [p for p in design.parts() if p.target is not None or p.part == "feedforward"]
    f_gain = {}
    for part in parts:
        full = part.gain if part.part != "integral" else sp.Matrix.hstack(sp.Matrix(part.gain),
                                                                           sp.Matrix(part.extra["integral_gain"]))
        unique = (full.rows == 1 or full.cols == 1) and not part.free_gains and "direction" not in part.extra
        target = None
        if part.target is not None:
            poly = sp.Poly(part.target.polynomial, Z)
            unique = unique and sp.degree(sp.gcd(poly, poly.diff(Z)), Z) == 0
            target = ev(poly.all_coeffs())
        f_gain[part.part] = (_precise(symbols, full), target, unique)
    f_K = _precise(symbols, design.feedback.gain) if design.feedback is not None else None
    report = CheckReport(tolerance, seed)
    report.points["sampled_plant"] = []
    for part in parts:
        report.points[part.part] = []
    for idx, point in enumerate(sample_points(model, n_points, seed)):
        args = [point[p.name] for p in model.parameters]
        values = {p.symbol: point[p.name] for p in model.parameters}
        T = float(f_T(*args))
        A, B = np.array(f_A(*args), dtype=float), np.array(f_B(*args), dtype=float)
        C = np.array(f_C(*args), dtype=float) if f_C else None
        D = np.array(f_D(*args), dtype=float) if f_D else None
        ad, bd = scipy_sampled_plant(A, B, T, sampled.method)
        failed = _failing(plant_conditions, {**values, **extra}, period)
        if failed:
            report.points["sampled_plant"].append(PointResult(idx, point, "skipped", None, None,
                                                              "fails " + ", ".join(failed)))
        else:
            with np.errstate(all="ignore"):
                Phi, Gamma = _real(f_Phi(*args)), _real(f_Gamma(*args))
            if Phi is None or Gamma is None:
                err = float("inf")
            else:
                err = max(np.max(np.abs(Phi - ad)) / max(1.0, np.max(np.abs(ad))),
                          np.max(np.abs(Gamma - bd)) / max(np.max(np.abs(bd)), 1e-300))
            bad = not err <= tolerance
            report.points["sampled_plant"].append(PointResult(
                idx, point, "fail" if bad else "ok", err, None,
                f"Phi, Gamma differ from scipy by {err:.1e}" if bad else ""))
        for part in parts:
            report.points[part.part].append(_check_point(part, f_gain[part.part], f_K, idx, point, args,
                                                         {**values, **extra}, ad, bd, C, D, T, form, tolerance,
                                                         delay, period, judged[part.part]))
    return report


def _check_point(part, fns, f_K, idx, point, args, values, ad, bd, C, D, T, form, tol, delay,
                 period, conditions) -> PointResult:
    f_full, f_target, unique = fns
    failed = _failing(conditions, values, period)
    if failed:
        return PointResult(idx, point, "skipped", None, None, "fails " + ", ".join(failed))
    with np.errstate(all="ignore"):
        gain = _real(f_full(*args))
    if gain is None:
        return PointResult(idx, point, "fail", None, None, "gain is not finite and real here")
    if part.part == "feedforward":
        K = _real(f_K(*args))
        Pa, Ga = loop_pair("feedback", ad, bd, C, D, T, delay)
        Dz = np.zeros((C.shape[0], bd.shape[1])) if D is None else D
        Ca, Da = (np.hstack([C, Dz]), None) if delay else (C, D)
        try:
            err = steady_state_error(Pa - np.eye(Pa.shape[0]), Ga, Ca, Da, K, gain)
        except (np.linalg.LinAlgError, TypeError):
            err = float("inf")
        bad = not err <= tol
        return PointResult(idx, point, "fail" if bad else "ok", None, err,
                           f"steady-state gain from r to y differs from I by {err:.1e}" if bad else "")
    target = np.array(f_target(*args), dtype=complex).real
    closed = _closed(part.part, ad, bd, C, D, gain, T, form, delay)
    cl_err = _normalized_error(np.poly(closed), target)
    gain_err = None
    roots = np.roots(target)
    if unique and _distinct(roots):
        try:
            ref = _reference(part.part, ad, bd, C, D, roots, T, form, delay)
            gain_err = float(np.max(np.abs(ref - gain)) / max(np.max(np.abs(ref)), 1e-300))
        except ValueError:
            gain_err = None
    bad = not cl_err <= tol or (gain_err is not None and gain_err > tol)
    return PointResult(idx, point, "fail" if bad else "ok", gain_err, cl_err,
                       f"error above tolerance {tol:g}" if bad else "")
