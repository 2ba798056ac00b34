"""The vectorized path: every designed gain as one numpy function of the parameters.

All entries of all parts are compiled together with ``sympy.lambdify`` after
common-subexpression elimination, so a grid of a million points costs one
pass of numpy arithmetic. Parameters not given are held at their nominal value.

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

from ..numeric import lambdify

from ..design import Design, gain_labels
from ..errors import DesignError, ModelError, Where

__all__ = ["GainEntry", "gain_entries", "gain_functions", "GainEvaluator"]

_EXTRA_SYMBOL = {"integral_gain": "Ki"}


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
    """All gains (and the validity conditions) compiled once for numpy arrays.

    ``evaluator(values)`` takes a dict name -> float or array (missing names at
    nominal) and returns ``(gains, valid)``: an array of shape
    ``(n_gains, *broadcast_shape)`` and a boolean array that is False where a
    ``valid_when`` condition fails or a gain is not a finite real number.
    """

    def __init__(self, design: Design, tol: float = 1e-9):
        model = design.model
        self.design = design
        self.entries = gain_entries(design)
        if not self.entries:
            raise DesignError("the model asks for no gain to evaluate", where=Where(model.source))
        free = set().union(*(e.expr.free_symbols for e in self.entries)) - set(model.symbols.values())
        if free:
            raise DesignError("gains still contain free symbols " + ", ".join(sorted(map(str, free)))
                              + "; fix them before sweeping", where=Where(model.source))
        self.names = [p.name for p in model.parameters]
        self.nominal = model.nominal_values()
        args = [p.symbol for p in model.parameters]
        self._gains = lambdify(args, [e.expr for e in self.entries], modules="numpy", cse=True)
        self.conditions = list(design.valid_when)
        self.tol = tol
        self._conditions = []
        for cond in self.conditions:
            if isinstance(cond, sp.Ne):
                f = sp.expand(cond.lhs - cond.rhs)
                terms = list(sp.Add.make_args(f))
                self._conditions.append(("ne", lambdify(args, [f, *terms], modules="numpy", cse=True)))
            else:
                self._conditions.append(("rel", lambdify(args, cond, modules="numpy")))

    def _args(self, values: dict) -> list:
        unknown = set(values) - set(self.names)
        if unknown:
            raise ModelError(f"unknown parameter {sorted(unknown)[0]!r}; declared: {', '.join(self.names)}")
        args = []
        for name in self.names:
            if name in values:
                value = values[name]
                if isinstance(value, (str, bytes, bool)):
                    raise ModelError(f"parameter {name!r} must be a number or an array of numbers, "
                                     f"found {type(value).__name__}")
                try:
                    args.append(np.asarray(value, dtype=float))
                except (TypeError, ValueError):
                    raise ModelError(f"parameter {name!r} must be a number or an array of numbers") from None
            elif name in self.nominal:
                args.append(np.asarray(self.nominal[name], dtype=float))
            else:
                raise ModelError(f"parameter {name!r} has no nominal value", where=Where(key=f"parameters.{name}"))
        return args

    def __call__(self, values: dict) -> tuple[np.ndarray, np.ndarray]:
        args = self._args(values)
        shape = np.broadcast_shapes(*(a.shape for a in args))
        with np.errstate(all="ignore"):
            raw = self._gains(*args)
            gains = np.empty((len(self.entries), *shape), dtype=float)
            finite = np.ones(shape, dtype=bool)
            for k, value in enumerate(raw):
                value = np.broadcast_to(np.asarray(value), shape)
                if np.iscomplexobj(value):
                    real = np.abs(value.imag) <= 1e-9 * np.maximum(1.0, np.abs(value.real))
                    finite &= real
                    value = value.real
                gains[k] = value
                finite &= np.isfinite(value)
            valid = finite & self.conditions_hold(args, shape)
        return gains, valid

    def conditions_hold(self, args, shape) -> np.ndarray:
        """True where every ``valid_when`` condition holds (round-off zeros count as zero)."""
        ok = np.ones(shape, dtype=bool)
        for kind, func in self._conditions:
            if kind == "ne":
                f, *terms = (np.broadcast_to(np.abs(np.asarray(v)), shape) for v in func(*args))
                scale = np.maximum.reduce([np.ones(shape), *terms])
                ok &= f > self.tol * scale
            else:
                ok &= np.broadcast_to(np.asarray(func(*args), dtype=bool), shape)
        return ok

    def failed_conditions(self, point: dict) -> list[str]:
        """The conditions that fail at one point, as text (for the table's reason column)."""
        args = self._args(point)
        failed = []
        for cond, (kind, func) in zip(self.conditions, self._conditions):
            if not self._one_holds(kind, func, args):
                failed.append(sp.sstr(cond))
        return failed

    def _one_holds(self, kind, func, args) -> bool:
        with np.errstate(all="ignore"):
            if kind == "ne":
                f, *terms = (abs(complex(v)) for v in func(*args))
                return f > self.tol * max([1.0, *terms])
            return bool(func(*args))


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
