r"""The controllable canonical form for several inputs (Luenberger) and its unique design.

Published method: D. G. Luenberger, "Canonical forms for linear multivariable
systems", IEEE Transactions on Automatic Control 12(3), 290-293, 1967; the
textbook account followed here is C.-T. Chen, *Linear System Theory and
Design* (Oxford University Press, 3rd ed. 1999), the multivariable
controllable form and its state-feedback design (chapters 7 and 8; section
numbers from memory).

1. **Controllability indices.** The columns b_1, ..., b_m, A b_1, ..., A b_m,
   A^2 b_1, ... are scanned in that order ("crate" order) and each one kept
   when it is independent of those kept before (exactly, over the
   parameters' field); once A^k b_i is dependent, so are the higher powers of
   b_i. mu_i is the number of kept columns of input i; their sum is n when
   the plant is controllable.
2. **Transformation.** With M = [b_1, ..., A^(mu_1 - 1) b_1, b_2, ...] and
   q_i the row sigma_i = mu_1 + ... + mu_i of M^-1, the rows q_i A^k
   (k < mu_i) form T; in z = T x each input's chain is
   z_(i,k)' = z_(i,k+1) and the last state of chain i is driven by
   q_i A^mu_i x + q_i A^(mu_i - 1) B u. The rows q_i A^(mu_i - 1) B form
   B_m, unit upper triangular.
3. **Design.** Give chain i the monic polynomial p_i of degree mu_i (the
   target split into one polynomial per chain, :mod:`symgain.design.target_split`).
   Asking the last row of every chain to be the companion row of p_i gives
   the one gain

       K = B_m^-1 [q_1 p_1(A); ...; q_m p_m(A)]

   (a multi-input Ackermann formula: with one input it is Ackermann's). The
   closed loop in z is block diagonal with companion blocks, so its
   characteristic polynomial is p_1 ... p_m: the target. For a fixed split
   the answer is unique.

Conditions: det M != 0 (the indices hold) and the denominators of K.

>>> import sympy as sp
>>> A = sp.Matrix([[0, 1, 0], [0, 0, 0], [0, 0, 0]]); B = sp.Matrix([[0, 0], [1, 0], [0, 1]])
>>> r = canonical_gain(A, B, [sp.expand((S + 1)**2), S + 3])
>>> r.indices, r.gain
((2, 1), Matrix([
[1, 2, 0],
[0, 0, 3]]))
"""
from __future__ import annotations

from dataclasses import dataclass

import sympy as sp

from .algebra import Field, Fraction, SparseLU, matvec
from ..errors import DesignError, NotControllableError
from ..model import S, TargetSpec
from .placement import gain_symbols
from .target_split import split_target
from .validity import nonzero_conditions
from ..mathtext import math_text

__all__ = ["controllability_indices", "canonical_gain", "CanonicalGain", "design_canonical", "SOURCE"]

SOURCE = ("multi-input controllable canonical form: Luenberger, 'Canonical forms for linear multivariable "
          "systems', IEEE Trans. Automatic Control 12 (1967) 290-293; as in Chen, Linear System Theory and "
          "Design, 3rd ed. (1999), chapters 7-8 (section numbers from memory)")


def _independent(basis: list, vec: list, field: Field):
    """Reduce vec by the echelon basis [(pivot, vector)]; return the remainder or None if it vanishes."""
    v = list(vec)
    for p, b in basis:
        if v[p]:
            f = v[p] / b[p]
            v = [x - f * y if y else x for x, y in zip(v, b)]
    for i, x in enumerate(v):
        if x:
            return i, v
    return None


def controllability_indices(A: sp.Matrix, B: sp.Matrix):
    """(mu_1, ..., mu_m) by the crate-order scan, exact over the parameters' field.

    >>> controllability_indices(sp.Matrix([[0, 1], [0, 0]]), sp.Matrix([[0, 1], [1, 0]]))
    (1, 1)
    """
    field = Field.for_exprs([*A, *B])
    return _indices(field.matrix(A), field.matrix(B), field)[0]


def _indices(Ad, Bd, field):
    n, m = len(Ad), len(Bd[0])
    basis, mu, active = [], [0] * m, [True] * m
    powers = [[row[i] for row in Bd] for i in range(m)]  # A^k b_i, k = current power
    for _ in range(n):
        for i in range(m):
            if not active[i]:
                continue
            found = _independent(basis, powers[i], field)
            if found is None:
                active[i] = False
            else:
                basis.append(found)
                mu[i] += 1
        if len(basis) == n or not any(active):
            break
        powers = [matvec(Ad, v, field) if active[i] else v for i, v in enumerate(powers)]
    return tuple(mu), len(basis)


@dataclass(frozen=True)
class CanonicalGain:
    indices: tuple[int, ...]
    gain: sp.Matrix
    q_rows: sp.Matrix  # q_i, one row per chain (inputs with mu_i > 0)
    b_m: sp.Matrix  # rows q_i A^(mu_i - 1) B
    m_det: sp.Expr  # det M (numerator over denominator)
    denominators: tuple[sp.Expr, ...]


def _row_times(row: list, Ad: list, field: Field) -> list:
    n = len(Ad)
    return [sum((row[k] * Ad[k][j] for k in range(n) if row[k] and Ad[k][j]), field.zero) for j in range(n)]


def canonical_gain(A: sp.Matrix, B: sp.Matrix, chain_polys: list[sp.Expr]) -> CanonicalGain:
    """K = B_m^-1 [q_i p_i(A)] for one monic polynomial per chain (inputs with mu_i > 0, in order)."""
    n, m = A.rows, B.cols
    field = Field.for_exprs([*A, *B, *[c for p in chain_polys for c in sp.Poly(p, S).all_coeffs()]])
    Ad, Bd = field.matrix(A), field.matrix(B)
    mu, rank = _indices(Ad, Bd, field)
    if rank < n:
        raise NotControllableError(f"the plant is not controllable (the controllability indices {mu} add up "
                                   f"to {rank}, not {n})")
    chains = [i for i in range(m) if mu[i] > 0]
    if len(chain_polys) != len(chains):
        raise DesignError(f"{len(chain_polys)} chain polynomials for {len(chains)} chains")
    cols = []
    for i in chains:
        v = [row[i] for row in Bd]
        for _ in range(mu[i]):
            cols.append(v)
            v = matvec(Ad, v, field)
    lu = SparseLU.factor(cols, field)  # the matrix whose rows are M's columns: M^T
    if not lu.det:
        raise NotControllableError("the columns of M are dependent")  # pragma: no cover - indices guarantee it
    q_rows, rows, bm_rows, sigma = [], [], [], 0
    for i, poly in zip(chains, chain_polys):
        sigma += mu[i]
        q = lu.solve([field.one if k == sigma - 1 else field.zero for k in range(n)])  # q^T M = e_sigma
        coeffs = [field.element(c) for c in sp.Poly(poly, S).all_coeffs()]
        if len(coeffs) != mu[i] + 1:
            raise DesignError(f"chain {len(q_rows) + 1} needs a polynomial of degree {mu[i]}")
        acc = [c * coeffs[0] for c in q]  # Horner on the row vector: q p_i(A)
        power = list(q)
        for c in coeffs[1:]:
            acc = [a + c * x for a, x in zip(_row_times(acc, Ad, field), q)]
        for _ in range(mu[i] - 1):
            power = _row_times(power, Ad, field)
        bm_rows.append([sum((power[k] * Bd[k][j] for k in range(n) if power[k] and Bd[k][j]), field.zero)
                        for j in chains])
        q_rows.append(q)
        rows.append(acc)
    bm_lu = SparseLU.factor(bm_rows, field)
    if not bm_lu.det:
        raise DesignError("B_m is singular")  # pragma: no cover - unit triangular by construction
    # K_sel = B_m^-1 R, column by column of R
    K = [[field.zero] * n for _ in range(m)]
    dens = []
    for j in range(n):
        x = bm_lu.solve([r[j] for r in rows])
        for k, i in enumerate(chains):
            K[i][j] = x[k]
    gain = sp.Matrix(m, n, lambda i, j: field.factored(K[i][j]))
    dens = tuple(sp.fraction(e)[1] for e in gain)
    num, den = field.numer_denom(lu.det)
    return CanonicalGain(tuple(mu), gain, field.to_matrix(q_rows), field.to_matrix(bm_rows), num / den,
                         (*dens, num))


def design_canonical(A, B, spec: TargetSpec, target, *, part, symbol, states, avoid, word="controllable",
                     symbols=None):
    """GainDesign by the canonical form (key ``method = "canonical"``)."""
    from .result import GainDesign, Step

    n, m = A.rows, B.cols
    field = Field.for_exprs([*A, *B])
    mu, rank = _indices(field.matrix(A), field.matrix(B), field)
    if rank < n:
        from .single_input import _unreachable_directions

        raise NotControllableError(f"the plant is not {word} for any parameter values (controllability indices "
                                   f"{mu} add up to {rank} < {n})" + _unreachable_directions(A, B, states),
                                   where=spec.where)
    sizes = [k for k in mu if k > 0]
    where = spec.where.child("target_split") if spec.where.key else spec.where
    polys, rule = split_target(target, spec.values.get("target_split"), sizes, "chain", where, symbols or {})
    res = canonical_gain(A, B, polys)
    valid = nonzero_conditions(res.denominators)
    Ksym = gain_symbols(symbol.lower(), (m, n), avoid)
    closed = sp.expand((A - B * Ksym).charpoly(S).as_expr()) if n <= 4 else sp.Mul(*polys, evaluate=False)
    label = "input" if word == "controllable" else "output"
    chains = ", ".join(f"mu_{i + 1} = {k}" for i, k in enumerate(mu))
    notes = (f"canonical design for several {label}s: controllability indices {chains}; one polynomial per "
             f"chain; unique for this split; {rule}: "
             + "; ".join(f"chain {k} gets {math_text(sp.factor(p))}" for k, p in enumerate(polys, start=1)),
             SOURCE, *target.notes)
    steps = (
        Step("controllability_indices", "controllability indices (crate-order scan of b_i, A b_i, ...)",
             chains),
        Step("chain_rows", "rows q_i of M^-1 (one per chain)", res.q_rows),
        Step("chain_input_matrix", "B_m: rows q_i A^(mu_i - 1) B (unit upper triangular)", res.b_m),
        *[Step(f"chain_{k}_target", f"chain {k} polynomial p_{k}(s)", p) for k, p in enumerate(polys, start=1)],
        Step("characteristic_polynomial", f"det(sI - A + B {symbol})", closed),
        Step("target_polynomial", "target polynomial", target.polynomial),
        Step("solution", f"gain {symbol} = B_m^-1 [q_i p_i(A)]", res.gain),
        Step("controllability_determinant", "det M (M: the kept columns A^k b_i, by input)", res.m_det),
        Step("valid_when", "conditions for the formulas to hold", valid),
    )
    return GainDesign(part=part, symbol=symbol, gain=sp.ImmutableMatrix(res.gain), valid_when=valid,
                      target=target, closed_loop_polynomial=closed, steps=steps, notes=notes,
                      extra={"gain_symbols": Ksym, "solution_kind": "canonical"})
