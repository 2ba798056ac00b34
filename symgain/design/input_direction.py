"""Placement with several inputs through one input direction: u = f v, then the single-input formula.

With u = f v the plant (A, B f) has one input, the single-input formula gives k, and K = f k.
A direction given in the model (``input_direction``, or ``output_direction`` for an
estimator) is used as given. Otherwise symgain tries the unit vectors and the sums and
differences of two, keeps those that leave the plant controllable, and chooses the one whose
controllability matrix is best conditioned over the declared ranges (checked numerically at
sampled points); when even the best is ill-conditioned the design is refused with a
suggestion to give a pattern or a direction.

>>> import sympy as sp
>>> A = sp.Matrix([[0, 1], [0, 0]]); B = sp.eye(2)   # the first input alone cannot reach v
>>> f, worst = best_direction(A, B, {})
>>> list(f), round(worst, 2)
([0, 1], 1.0)
"""
from __future__ import annotations

import itertools

import sympy as sp

from ..errors import DesignError, ModelError, Where
from ..model.definition import _shown
from ..model.expressions import parse_expression

__all__ = ["parse_direction", "parameter_box", "best_direction", "design_by_direction", "direction_key",
           "DIRECTION_CONDITION_LIMIT"]


def parse_direction(raw, size: int, symbols: dict, where: Where, label: str) -> sp.Matrix:
    """A column vector of ``size`` expressions (the direction f of u = f v).

    >>> parse_direction(["1", "-1"], 2, {}, Where(None, "feedback.input_direction"), "inputs")
    Matrix([
    [ 1],
    [-1]])
    """
    if not isinstance(raw, (list, tuple)) or len(raw) != size:
        raise ModelError(f"must list {size} entries (one per {label[:-1]}), found {_shown(raw)}",
                         where=where)
    f = sp.Matrix([v if isinstance(v, sp.Basic) else parse_expression(v, symbols, where=where.at(i))
                   for i, v in enumerate(raw)])
    if all(e == 0 for e in f):
        raise ModelError("the direction is the zero vector", where=where)
    return f


def parameter_box(model) -> dict:
    """symbol -> (low, high, nominal) of every parameter (None where not declared).

    >>> from symgain.model import Parameter
    >>> import types
    >>> m = Parameter.declare("m", sign="positive", range=(1, 2))
    >>> parameter_box(types.SimpleNamespace(parameters=(m,)))[m.symbol]
    (1.0, 2.0, 1.5)
    """
    return {p.symbol: (*(p.range or (None, None)), p.nominal) for p in model.parameters}


def direction_key(word: str) -> str:
    return "output_direction" if word == "observable" else "input_direction"


def _controllable_somewhere(A: sp.Matrix, b: sp.Matrix) -> bool:
    n = A.rows
    ctrb = sp.Matrix.hstack(*[A**i * b for i in range(n)])
    free = sorted(ctrb.free_symbols, key=str)
    for trial in range(3):  # generic rank at a few rational points
        point = {x: sp.Rational(7 + 3 * k + trial * 5, 5 + k + trial) for k, x in enumerate(free)}
        try:
            if ctrb.xreplace(point).rank() == n:
                return True
        except (ZeroDivisionError, TypeError):
            continue
    return False


DIRECTION_CONDITION_LIMIT = 1e8  # worst condition number of the controllability matrix accepted


def _direction_candidates(m: int) -> list[sp.Matrix]:
    out = [sp.Matrix([1 if i == j else 0 for i in range(m)]) for j in range(m)]
    for j, k in itertools.combinations(range(m), 2):
        for sign in (1, -1):
            out.append(sp.Matrix([1 if i == j else sign if i == k else 0 for i in range(m)]))
    return out + ([sp.ones(m, 1)] if m > 2 else [])


def _condition_points(symbols: list, ranges: dict, count: int = 24) -> list[dict]:
    import numpy as np

    rng = np.random.default_rng(0)
    points = []
    for k in range(count):
        point = {}
        for x in symbols:
            low, high, nominal = ranges.get(x, (None, None, None))
            if low is None:
                point[x] = nominal if nominal is not None else 1.3 + 0.1 * k
            else:
                point[x] = nominal if k == 0 else float(rng.uniform(low, high))
        points.append(point)
    return points


def best_direction(A: sp.Matrix, B: sp.Matrix, ranges: dict):
    """(f, worst condition number over the ranges) of the best conditioned direction, or (None, inf).

    The controllability matrix of each candidate is built numerically at sampled points of the
    declared ranges (never symbolically: powers of a symbolic A grow fast with the order).
    """
    import numpy as np

    n = A.rows
    symbols = sorted(A.free_symbols | B.free_symbols, key=str)
    f_A, f_B = sp.lambdify(symbols, A, "numpy"), sp.lambdify(symbols, B, "numpy")
    plants = []
    for point in _condition_points(symbols, ranges):
        with np.errstate(all="ignore"):
            try:
                args = [point[x] for x in symbols]
                plants.append((np.array(f_A(*args), dtype=complex), np.array(f_B(*args), dtype=complex)))
            except (TypeError, ValueError, ZeroDivisionError):
                plants.append(None)
    best, best_worst = None, np.inf
    for f in _direction_candidates(B.cols):
        if not _controllable_somewhere(A, B * f):
            continue
        fv = np.array(f, dtype=float).reshape(-1, 1)
        worst = 0.0
        for plant in plants:
            if plant is None or not (np.all(np.isfinite(plant[0])) and np.all(np.isfinite(plant[1]))):
                worst = np.inf
                continue
            Ap, b = plant[0], plant[1] @ fv
            columns = [b]
            for _ in range(n - 1):
                columns.append(Ap @ columns[-1])
            with np.errstate(all="ignore"):
                try:
                    worst = max(worst, float(np.linalg.cond(np.hstack(columns))))
                except np.linalg.LinAlgError:
                    worst = np.inf
        if best is None or worst < best_worst:
            best, best_worst = f, worst
    return best, best_worst


def design_by_direction(A, B, spec, target, *, part, symbol, states, inputs, avoid, symbols, word,
                         design_gain, Step, ranges=None):
    from dataclasses import replace

    m = B.cols
    key = direction_key(word)
    label = "outputs" if word == "observable" else "inputs"
    raw = spec.values.get(key)
    if raw is not None:
        f = parse_direction(raw, m, symbols, spec.where.child(key), label)
        how = f"{key} {list(f)} given in the model"
    else:
        f, worst = best_direction(A, B, ranges or {})
        if f is None:
            raise DesignError(("" if spec.where.key else f"{part}: ") +
                              f"no unit {label[:-1]} direction, nor a sum or difference of two, makes the plant "
                              f"{word}; give a pattern or {key}", where=spec.where)
        if worst > DIRECTION_CONDITION_LIMIT:
            raise DesignError(("" if spec.where.key else f"{part}: ") +
                              f"every single {label[:-1]} direction tried leaves the design ill-conditioned over "
                              f"the declared ranges (best worst-case condition number {worst:.1e} of the "
                              f"{'controllability' if word == 'controllable' else 'observability'} matrix); "
                              f"give a pattern or {key}", where=spec.where)
        how = (f"{key} {list(f)} chosen by symgain: the best conditioned of the unit vectors and the sums and "
               f"differences of two over the declared ranges (worst condition number {worst:.2g})")
    single = design_gain(A, B * f, spec, part=part, symbol=symbol, states=states, avoid=avoid, word=word)
    gain = f * single.gain
    note = f"several {label}: placed through one combination u = f v, {how}; {symbol} = f k"
    steps = (Step("input_direction", f"direction f of the combination ({key})", f),) + single.steps + (
        Step("direction_gain", f"{symbol} = f k", gain),)
    return replace(single, gain=sp.ImmutableMatrix(gain), steps=steps, notes=(note, *single.notes),
                   extra={**single.extra, "gain_symbols": f * single.extra["gain_symbols"],
                          "direction": sp.ImmutableMatrix(f), "solution_kind": "direction"})
