"""What every code emitter needs: the functions to write, names, shared subexpressions.

A design becomes a list of :class:`Function` objects, one per designed
matrix: ``<part>_gain`` for each part's gain, and one per extra matrix of a
part (named after its key; ``<part>_<key>`` when that name is taken). The
arguments are every declared parameter in declaration order, then the free
gains that the target left undetermined (sorted by name).

>>> import sympy as sp
>>> from symgain.model import Model, Parameter, TargetSpec
>>> from symgain.design import derive
>>> m = Parameter.declare("m", sign="positive", range=(1, 2))
>>> b = Parameter.declare("b", sign="real", range=(1, 2))
>>> model = Model(name="cart", parameters=(m, b), states=("p", "v"), inputs=("F",),
...               A=sp.Matrix([[0, 1], [0, 0]]), B=sp.Matrix([[0], [b.symbol / m.symbol]]),
...               feedback=TargetSpec("poles", {"poles": (-1, -1)}))
>>> [(f.name, f.label, f.arguments, f.conditions) for f in design_functions(derive(model))]
[('feedback_gain', 'K', ('m', 'b'), (b,))]
>>> failure_rule(sp.Symbol("b") - 1)
((b - 1,), (-1, b))

Validity rule (the same in Python and C): a condition ``Ne(f, 0)`` fails
where ``|f| <= tol * (1 + |t_1| + ... + |t_k|)`` with ``t_i`` the terms of
``f`` as written (so that a round-off zero counts as zero); ``tol`` is
``1e-12`` in double precision and ``1e-5`` in single precision.
"""
from __future__ import annotations

from dataclasses import dataclass

import sympy as sp

from ..design import Design
from ..model.identifiers import PYTHON_KEYWORDS

__all__ = ["Function", "design_functions", "failure_rule", "shared_subexpressions",
           "mangle", "TOLERANCE"]

TOLERANCE = {"double": 1e-12, "single": 1e-5}

PART_ORDER = ("feedback", "estimator", "integral", "feedforward")


@dataclass(frozen=True)
class Function:
    """One emitted function: a matrix of closed-form entries in the parameters."""

    name: str  # e.g. "feedback_gain"
    part: str  # "feedback", ...
    key: str  # "gain" or the key of part.extra
    label: str  # matrix name in formulas: K, L, ...
    matrix: sp.ImmutableMatrix
    arguments: tuple[str, ...]  # parameter names (declaration order), then free gains
    conditions: tuple[sp.Expr, ...]  # f of each Ne(f, 0), in the order of part.valid_when
    meanings: tuple[tuple[str, str, str, tuple | None], ...]  # (name, meaning, unit, range)

    @property
    def shape(self) -> tuple[int, int]:
        return self.matrix.rows, self.matrix.cols


def _condition_expr(cond) -> sp.Expr:
    if isinstance(cond, sp.Ne):
        return cond.lhs - cond.rhs if cond.rhs != 0 else cond.lhs
    raise TypeError(f"only Ne(f, 0) conditions can be emitted, found {cond}")


def design_functions(design: Design) -> list[Function]:
    """Every matrix of every part of the design, as functions to emit."""
    model = design.model
    params = [p.name for p in model.parameters]
    declared = {p.symbol for p in model.parameters}
    meanings = tuple((p.name, p.meaning, p.unit, p.range) for p in model.parameters)
    out: list[Function] = []
    taken: set[str] = set()
    for part in design.parts():
        matrices = [("gain", f"{part.part}_gain", part.symbol, part.gain)]
        for key, value in part.extra.items():
            if key == "gain_symbols" or not isinstance(value, sp.MatrixBase):
                continue
            name = key if key not in taken and key != f"{part.part}_gain" else f"{part.part}_{key}"
            matrices.append((key, name, key, value))
        conditions = tuple(_condition_expr(c) for c in part.valid_when)
        for key, name, label, matrix in matrices:
            taken.add(name)
            matrix = sp.ImmutableMatrix(matrix)
            free = sorted((s for s in matrix.free_symbols | {s for c in conditions for s in c.free_symbols}
                           if s not in declared), key=str)
            fm = tuple((str(s), "free gain left undetermined by the target", "", None) for s in free)
            out.append(Function(name, part.part, key, label, matrix, tuple(params) + tuple(map(str, free)),
                                conditions, meanings + fm))
    return out


def failure_rule(expr: sp.Expr) -> tuple[tuple[sp.Expr, ...], tuple[sp.Expr, ...]]:
    """``((f,), terms)``: the value and the terms whose sizes scale the zero test."""
    return (expr,), sp.Add.make_args(expr)


def shared_subexpressions(exprs, avoid, prefix: str = "t"):
    """``sympy.cse`` with temporaries named ``t0, t1, ...`` that avoid the given names.

    >>> x, y = sp.symbols("x y")
    >>> shared_subexpressions([(x + y)**2, sp.sin(x + y)], {"t0"})
    ([(t1, x + y)], [t1**2, sin(t1)])
    """
    names = sp.numbered_symbols(prefix, exclude={sp.Symbol(a) for a in avoid})
    replacements, reduced = sp.cse(list(exprs), symbols=names, order="none")
    return replacements, reduced


def mangle(name: str, reserved: set[str]) -> str:
    """A name that is not reserved: append ``_p`` until it is free (documented mangling).

    >>> mangle("int", {"int", "double"}), mangle("m", {"int"})
    ('int_p', 'm')
    """
    while name in reserved:
        name += "_p"
    return name


PYTHON_RESERVED = set(PYTHON_KEYWORDS) | {"numpy", "shape", "out", "_fails", "_bad", "_invalid_mask", "on_invalid"}
