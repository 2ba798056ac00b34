"""Placement for one input (or one output, by duality): the shared entry of every part.

>>> import sympy as sp
>>> from symgain.model import TargetSpec
>>> m, w = sp.symbols("m w", positive=True)
>>> g = design_gain(sp.Matrix([[0, 1], [0, 0]]), sp.Matrix([[0], [1 / m]]),
...                 TargetSpec("poles", {"poles": (-w, -w)}), part="feedback", symbol="K",
...                 states=("p", "v"), avoid={"m", "w"})
>>> g.gain
Matrix([[m*w**2, 2*m*w]])
"""
from __future__ import annotations

import sympy as sp

from ..errors import DesignError, NotControllableError
from ..model import S, TargetSpec
from .algebra import TooLarge
from .placement import place_single_input
from .result import GainDesign, Step
from .targets import resolve_target
from .validity import nonzero_conditions
from ..mathtext import math_text

__all__ = ["design_gain", "FORMS", "EXPANDED_LIMIT"]

FORMS = ("auto", "expanded", "compact")
# "auto" gives the compact form when an entry of the expanded derivation (open-loop
# coefficients, elimination, gains) would exceed this many terms (numerator plus
# denominator). The examples stay far below (at most 18 terms); a chain of four
# carriages (8 states) goes above (about 1600 terms per gain).
EXPANDED_LIMIT = 400


def _unreachable_directions(A: sp.Matrix, B: sp.Matrix, states, lead: str = "no input moves") -> str:
    """Left null vectors of the controllability matrix, as combinations of states."""
    n = A.rows
    ctrb = sp.Matrix.hstack(*[A**i * B for i in range(n)])
    try:
        vectors = ctrb.T.nullspace(simplify=True)
    except Exception:  # pragma: no cover - nullspace may fail on exotic entries
        return ""
    combos = []
    for v in vectors[:3]:
        combo = sum((sp.simplify(c) * sp.Symbol(s) for c, s in zip(v, states)), sp.Integer(0))
        combos.append(math_text(combo))
    return f"; {lead} " + ", nor ".join(combos) if combos else ""


def design_gain(A: sp.Matrix, B: sp.Matrix, spec: TargetSpec, *, part: str, symbol: str,
                states, avoid: set[str], word: str = "controllable", form: str = "auto",
                nominal: dict | None = None) -> GainDesign:
    """Single-input placement for A - B K against the target in ``spec``.

    ``form``: "expanded" (each gain one formula), "compact" (a sequence of named
    definitions, :mod:`symgain.design.compact`) or "auto" (expanded unless it would be large).
    ``nominal`` (symbol -> number): the compact form picks pivots that do not vanish there.
    """
    n = A.rows
    if B.cols != 1:
        raise DesignError(f"{part}: {B.cols} inputs; several inputs need a 'pattern' "
                          "(see the model-file reference)", where=spec.where)
    if form not in FORMS:
        raise DesignError(f"form must be one of {', '.join(FORMS)}, found {form!r}", where=spec.where)
    target = resolve_target(spec, n)
    result = None
    if form != "compact":
        try:
            result = place_single_input(A, B, target.polynomial, letter=symbol.lower(), avoid=avoid,
                                        limit=EXPANDED_LIMIT if form == "auto" else None)
        except TooLarge:
            result = None
    if result is None:
        from .compact_design import compact_design

        return compact_design(A, B, target, part=part, symbol=symbol, states=states, avoid=avoid,
                              word=word, chosen_over=EXPANDED_LIMIT if form == "auto" else None,
                              unreachable=_unreachable_directions, where=spec.where, nominal=nominal)
    det_num, det_den = result.controllability_det
    if det_num == 0:
        raise NotControllableError(
            f"the plant is not {word} for any parameter values "
            f"(the {'controllability' if word == 'controllable' else 'observability'} matrix is singular)"
            + _unreachable_directions(A, B, states, "no input moves" if word == "controllable"
                                      else "no output sees"), where=spec.where)
    valid = nonzero_conditions([det_num, *result.gain_denominators])
    Ksym = result.gain_symbols
    steps = (
        Step("closed_loop_matrix", f"closed-loop matrix A - B {symbol}", sp.Matrix(A - B * Ksym)),
        Step("open_loop_polynomial", "open-loop characteristic polynomial det(sI - A)",
             sp.Add(S**n, *[c * S ** (n - 1 - i) for i, c in enumerate(result.open_loop_coeffs)])),
        Step("characteristic_polynomial", f"det(sI - A + B {symbol})", result.closed_loop_polynomial),
        Step("target_polynomial", "target polynomial", target.polynomial),
        Step("coefficient_equations", "coefficients matched power by power", result.coefficient_equations),
        Step("solution", f"gain {symbol}", result.gain),
        Step("controllability_determinant", f"determinant of the {'controllability' if word == 'controllable' else 'observability'} matrix",
             det_num / det_den),
        Step("valid_when", "conditions for the formulas to hold", valid),
    )
    return GainDesign(part=part, symbol=symbol, gain=sp.ImmutableMatrix(result.gain), valid_when=valid,
                      target=target, closed_loop_polynomial=result.closed_loop_polynomial, steps=steps,
                      notes=target.notes, extra={"gain_symbols": Ksym}, form="expanded")
