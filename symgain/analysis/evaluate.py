"""The vectorized path: every designed gain as one numpy function of the parameters.

The functions are those of the emitted Python module (shared subexpressions
computed once), so a grid of a million points costs one pass of numpy
arithmetic, and a schedule evaluates exactly the code a user ships.
Parameters not given are held at their nominal value.

>>> import numpy as np, sympy as sp
>>> from symgain.model import Model, Parameter, TargetSpec
>>> from symgain.design import derive
>>> m = Parameter.declare("m", sign="positive", range=(1, 3), nominal=2)
>>> w = Parameter.declare("w", sign="positive", range=(1, 3), role="design")
>>> model = Model(name="cart", parameters=(m, w), states=("p", "v"), inputs=("F",),
...               A=sp.Matrix([[0, 1], [0, 0]]), B=sp.Matrix([[0], [1 / m.symbol]]),
...               feedback=TargetSpec("poles", {"poles": (-w.symbol, -w.symbol)}))
>>> funcs = gain_functions(derive(model))
>>> list(funcs)
['K[F,p]', 'K[F,v]']
>>> funcs["K[F,p]"](m=np.array([1.0, 2.0]), w=3.0)
array([ 9., 18.])
>>> float(funcs["K[F,v]"]())  # nominal m = 2, w = 2
8.0
"""
from __future__ import annotations

import re
from dataclasses import dataclass
from typing import Callable

import numpy as np
import sympy as sp


from ..design import EXTRA_SYMBOLS, Design, gain_labels
from ..errors import DesignError, ModelError, Where
from ..mathtext import math_text

__all__ = ["GainEntry", "gain_entries", "gain_functions", "GainEvaluator"]

_EXTRA_SYMBOL = EXTRA_SYMBOLS


@dataclass(frozen=True)
class GainEntry:
    """One scalar gain: where it sits and its formula."""

    part: str
    symbol: str  # K, L, Ki, ...
    row: int
    col: int
    label: str  # K[F_cmd,x]
    identifier: str  # K_F_cmd_x (safe for C and CSV headers)
    expr: sp.Expr




def gain_entries(design: Design) -> list[GainEntry]:
    """Every scalar gain of every part (the main gain, then extra matrices such as Ki)."""
    out: list[GainEntry] = []
    for part in design.parts():
        mats = [(part.symbol, part.part, part.gain)]
        for key, value in part.extra.items():
            if key != "gain_symbols" and isinstance(value, sp.MatrixBase):
                mats.append((_EXTRA_SYMBOL.get(key, key), key, value))
        for symbol, key, mat in mats:
            rl, cl = gain_labels(design.model, key, mat.rows, mat.cols)
            for i in range(mat.rows):
                for j in range(mat.cols):
                    ident = re.sub(r"\W", "_", f"{symbol}_{rl[i]}_{cl[j]}")
                    out.append(GainEntry(part.part, symbol, i, j, f"{symbol}[{rl[i]},{cl[j]}]",
                                         ident, sp.sympify(mat[i, j], strict=True)))
    return out


class GainEvaluator:
    """All gains (and the validity conditions) of a design, for numpy arrays.

    The arithmetic is the emitted Python module's (:func:`symgain.emit.python.python_module`,
    run in memory): schedules, lookup tables and the generated code evaluate the same text,
    with the same validity rule. ``evaluator(values)`` takes a dict name -> float or array
    (missing names at nominal) and returns ``(gains, valid)``: an array of shape
    ``(n_gains, *broadcast_shape)`` and a boolean array that is False where a
    ``valid_when`` condition fails or a gain is not a finite real number.
    Sweeps (schedules, robustness, sensitivity) may go past the declared ranges on
    purpose, so the evaluator calls the functions with ``check_ranges=False``; the
    declared signs still hold.
    """

    def __init__(self, design: Design):
        from ..emit.common import PYTHON_RESERVED, design_functions, mangle
        from ..emit.python import python_module

        model = design.model
        self.design = design
        self.entries = gain_entries(design)
        if not self.entries:
            raise DesignError("the model asks for no gain to evaluate", where=Where(model.source))
        named = {sym for part in design.parts() for sym, _ in part.definitions}  # compact forms
        free = set().union(*(e.expr.free_symbols for e in self.entries)) - set(model.symbols.values()) - named
        if free:
            raise DesignError("gains still contain free symbols " + ", ".join(sorted(map(str, free)))
                              + "; fix them before sweeping", where=Where(model.source))
        self.names = [p.name for p in model.parameters]
        self.nominal = model.nominal_values()
        self.conditions = list(design.valid_when)
        self._keyword = {name: mangle(name, PYTHON_RESERVED) for name in self.names}
        namespace: dict = {}
        exec(compile(python_module(design), f"<gains of {model.name}>", "exec"), namespace)
        functions = [fn for fn in design_functions(design)
                     if not fn.name.endswith(f"_branch_{fn.branch}")]  # the branch shown, not the others
        self._functions = [(namespace[fn.name], fn.shape) for fn in functions]
        self._plain = {}  # the emitted module's condition text -> plain mathematics
        for fn in functions:
            self._plain.update({sp.sstr(c) + " != 0": math_text(c) + " != 0" for c in fn.conditions})
            self._plain.update({sp.sstr(c) + " >= 0": math_text(c) + " >= 0" for c in fn.nonnegative})

    def _args(self, values: dict) -> dict[str, np.ndarray]:
        unknown = set(values) - set(self.names)
        if unknown:
            raise ModelError(f"unknown parameter {sorted(unknown)[0]!r}; declared: {', '.join(self.names)}")
        args = {}
        for name in self.names:
            if name in values:
                value = values[name]
                if isinstance(value, (str, bytes, bool)):
                    raise ModelError(f"parameter {name!r} must be a number or an array of numbers, "
                                     f"found {type(value).__name__}")
                try:
                    args[self._keyword[name]] = np.asarray(value, dtype=float)
                except (TypeError, ValueError):
                    raise ModelError(f"parameter {name!r} must be a number or an array of numbers") from None
            elif name in self.nominal:
                args[self._keyword[name]] = np.asarray(self.nominal[name], dtype=float)
            else:
                raise ModelError(f"parameter {name!r} has no nominal value", where=Where(key=f"parameters.{name}"))
        return args

    def __call__(self, values: dict) -> tuple[np.ndarray, np.ndarray]:
        args = self._args(values)
        shape = np.broadcast_shapes(*(a.shape for a in args.values()))
        with np.errstate(all="ignore"):
            blocks = [func(**args, on_invalid="nan", check_ranges=False).reshape(shape + (rows * cols,))
                      for func, (rows, cols) in self._functions]
        gains = np.moveaxis(np.concatenate(blocks, axis=-1), -1, 0)
        return gains, np.isfinite(gains).all(axis=0)

    def slot_indices(self, slots) -> list[int]:
        """The row of each loop gain slot ``(symbol, part, gain symbol, row, col)`` in this evaluator's output
        (:func:`symgain.analysis.loops.closed_loop` with ``gain_slots=True``)."""
        where = {(e.part, e.symbol, e.row, e.col): k for k, e in enumerate(self.entries)}
        return [where[(part, symbol, i, j)] for _, part, symbol, i, j in slots]

    def failed_conditions(self, point: dict) -> list[str]:
        """The conditions that fail at one point, as text (for the table's reason column)."""
        args = self._args(point)
        failed = []
        with np.errstate(all="ignore"):
            for func, _ in self._functions:
                try:
                    func(**args, check_ranges=False)
                except ValueError as error:
                    message = str(error)
                    if "condition " in message:
                        said = message.split("condition ", 1)[1].split(" fails", 1)[0]
                    else:  # a declared sign or range: "function: m must be ... (declared sign), found ..."
                        said = message.split(": ", 1)[-1].split(", found", 1)[0].rstrip(",")
                    failed.append(self._plain.get(said, said))
        return list(dict.fromkeys(failed))


def gain_functions(design: Design) -> dict[str, Callable[..., np.ndarray]]:
    """Name -> function of keyword parameters (arrays broadcast; missing ones at nominal)."""
    evaluator = GainEvaluator(design)
    funcs = {}
    for k, entry in enumerate(evaluator.entries):
        def func(_k=k, **values):
            gains, _ = evaluator(values)
            return gains[_k]
        func.__doc__ = f"{entry.label} = {sp.sstr(entry.expr)}"
        funcs[entry.label] = func
    return funcs
