"""What a design's user should be told: warnings, one sentence each.

* a ``valid_when`` condition that can fail inside the declared ranges,
  decided on the range box by sign analysis where sympy can (each ranged
  parameter written as ``low + (high - low) u / (1 + u)`` with ``u > 0``),
  otherwise by sampling the box (corners and random points; the warning
  says which);
* a parameter whose name is also the name of a gain (K, L, N, Ki) or of s;
* a sampled-data design whose printed gain
  formulas, evaluated in double precision, lose more than half their digits at
  nominal (the closed forms cancel at short periods; the emitted code, schedules
  and loop analyses evaluate short-period forms instead);
* gains at nominal above 1e6 times the plant's own scale
  ((max |A| + largest target pole) / max |B|; for L with C in place of B):
  an ill-conditioned design whose numbers no actuator can deliver.

>>> import sympy as sp
>>> from symgain.model import Model, Parameter, TargetSpec
>>> from symgain.design import derive
>>> K = Parameter.declare("K", sign="positive", range=(1, 2))
>>> model = Model(name="cart", parameters=(K,), states=("p", "v"), inputs=("F",),
...               A=sp.Matrix([[0, 1], [0, 0]]), B=sp.Matrix([[0], [1 / K.symbol]]),
...               feedback=TargetSpec("poles", {"poles": (-1, -2)}))
>>> design_warnings(derive(model))
["parameter 'K' has the name of a gain (K, L, N, Ki) or of s: formulas and generated code read ambiguously; rename it"]
"""
from __future__ import annotations

import numpy as np
import sympy as sp

from .result import Design
from ..mathtext import condition_text

__all__ = ["design_warnings", "condition_can_fail", "GAIN_NAMES", "ILL_CONDITIONED"]

GAIN_NAMES = ("K", "L", "N", "Ki", "s")
ILL_CONDITIONED = 1e6
SIGN_ANALYSIS_LIMIT = 80  # operations of a condition above which the range box is sampled, not factored


def _box_substitution(model) -> tuple[dict, list]:
    subs, us = {}, []
    for p in model.parameters:
        if p.range is not None and p.range[0] < p.range[1]:
            u = sp.Symbol(f"u_{p.name}", positive=True)
            lo, hi = (sp.nsimplify(v, rational=True) for v in p.range)
            subs[p.symbol] = lo + (hi - lo) * u / (1 + u)
            us.append(u)
        elif p.nominal is not None and p.range is not None:
            subs[p.symbol] = sp.nsimplify(p.nominal, rational=True)
    return subs, us


def _sign_analysis(f: sp.Expr, model) -> bool | None:
    """True: f cannot vanish on the box; False: it can (a sign change is proven); None: undecided.

    Only rational functions of the parameters are analysed (a transcendental f, or one too large
    to expand affordably, is left to the caller, who samples the box): after the substitution the
    numerator is expanded in the u's (and in any positive parameter without a range), and a
    numerator whose coefficients all have one sign cannot vanish there.
    """
    if sp.count_ops(f) > SIGN_ANALYSIS_LIMIT or len(f.free_symbols) > 4:
        return None
    if not f.is_rational_function(*f.free_symbols):
        return None
    subs, us = _box_substitution(model)
    try:
        num, _ = sp.fraction(sp.together(f.xreplace(subs)))
        gens = sorted(num.free_symbols, key=str)
        if any(not g.is_positive for g in gens):
            return None  # a parameter of unknown sign stays free: the box cannot settle it
        if not gens:
            return bool(num.is_nonzero) or None
        coeffs = sp.Poly(num, *gens).coeffs()
    except (TypeError, ValueError, sp.PolynomialError):  # pragma: no cover - exotic expressions
        return None
    if len(coeffs) > 20 * SIGN_ANALYSIS_LIMIT:
        return None
    if all(c.is_positive for c in coeffs) or all(c.is_negative for c in coeffs):
        return True
    return None


def _samples(model, count: int = 2000, seed: int = 0) -> dict[str, np.ndarray]:
    rng = np.random.default_rng(seed)
    out = {}
    for p in model.parameters:
        if p.range is not None and p.range[0] < p.range[1]:
            corners = np.array(p.range * 8)  # corners recur among the random points
            out[p.name] = np.concatenate([rng.choice(corners, 16), rng.uniform(*p.range, count)])
        else:
            out[p.name] = np.full(count + 16, p.nominal if p.nominal is not None else 1.0)
    return out


def condition_can_fail(cond, model) -> tuple[bool, str]:
    """(can fail, method): whether ``f != 0`` (or ``f >= 0``) can fail inside the declared ranges."""
    if cond is sp.true or cond is sp.false:
        return cond is sp.false, "sign analysis"
    f = cond.lhs - cond.rhs
    strict = isinstance(cond, sp.Ne)
    if strict:
        verdict = _sign_analysis(f, model)
        if verdict is not None:
            return (not verdict), "sign analysis"
    points = _samples(model)
    args = [p.symbol for p in model.parameters]
    try:
        with np.errstate(all="ignore"):
            values = np.asarray(sp.lambdify(args, f, "numpy")(*[points[p.name] for p in model.parameters]),
                                dtype=complex)
    except (TypeError, ValueError, NameError, ZeroDivisionError):
        return False, "sampling (not evaluable)"
    values = np.broadcast_to(values, points[model.parameters[0].name].shape) if model.parameters else values
    real = values.real[np.isfinite(values.real)]
    if real.size == 0:
        return True, "sampling"
    if strict:
        scale = max(1.0, float(np.max(np.abs(real))))
        fails = (np.min(real) < 0 < np.max(real)) or bool(np.any(np.abs(real) <= 1e-12 * scale))
    else:
        fails = bool(np.any(real < 0))
    return fails, "sampling"


def _max_abs(mat, subs) -> float:
    try:
        values = [abs(complex(sp.sympify(e).xreplace(subs).evalf())) for e in mat]
    except (TypeError, ValueError):
        return float("nan")
    return max(values, default=0.0)


def _scale_warnings(design: Design) -> list[str]:
    model = design.model
    subs = {p.symbol: sp.Float(p.nominal) for p in model.parameters if p.nominal is not None}
    a = _max_abs(model.A, subs)
    out = []
    for part in design.parts():
        if part.target is None or part.part == "feedforward":
            continue
        mover = model.C if part.part == "estimator" else model.B
        if mover is None:
            continue
        try:
            coeffs = [complex(c) for c in sp.Poly(part.target.polynomial.xreplace(subs), sp.Symbol("s")).all_coeffs()]
            roots = np.roots(coeffs) if len(coeffs) > 1 else []
            r = float(np.max(np.abs(roots))) if len(roots) else 0.0
        except (sp.PolynomialError, TypeError, ValueError):
            continue
        b = _max_abs(mover, subs)
        k = _max_abs(part.gain, subs)
        if not (b > 0 and np.isfinite(k) and np.isfinite(a)):
            continue
        scale = (a + r) / b
        if k > ILL_CONDITIONED * scale:
            out.append(f"{part.part}: the gains at nominal reach {k:.3g}, {k / scale:.2g} times the plant's own "
                       f"scale {scale:.3g} ((max |A| + largest target pole) / max |{'C' if part.part == 'estimator' else 'B'}|): "
                       "the design is ill-conditioned")
    return out


SHORT_PERIOD_LOSS = 1e-8  # relative error of a double evaluation of the gains above which the warning is given


def _short_period_warning(design: Design) -> list[str]:
    """Digits a double evaluation of the gains as printed loses at nominal (a sampled-data design)."""
    from .short_period import printed_error, rewritable

    sampled = design.sampled
    if sampled is None:
        return []
    model = design.model
    values = [float(p.nominal) if p.nominal is not None else 1.0 for p in model.parameters]
    worst = printed_error(design)
    if not worst > SHORT_PERIOD_LOSS:
        return []
    digits = min(16, int(round(-np.log10(worst)))) if np.isfinite(worst) and worst > 0 else 0
    single = "" if digits >= 8 else "; single precision keeps none"
    nominal = {p.symbol: v for p, v in zip(model.parameters, values)}
    period = float(sp.sympify(sampled.period).xreplace(nominal))
    said = (f"at the sample period T = {period:g} s the gain formulas as printed, evaluated in double "
            f"precision, keep only about {digits} of 16 digits at nominal (their terms cancel at short periods"
            f"{single})")
    if rewritable(design):
        return [said + ": use the emitted code, which evaluates them in short-period forms, not the printed "
                "formulas"]
    return [said + "; the emitted code cannot rewrite them here (the forms are too large) and keeps them as "
            "written: check its numbers before use, or shorten the model"]


def design_warnings(design: Design) -> list[str]:
    """Every warning for this design, one sentence each (empty when there is nothing to say)."""
    model = design.model
    out = [f"parameter {p.name!r} has the name of a gain (K, L, N, Ki) or of s: formulas and generated "
           "code read ambiguously; rename it" for p in model.parameters if p.name in GAIN_NAMES]
    if any(p.range for p in model.parameters):
        for cond in design.valid_when:
            if not isinstance(cond, sp.Rel) or cond.free_symbols - set(model.symbols.values()):
                continue
            fails, method = condition_can_fail(cond, model)
            if fails:
                text = condition_text(cond)
                text = text if len(text) <= 60 else f"a condition of {sp.count_ops(cond)} operations"
                out.append(f"{text} can fail inside the declared ranges (found by {method}); the formulas "
                           "do not hold there")
    out += _short_period_warning(design)
    out += _scale_warnings(design)
    return out
