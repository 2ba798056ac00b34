"""The compact form as a design part: definitions, gains in their symbols, pivots as conditions.

>>> import sympy as sp
>>> from symgain.model import TargetSpec
>>> from symgain.design.targets import resolve_target
>>> m, c, k, w = sp.symbols("m c k w", positive=True)
>>> A = sp.Matrix([[0, 1, 0], [-k/m, -c/m, k/m], [k/m, 0, -k/m - c/m]]); B = sp.Matrix([[0], [1/m], [0]])
>>> target = resolve_target(TargetSpec("poles", {"poles": (-w, -w, -w)}), 3)
>>> part = compact_design(A, B, target, part="feedback", symbol="K", states=("x", "v", "a"),
...                       avoid={"m", "c", "k", "w"})
>>> part.form, [str(s) for s, _ in part.definitions]
('compact', ['a2_1', 'a2_2', 'a2_3', 'a3_1', 'a3_3', 'b2', 'alpha1', 'alpha2', 'alpha3', 'q3', 'h1_3', 'h2_3'])
>>> part.valid_when
()
"""
from __future__ import annotations

import sympy as sp

from ..errors import NotControllableError
from ..model import S
from .algebra import Field, SparseLU, TooLarge
from .compact import compact_single_input
from .placement import controllability_matrix, gain_symbols
from .result import GainDesign, Step
from .validity import nonzero_conditions, provably_nonzero

__all__ = ["compact_design", "DETERMINANT_LIMIT"]

DETERMINANT_LIMIT = 2000  # largest det Ctrb (terms) that is computed, factored and reported


def _determinant(A: sp.Matrix, B: sp.Matrix):
    """det Ctrb (factored) when it stays within DETERMINANT_LIMIT terms, else None."""
    field = Field.for_exprs([*A, *B])
    Ad, b = field.matrix(A), [row[0] for row in field.matrix(B)]
    try:
        lu = SparseLU.factor(controllability_matrix(Ad, b, field), field, DETERMINANT_LIMIT)
    except TooLarge:
        return None
    return field.factored(lu.det) if lu.det else sp.Integer(0)


def compact_design(A: sp.Matrix, B: sp.Matrix, target, *, part: str, symbol: str, states,
                   avoid: set[str], word: str = "controllable", chosen_over: int | None = None,
                   unreachable=None, where=None, nominal: dict | None = None) -> GainDesign:
    """The part in compact form; ``chosen_over``: the term limit when "auto" picked it."""
    n = A.rows
    matrix_word = "controllability" if word == "controllable" else "observability"
    alpha = sp.Poly(target.polynomial, S).all_coeffs()[1:]
    det = _determinant(A, B)
    try:
        if det == 0:
            raise ZeroDivisionError
        form = compact_single_input(A, B, alpha, avoid=set(avoid), nominal=nominal)
    except ZeroDivisionError:
        raise NotControllableError(
            f"the plant is not {word} for any parameter values (the {matrix_word} matrix is singular)"
            + (unreachable(A, B, states, "no input moves" if word == "controllable" else "no output sees")
               if unreachable else ""), where=where) from None
    defined = dict(form.definitions)
    products = {s: e for s, e in form.definitions if not e.has(sp.Add)}  # b2 = 1/m, a3_1 = k/m
    named, short = [], []
    for pivot in form.pivots:  # a pivot vanishes exactly where one of its factors does
        for _ in range(len(products) + 1):
            if not pivot.free_symbols & products.keys():
                break
            pivot = pivot.xreplace(products)
        for factor in sp.Mul.make_args(pivot):
            base = factor.base if factor.is_Pow and factor.exp.is_Integer else factor
            if base in defined:
                plain = not defined[base].free_symbols & defined.keys()  # in the parameters only
                if not (plain and provably_nonzero(defined[base])):
                    named.append(base)
            elif not base.is_number and not provably_nonzero(base):
                short.append(base)
    valid = nonzero_conditions(short) + tuple(sp.Ne(p, 0) for p in dict.fromkeys(named))
    Ksym = gain_symbols(symbol.lower(), (1, n), avoid)
    why = (f"chosen because the expanded formulas would be large (more than {chosen_over} terms in an "
           "entry); --form expanded forces them" if chosen_over else "as requested")
    note = (f"compact form ({why}): {len(form.definitions)} definitions, evaluated in order, then the gains; "
            f"the formulas hold where no pivot of the elimination vanishes")
    steps = [
        Step("closed_loop_matrix", f"closed-loop matrix A - B {symbol}", sp.Matrix(A - B * Ksym)),
        Step("target_polynomial", "target polynomial", target.polynomial),
        Step("definitions", f"controllability columns A^j b, elimination of Ctrb^T q = e_n with fixed "
             f"pivots, and Ackermann's formula {symbol} = q^T alpha(A) by Horner's rule",
             tuple(sp.Eq(s, e, evaluate=False) for s, e in form.definitions)),
        Step("solution", f"gain {symbol}", form.gain),
        Step("pivots", "pivots of the elimination (their product is det Ctrb up to sign)", form.pivots),
    ]
    if det is not None:
        steps.append(Step("controllability_determinant", f"determinant of the {matrix_word} matrix", det))
    steps.append(Step("valid_when", "conditions for the formulas to hold", valid))
    return GainDesign(part=part, symbol=symbol, gain=sp.ImmutableMatrix(form.gain), valid_when=valid,
                      target=target, closed_loop_polynomial=None, steps=tuple(steps),
                      notes=(*target.notes, note), extra={"gain_symbols": Ksym},
                      definitions=form.definitions, form="compact")
