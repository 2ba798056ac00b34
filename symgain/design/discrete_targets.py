"""Design targets in z: s-targets mapped by z = exp(s T), explicit z poles, deadbeat.

A continuous target (any form of :mod:`symgain.targets`) is first resolved
to its s-poles; each real pole p becomes the factor (z - exp(p T)) and each
complex pair sigma +- i omega the real quadratic

    z^2 - 2 exp(sigma T) cos(omega T) z + exp(2 sigma T)

(common practice: the map z = exp(s T) takes the s-plane poles of the held
continuous response to the poles of its samples). ``z_poles`` are taken as
given (inside the unit circle for a stable loop), a ``polynomial`` in z is
taken as given, and ``deadbeat = true`` puts every pole at z = 0: the
closed-loop polynomial is z^n, so (Phi - Gamma K)^n = 0 and any initial state
reaches zero in at most n samples (common practice).

>>> import sympy as sp
>>> from symgain.model import TargetSpec
>>> T, w = sp.symbols("T w", positive=True)
>>> resolve_z_target(TargetSpec("poles", {"poles": (-w, -2*w)}), 2, T).polynomial
z**2 - z*exp(-T*w) - z*exp(-2*T*w) + exp(-3*T*w)
>>> resolve_z_target(TargetSpec("deadbeat", {"deadbeat": True}), 3, T).polynomial
z**3
"""
from __future__ import annotations

import sympy as sp

from ..errors import ModelError
from ..model import S, Z, TargetSpec
from ..model.sampling_keys import is_z_target
from .targets import Target, _is_zero, poles_polynomial, resolve_target
from ..mathtext import math_text

__all__ = ["Z", "resolve_z_target", "map_poles", "z_of_s_polynomial", "is_z_target"]


def _conjugate_groups(poles) -> list[tuple[sp.Expr, sp.Expr | None]]:
    """(real pole, None) or (real part, imaginary part > 0) for each pole or conjugate pair."""
    remaining = [sp.nsimplify(p) if isinstance(p, float) else sp.sympify(p) for p in poles]
    out = []
    while remaining:
        p = remaining.pop(0)
        re, im = sp.re(p), sp.im(p)
        if _is_zero(im):
            out.append((p if im == 0 else re, None))
            continue
        for i, q in enumerate(remaining):
            if _is_zero(q - sp.conjugate(p)):
                remaining.pop(i)
                break
        else:
            raise ModelError(f"pole {p} has no complex-conjugate partner")
        out.append((sp.simplify(re), sp.simplify(sp.Abs(im)) if im.is_number else sp.simplify(im)))
    return out


def map_poles(poles, T: sp.Expr) -> tuple[sp.Expr, tuple[sp.Expr, ...]]:
    """(polynomial in z, z poles) of the s poles under z = exp(s T).

    >>> T = sp.Symbol("T", positive=True)
    >>> map_poles([-1 + sp.I, -1 - sp.I], T)[0]
    z**2 - 2*z*exp(-T)*cos(T) + exp(-2*T)
    """
    factors, zpoles = [], []
    for re, im in _conjugate_groups(poles):
        if im is None:
            zp = sp.exp(re * T)
            factors.append(Z - zp)
            zpoles.append(zp)
        else:
            factors.append(Z**2 - 2 * sp.exp(re * T) * sp.cos(im * T) * Z + sp.exp(2 * re * T))
            zpoles += [sp.exp((re + sp.I * im) * T), sp.exp((re - sp.I * im) * T)]
    return sp.expand(sp.Mul(*factors)), tuple(zpoles)


def _s_poles(target: Target, where) -> tuple:
    """The s poles of a resolved continuous target (numeric roots for numeric polynomials)."""
    if target.poles is not None:
        return tuple(target.poles)
    poly = sp.Poly(target.polynomial, S)
    roots = sp.roots(poly, cubics=False, quartics=False)
    if sum(roots.values()) == poly.degree():
        return tuple(r for r, k in roots.items() for _ in range(k))
    if not poly.free_symbols - {S}:
        return tuple(sp.Float(r, 17) for r in sp.Poly(poly).nroots(n=17))
    coeffs = [sp.sympify(c) for c in poly.all_coeffs()]
    # a scaled numeric pattern c_i w^i (prototypes): roots are w times the numeric roots
    scale = sp.Wild("scale")
    for sym in sorted(poly.free_symbols - {S}, key=str):
        unit = [sp.simplify(c / sym**i) for i, c in enumerate(coeffs)]
        if all(not u.free_symbols for u in unit):
            base = sp.Poly(unit, S)
            return tuple(sym * sp.Float(r, 17) for r in base.nroots(n=17))
    del scale
    raise ModelError("the s-target's poles have no closed form, so it cannot be mapped to z; give poles, "
                     "z_poles or a polynomial in z", where=where)


def z_of_s_polynomial(poly_s: sp.Expr, T: sp.Expr) -> sp.Expr:
    """The polynomial in z whose roots are exp(p T) for the roots p of ``poly_s``.

    >>> T = sp.Symbol("T", positive=True)
    >>> z_of_s_polynomial(S**2 + 2*S + 1, T)
    z**2 - 2*z*exp(-T) + exp(-2*T)
    """
    return map_poles(_s_poles(Target(poly_s, None, ""), None), T)[0]


def resolve_z_target(spec: TargetSpec, order: int, T: sp.Expr) -> Target:
    """The monic target polynomial in z of the given order."""
    v, where = spec.values, spec.where
    if spec.kind == "deadbeat":
        return Target(Z**order, (sp.Integer(0),) * order, "deadbeat: every pole at z = 0",
                      (f"deadbeat: any initial state reaches zero in at most {order} samples "
                       "(the closed-loop matrix is nilpotent)",))
    if spec.kind == "z_poles":
        poles = tuple(v["z_poles"])
        if len(poles) != order:
            raise ModelError(f"{len(poles)} z poles given but the closed loop has {order}", where=where)
        return Target(poles_polynomial(poles, where, s=Z), poles, "explicit poles in z")
    if spec.kind == "polynomial" and Z in sp.sympify(v["polynomial"]).free_symbols:
        expr = sp.expand(v["polynomial"])
        if S in expr.free_symbols:
            raise ModelError("a polynomial target holds s or z, not both", where=where)
        poly = sp.Poly(expr, Z)
        if poly.degree() != order:
            raise ModelError(f"polynomial has degree {poly.degree()} but the closed loop has order {order}",
                             where=where)
        if not _is_zero(poly.LC() - 1):
            raise ModelError(f"polynomial must be monic (leading coefficient 1), found {poly.LC()}", where=where)
        return Target(expr, None, "given polynomial in z")
    continuous = resolve_target(spec, order)
    poly, zpoles = map_poles(_s_poles(continuous, where), T)
    note = f"s-target mapped to z by z = exp(s*{math_text(T)}): {continuous.description}"
    return Target(poly, zpoles, f"{continuous.description}, mapped by z = exp(s T)",
                  (note, *continuous.notes))
