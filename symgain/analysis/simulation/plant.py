"""The simulated plant: the nonlinear equations of motion when the model has them, else the linear model.

:class:`PlantSpec` holds the plant symbolically (it pickles, so it travels to
worker processes); :meth:`PlantSpec.at` gives a :class:`NumericPlant` at the
true parameter values, with the equilibrium taken at the controller's values
(the operating point the controller was told about). Both plants work in the
linear model's deviation coordinates at their interface: states and outputs
are deviations from the equilibrium, inputs are added to the equilibrium input.

Between two samples the input is held (zero-order hold): the linear plant
advances by the exact matrix exponential, the nonlinear one by
``scipy.integrate.solve_ivp``.

>>> import sympy as sp
>>> from symgain.model import Model, Parameter, TargetSpec
>>> a = Parameter.declare("a", sign="positive", range=(1, 2))
>>> model = Model(name="tank", parameters=(a,), states=("h",), inputs=("u",), outputs=("h",),
...               A=sp.Matrix([[-a.symbol]]), B=sp.Matrix([[1]]), C=sp.Matrix([[1]]))
>>> plant = PlantSpec.from_model(model).at({"a": 1.0}, {"a": 1.0})
>>> x = plant.advance(np.array([0.0]), np.array([1.0]), 0.0, 1.0)   # x(1) = 1 - exp(-1)
>>> round(float(x[0]), 6), plant.nonlinear
(0.632121, False)
"""
from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np
import scipy.integrate
import scipy.linalg
import sympy as sp

__all__ = ["PlantSpec", "NumericPlant"]


@dataclass(frozen=True)
class PlantSpec:
    """What the simulation needs of a model's plant, as sympy objects."""

    parameters: tuple[sp.Symbol, ...]
    names: tuple[str, ...]
    states: tuple[str, ...]
    inputs: tuple[str, ...]
    A: sp.ImmutableMatrix
    B: sp.ImmutableMatrix
    C: sp.ImmutableMatrix
    D: sp.ImmutableMatrix
    equations: sp.ImmutableMatrix | None = None  # f(x, u) in absolute coordinates
    output_equations: sp.ImmutableMatrix | None = None  # h(x, u); None: y = C (x - x0)
    equilibrium: tuple[tuple[str, Any], ...] = ()

    @classmethod
    def from_model(cls, model) -> "PlantSpec":
        """The plant of a model (outputs default to the full state when it names none)."""
        n, m = model.n_states, model.n_inputs
        C = model.C if model.C is not None and model.C.rows else sp.eye(n)
        D = model.D if model.D is not None else sp.zeros(C.rows, m)
        eq = model.extra.get("equilibrium") or {}
        return cls(tuple(p.symbol for p in model.parameters), tuple(p.name for p in model.parameters),
                   tuple(model.states), tuple(model.inputs), sp.ImmutableMatrix(model.A),
                   sp.ImmutableMatrix(model.B), sp.ImmutableMatrix(C), sp.ImmutableMatrix(D),
                   model.extra.get("equations"), model.extra.get("output_equations"),
                   tuple((str(k), sp.sympify(v)) for k, v in eq.items()))

    @property
    def nonlinear(self) -> bool:
        return self.equations is not None

    def at(self, true: dict[str, float], assumed: dict[str, float]) -> "NumericPlant":
        """The plant with the true parameter values; equilibrium at the controller's (assumed) values."""
        return NumericPlant(self, true, assumed)


_LAMBDIFIED: dict[int, tuple] = {}  # per process: id of a spec -> its numeric functions


def _functions(spec: PlantSpec):
    key = id(spec)
    if key not in _LAMBDIFIED:
        xs = [sp.Symbol(n, real=True) for n in spec.states]
        us = [sp.Symbol(n, real=True) for n in spec.inputs]
        args = [*xs, *us, *spec.parameters]
        f = sp.lambdify(args, list(spec.equations), "numpy", cse=True) if spec.nonlinear else None
        h = sp.lambdify(args, list(spec.output_equations), "numpy", cse=True) \
            if spec.output_equations is not None else None
        lin = sp.lambdify(spec.parameters, [spec.A, spec.B, spec.C, spec.D], "numpy")
        eq = sp.lambdify(spec.parameters, [v for _, v in spec.equilibrium], "numpy") if spec.equilibrium else None
        _LAMBDIFIED[key] = (spec, f, h, lin, eq)  # keep spec alive so that its id stays unique
    return _LAMBDIFIED[key][1:]


class NumericPlant:
    """A plant at numeric parameter values: ``advance`` over one held sample, ``output``."""

    def __init__(self, spec: PlantSpec, true: dict[str, float], assumed: dict[str, float]):
        self.spec = spec
        self.nonlinear = spec.nonlinear
        f, h, lin, eq = _functions(spec)
        self._f, self._h = f, h
        self.true = [float(true[n]) for n in spec.names]
        A, B, C, D = (np.atleast_2d(np.array(M, dtype=float)) for M in lin(*self.true))
        self.A, self.B, self.C, self.D = A, B, C, D
        n, m = A.shape[0], B.shape[1]
        values = dict(zip((k for k, _ in spec.equilibrium), eq(*[float(assumed[n]) for n in spec.names]))) \
            if eq else {}
        self.x0 = np.array([float(values.get(s, 0.0)) for s in spec.states])
        self.u0 = np.array([float(values.get(u, 0.0)) for u in spec.inputs])
        self.y0 = self._absolute_output(self.x0, self.u0) if self.nonlinear else np.zeros(C.shape[0])
        self._steps: dict[float, tuple[np.ndarray, np.ndarray]] = {}
        self.n_states, self.n_inputs = n, m

    def _absolute_output(self, x_abs, u_abs):
        if self._h is None:
            return self.C @ (x_abs - self.x0) + self.D @ (u_abs - self.u0)
        return np.array(self._h(*x_abs, *u_abs, *self.true), dtype=float).reshape(-1)

    def _held(self, dt: float):
        dt = float(f"{dt:.12g}")  # t1 - t0 carries round-off; one matrix exponential per period
        if dt not in self._steps:
            n, m = self.n_states, self.n_inputs
            big = np.zeros((n + m, n + m))
            big[:n, :n], big[:n, n:] = self.A * dt, self.B * dt
            E = scipy.linalg.expm(big)
            self._steps[dt] = (E[:n, :n], E[:n, n:])
        return self._steps[dt]

    def advance(self, x: np.ndarray, u: np.ndarray, t0: float, t1: float) -> np.ndarray:
        """The state deviation at t1 from x at t0 with the input deviation u held."""
        if not self.nonlinear:
            Phi, Gamma = self._held(t1 - t0)
            return Phi @ x + Gamma @ u
        u_abs = self.u0 + u
        true = self.true

        def rhs(_t, z):
            return np.array(self._f(*z, *u_abs, *true), dtype=float)

        sol = scipy.integrate.solve_ivp(rhs, (t0, t1), self.x0 + x, method="RK45", rtol=1e-7, atol=1e-10)
        if not sol.success:
            return np.full_like(x, np.nan)
        return sol.y[:, -1] - self.x0

    def output(self, x: np.ndarray, u: np.ndarray) -> np.ndarray:
        """The output deviation y - y0 at state deviation x and input deviation u."""
        if not self.nonlinear:
            return self.C @ x + self.D @ u
        return self._absolute_output(self.x0 + x, self.u0 + u) - self.y0
