"""Design targets: turn a :class:`TargetSpec` into a monic polynomial in s.

>>> import sympy as sp
>>> w = sp.Symbol("w", positive=True)
>>> t = resolve_target(TargetSpec("poles", {"poles": (-w, -w)}), 2)
>>> t.polynomial
s**2 + 2*s*w + w**2
>>> t = resolve_target(TargetSpec("damping", {"damping": sp.Rational(1, 2), "natural_frequency": w}), 3)
>>> sp.factor(t.polynomial)
(2*s + 5*w)*(s**2 + s*w + w**2)/2
>>> t.notes[0]
'extra pole at 5 times the dominant real part (rule of thumb)'
"""
from __future__ import annotations

from dataclasses import dataclass

import sympy as sp

from ..errors import ModelError, printable
from ..model import S, TargetSpec
from ..mathtext import math_text

__all__ = ["Target", "resolve_target", "poles_polynomial", "damping_from_overshoot", "exact",
           "target_warnings"]

EXTRA_POLE_FACTOR = 5  # rule of thumb: extra poles five times faster than the dominant pair


@dataclass(frozen=True)
class Target:
    """A resolved target: the monic polynomial, its poles when known, and how it was made."""

    polynomial: sp.Expr
    poles: tuple[sp.Expr, ...] | None
    description: str
    notes: tuple[str, ...] = ()


def exact(value, where=None) -> sp.Expr:
    """A target value as an exact sympy number or expression; text is refused, never evaluated.

    Text goes through the safe reader when a model is built
    (:meth:`symgain.model.TargetSpec.read_with`); here only sympy values and
    plain numbers arrive.

    >>> exact(0.25), exact(sp.Integer(3))
    (1/4, 3)
    >>> exact("__import__('os')")
    Traceback (most recent call last):
    ...
    symgain.errors.ModelError: target value given as text "__import__('os')"; build the model (Model, model_from_matrices) so that it is read safely
    """
    if isinstance(value, sp.Basic) and not isinstance(value, sp.MatrixBase):
        return value
    if isinstance(value, (int, float)) and not isinstance(value, bool):
        from ..model.expressions import parse_expression

        return parse_expression(value, {}, where=where)
    if isinstance(value, str):
        raise ModelError(f"target value given as text {printable(repr(value), 60)}; build the model "
                         "(Model, model_from_matrices) so that it is read safely", where=where)
    raise ModelError(f"target value must be an expression, found {type(value).__name__}", where=where)


def _is_zero(expr: sp.Expr) -> bool:
    simplified = sp.simplify(expr)
    return simplified == 0


def poles_polynomial(poles, where=None, s: sp.Symbol = S) -> sp.Expr:
    """Monic polynomial with the given roots; complex roots must come in conjugate pairs.

    >>> poles_polynomial([-1, -2 + 3*sp.I, -2 - 3*sp.I])
    s**3 + 5*s**2 + 17*s + 13
    >>> poles_polynomial([-1 + sp.I])
    Traceback (most recent call last):
    ...
    symgain.errors.ModelError: pole -1 + I has no complex-conjugate partner
    """
    remaining = [exact(p, where) for p in poles]
    factors = []
    while remaining:
        p = remaining.pop(0)
        im = sp.im(p)
        if _is_zero(im):
            factors.append(s - sp.re(p) if im != 0 else s - p)
            continue
        conj = sp.conjugate(p)
        for i, q in enumerate(remaining):
            if _is_zero(q - conj):
                remaining.pop(i)
                re = sp.simplify(sp.re(p))
                factors.append(s**2 - 2 * re * s + sp.simplify(re**2 + im**2))
                break
        else:
            raise ModelError(f"pole {p} has no complex-conjugate partner", where=where)
    return sp.expand(sp.Mul(*factors))


def damping_from_overshoot(overshoot: sp.Expr) -> sp.Expr:
    """Damping ratio of a second-order pair for a fractional step overshoot (common practice).

    zeta = -ln(Mp) / sqrt(pi^2 + ln(Mp)^2)

    >>> float(damping_from_overshoot(sp.Rational(1, 20)))  # 5 % overshoot
    0.6901067305598...
    """
    lnm = sp.log(overshoot)
    return -lnm / sp.sqrt(sp.pi**2 + lnm**2)


def _dominant_pair(zeta, wn, extra, order, where) -> tuple[sp.Expr, tuple, list[str]]:
    notes: list[str] = []
    pair = S**2 + 2 * zeta * wn * S + wn**2
    if order < 2:
        raise ModelError("a damping/natural-frequency target needs at least 2 states", where=where)
    if extra is None:
        extra = [-EXTRA_POLE_FACTOR * zeta * wn] * (order - 2)
        if order > 2:
            notes.append(f"extra pole{'s' if order > 3 else ''} at {EXTRA_POLE_FACTOR} times "
                         "the dominant real part (rule of thumb)")
    if len(extra) != order - 2:
        raise ModelError(f"extra_poles must hold {order - 2} poles for {order} states, found {len(extra)}",
                         where=where)
    poly = sp.expand(pair * poles_polynomial(extra, where))
    root = wn * sp.sqrt(1 - zeta**2)
    poles = (-zeta * wn + sp.I * root, -zeta * wn - sp.I * root, *extra)
    return poly, poles, notes


def _sane(value, label: str, where, upper=None) -> sp.Expr:
    """A target number that must be positive (and below *upper*): refused when it cannot be.

    Numbers are tested exactly; a symbol is refused only when its declared
    sign already rules it out (``w`` declared ``real`` may still be positive).
    """
    value = exact(value, where)
    if value.is_number:
        if value.is_real is False or value.is_extended_real is False:
            raise ModelError(f"{label} must be a real number, found {value}", where=where)
        number = float(value.evalf(30))
        if not number > 0 or (upper is not None and not number < upper):
            bounds = f"between 0 and {upper}" if upper is not None else "positive"
            raise ModelError(f"{label} must be {bounds}, found {math_text(value)}", where=where)
    elif value.is_nonpositive:
        raise ModelError(f"{label} must be positive, but its declared sign allows only values <= 0",
                         where=where)
    return value


def target_warnings(design) -> list[str]:
    """One line per target pole whose real part is not negative at the nominal values.

    A pole at 0 can be meant (an integrator kept on purpose), so this is a
    warning, not an error.

    >>> from symgain.model import Model, Parameter
    >>> from symgain.design import derive
    >>> m = Parameter.declare("m", sign="positive", range=(1, 2))
    >>> model = Model(name="cart", parameters=(m,), states=("p", "v"), inputs=("F",),
    ...               A=sp.Matrix([[0, 1], [0, 0]]), B=sp.Matrix([[0], [1 / m.symbol]]),
    ...               feedback=TargetSpec("poles", {"poles": (0, -1)}))
    >>> target_warnings(derive(model))
    ['feedback: target pole 0 has a real part >= 0 (at nominal values): the closed loop is not asymptotically stable']
    """
    import numpy as np

    nominal = {p.symbol: p.nominal for p in design.model.parameters if p.nominal is not None}
    out = []
    for part in design.parts():
        target = part.target
        if target is None:
            continue
        try:
            if target.poles is not None:
                found = [(p, complex(sp.N(exact(p).xreplace(nominal)))) for p in target.poles]
            else:
                coeffs = sp.Poly(target.polynomial, S).all_coeffs()
                numbers = [complex(sp.N(c.xreplace(nominal))) for c in coeffs]
                found = [(None, r) for r in np.roots(numbers)]
        except (TypeError, ValueError, sp.PolynomialError):
            continue  # symbols without nominal values: nothing to say
        for pole, value in found:
            if np.isfinite(value) and value.real >= -1e-12 * max(1.0, abs(value)):
                shown = math_text(pole) if pole is not None else f"{value.real:.4g}{value.imag:+.4g}j"
                out.append(f"{part.part}: target pole {shown} has a real part >= 0 (at nominal values): "
                           "the closed loop is not asymptotically stable")
    return list(dict.fromkeys(out))


def resolve_target(spec: TargetSpec, order: int) -> Target:
    """The monic target polynomial of the given order for one target specification."""
    v, where = spec.values, spec.where
    if spec.kind == "poles":
        poles = tuple(v["poles"])
        if len(poles) != order:
            raise ModelError(f"{len(poles)} poles given but the closed loop has {order}",
                             where=where.child("poles") if where and where.key else where)
        return Target(poles_polynomial(poles, where), poles, "explicit poles")
    if spec.kind == "polynomial":
        expr = sp.expand(exact(v["polynomial"], where))
        if S not in expr.free_symbols:
            raise ModelError(f"polynomial {expr} does not contain s", where=where)
        try:
            poly = sp.Poly(expr, S)
        except sp.PolynomialError:
            raise ModelError(f"{expr} is not a polynomial in s", where=where) from None
        if poly.degree() != order:
            raise ModelError(f"polynomial has degree {poly.degree()} but the closed loop has order {order}",
                             where=where)
        if not _is_zero(poly.LC() - 1):
            raise ModelError(f"polynomial must be monic (leading coefficient 1), found {poly.LC()}",
                             where=where)
        return Target(expr, None, "given polynomial")
    if spec.kind == "prototype":
        from .prototypes import prototype_polynomial, prototype_source

        name = v["prototype"]
        bandwidth = _sane(v["bandwidth"], "bandwidth", where)
        poly = prototype_polynomial(name, order, bandwidth, S, where=where)
        return Target(sp.expand(poly), None, f"{name} prototype, bandwidth {v['bandwidth']}",
                      (f"{name} coefficients: {prototype_source(name)}",))
    if spec.kind == "damping":
        zeta = _sane(v["damping"], "damping", where)
        wn = _sane(v["natural_frequency"], "natural_frequency", where)
        poly, poles, notes = _dominant_pair(zeta, wn, v.get("extra_poles"), order, where)
        return Target(poly, poles, f"dominant pair damping {zeta}, natural frequency {wn}", tuple(notes))
    if spec.kind == "settling":
        ts = _sane(v["settling_time"], "settling_time", where)
        mp = _sane(v["overshoot"], "overshoot", where, upper=1)
        zeta = damping_from_overshoot(mp)
        wn = 4 / (zeta * ts)
        poly, poles, notes = _dominant_pair(zeta, wn, v.get("extra_poles"), order, where)
        notes = ["damping from overshoot: zeta = -ln(Mp)/sqrt(pi^2 + ln(Mp)^2); natural frequency from "
                 "2 % settling time: omega_n = 4/(zeta*Ts) (standard second-order formulas)", *notes]
        return Target(poly, poles, f"settling time {ts} (2 %), overshoot {mp}", tuple(notes))
    raise ModelError(f"unknown target kind {spec.kind!r}", where=where)  # pragma: no cover
