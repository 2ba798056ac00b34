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

from ..errors import ModelError
from ..model import S, TargetSpec

__all__ = ["Target", "resolve_target", "poles_polynomial", "damping_from_overshoot"]

EXTRA_POLE_FACTOR = 5  # rule of thumb: extra poles five times faster than the dominant pair


@dataclass(frozen=True)
class Target:
    """A resolved target: the monic polynomial, its poles when known, and how it was made."""

    polynomial: sp.Expr
    poles: tuple[sp.Expr, ...] | None
    description: str
    notes: tuple[str, ...] = ()


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
    remaining = [sp.nsimplify(p) if isinstance(p, float) else sp.sympify(p) for p in poles]
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
        expr = sp.expand(v["polynomial"])
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
        poly = prototype_polynomial(name, order, v["bandwidth"], S, where=where)
        return Target(sp.expand(poly), None, f"{name} prototype, bandwidth {v['bandwidth']}",
                      (f"{name} coefficients: {prototype_source(name)}",))
    if spec.kind == "damping":
        zeta, wn = v["damping"], v["natural_frequency"]
        poly, poles, notes = _dominant_pair(zeta, wn, v.get("extra_poles"), order, where)
        return Target(poly, poles, f"dominant pair damping {zeta}, natural frequency {wn}", tuple(notes))
    if spec.kind == "settling":
        ts, mp = v["settling_time"], v["overshoot"]
        zeta = damping_from_overshoot(mp)
        wn = 4 / (zeta * ts)
        poly, poles, notes = _dominant_pair(zeta, wn, v.get("extra_poles"), order, where)
        notes = ["damping from overshoot: zeta = -ln(Mp)/sqrt(pi^2 + ln(Mp)^2); natural frequency from "
                 "2 % settling time: omega_n = 4/(zeta*Ts) (standard second-order formulas)", *notes]
        return Target(poly, poles, f"settling time {ts} (2 %), overshoot {mp}", tuple(notes))
    raise ModelError(f"unknown target kind {spec.kind!r}", where=where)  # pragma: no cover
