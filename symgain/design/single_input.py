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
from .placement import place_single_input
from .result import GainDesign, Step
from .targets import resolve_target
from .validity import nonzero_conditions

__all__ = ["design_gain"]


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
        combos.append(sp.sstr(combo))
    return f"; {lead} " + ", nor ".join(combos) if combos else ""


def design_gain(A: sp.Matrix, B: sp.Matrix, spec: TargetSpec, *, part: str, symbol: str,
                states, avoid: set[str], word: str = "controllable") -> GainDesign:
    """Single-input placement for A - B K against the target in ``spec``."""
    n = A.rows
    if B.cols != 1:
        raise DesignError(f"{part}: {B.cols} inputs; several inputs need a 'pattern' "
                          "(see the model-file reference)", where=spec.where)
    target = resolve_target(spec, n)
    result = place_single_input(A, B, target.polynomial, letter=symbol.lower(), avoid=avoid)
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
                      notes=target.notes, extra={"gain_symbols": Ksym})
