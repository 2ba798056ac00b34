"""The plant model: parameters, matrices and design targets as sympy objects.

A :class:`Model` is built once, validated at construction and not changed
afterwards. Loaders (TOML file, LaTeX, equations of motion, Python API) end
here: nothing downstream knows where a model came from.

>>> import sympy as sp
>>> m = Parameter.declare("m", sign="positive", range=(1, 2))
>>> model = Model(name="cart", parameters=(m,), states=("p", "v"), inputs=("F",),
...               A=sp.Matrix([[0, 1], [0, 0]]), B=sp.Matrix([[0], [1 / m.symbol]]),
...               feedback=TargetSpec("poles", {"poles": (-1, -1)}))
>>> model.n_states, model.n_inputs
(2, 1)
>>> model.nominal_values()
{'m': 1.5}
"""
from __future__ import annotations

import re
from dataclasses import dataclass, field
from typing import Any, Mapping

import sympy as sp

from ..errors import ModelError, Where

__all__ = ["Parameter", "TargetSpec", "Model", "SIGNS", "ROLES", "TARGET_KINDS"]

SIGNS = ("positive", "nonnegative", "nonzero", "real")
ROLES = ("plant", "design")
TARGET_KINDS = ("poles", "polynomial", "prototype", "damping", "settling", "z_poles", "deadbeat")
_IDENTIFIER = re.compile(r"^[A-Za-z][A-Za-z0-9_]*$")

S = sp.Symbol("s")  # the Laplace variable, shared by all modules
Z = sp.Symbol("z")  # the shift variable of sampled-data designs


def _assumptions(sign: str) -> dict[str, bool]:
    return {
        "positive": {"positive": True},
        "nonnegative": {"nonnegative": True, "real": True},
        "nonzero": {"nonzero": True, "real": True},
        "real": {"real": True},
    }[sign]


# The standard normalized pole patterns a target may name (tables in symgain.design.prototypes).
PROTOTYPE_NAMES: tuple[str, ...] = ("binomial", "butterworth", "bessel", "itae")


@dataclass(frozen=True)
class Parameter:
    """A declared symbol: physical parameter (role "plant") or design knob."""

    name: str
    symbol: sp.Symbol
    sign: str = "real"
    range: tuple[float, float] | None = None
    nominal: float | None = None
    role: str = "plant"
    unit: str = ""
    meaning: str = ""

    @classmethod
    def declare(cls, name: str, *, sign: str = "real", range=None, nominal=None,
                role: str = "plant", unit: str = "", meaning: str = "",
                where: Where | None = None) -> "Parameter":
        """Validate the fields and create the sympy symbol with its sign assumption."""
        where = where or Where(key=f"parameters.{name}")
        if not _IDENTIFIER.match(name):
            raise ModelError(f"parameter name {name!r} is not an identifier", where=where)
        if sign not in SIGNS:
            raise ModelError(f"sign {sign!r} is not one of {', '.join(SIGNS)}", where=where)
        if role not in ROLES:
            raise ModelError(f"role {role!r} is not one of {', '.join(ROLES)}", where=where)
        if range is not None:
            try:
                low, high = (float(v) for v in range)
            except (TypeError, ValueError):
                raise ModelError(f"range must be [low, high] numbers, found {range!r}", where=where) from None
            if not low <= high:
                raise ModelError(f"range [{low}, {high}] has low above high", where=where)
            range = (low, high)
        if nominal is None and range is not None:
            nominal = (range[0] + range[1]) / 2
        if nominal is not None:
            try:
                nominal = float(nominal)
            except (TypeError, ValueError):
                raise ModelError(f"nominal must be a number, found {nominal!r}", where=where) from None
            if range is not None and not range[0] <= nominal <= range[1]:
                raise ModelError(f"nominal {nominal} lies outside range {list(range)}", where=where)
        for value in ([nominal] if nominal is not None else []) + list(range or []):
            if sign == "positive" and value <= 0 or sign == "nonnegative" and value < 0:
                raise ModelError(f"value {value} contradicts sign {sign!r}", where=where)
        symbol = sp.Symbol(name, **_assumptions(sign))
        return cls(name, symbol, sign, range, nominal, role, unit, meaning)


@dataclass(frozen=True)
class TargetSpec:
    """One design target as given by the user (values already sympy objects).

    ``kind`` is one of :data:`TARGET_KINDS`; ``values`` holds its keys:
    ``poles`` (tuple), ``polynomial`` (expr in s), ``prototype`` + ``bandwidth``,
    ``damping`` + ``natural_frequency`` (+ ``extra_poles``),
    ``settling_time`` + ``overshoot`` (+ ``extra_poles``).
    """

    kind: str
    values: Mapping[str, Any]
    where: Where = field(default_factory=Where)

    def __post_init__(self):
        if self.kind not in TARGET_KINDS:
            raise ModelError(f"unknown target kind {self.kind!r}", where=self.where)


@dataclass(frozen=True)
class Model:
    """A linear(ized) plant x' = A x + B u, y = C x + D u with its design targets."""

    name: str
    parameters: tuple[Parameter, ...]
    states: tuple[str, ...]
    inputs: tuple[str, ...]
    A: sp.Matrix
    B: sp.Matrix
    outputs: tuple[str, ...] = ()
    C: sp.Matrix | None = None
    D: sp.Matrix | None = None
    title: str = ""
    feedback: TargetSpec | None = None
    estimator: TargetSpec | None = None
    integral: TargetSpec | None = None
    feedforward: bool = False
    pattern: tuple[tuple[Any, ...], ...] | None = None
    source: str | None = None
    notes: tuple[str, ...] = ()
    extra: Mapping[str, Any] = field(default_factory=dict)
    sampling: Any = None  # symgain.model.sampling_keys.Sampling: a sampled-data design
    input_limits: tuple = ()  # (input, min, max, rate) for the emitted controller
    anti_windup: Mapping[str, Any] | None = None  # {"method": ..., "tracking_time": ...}

    def __post_init__(self):
        where = Where(self.source, "plant")
        A = sp.ImmutableMatrix(self.A)
        B = sp.ImmutableMatrix(self.B)
        object.__setattr__(self, "A", A)
        object.__setattr__(self, "B", B)
        if not _IDENTIFIER.match(self.name or ""):
            raise ModelError(f"name {self.name!r} must be an identifier", where=Where(self.source, "name"))
        if A.rows != A.cols:
            raise ModelError(f"A must be square, found {A.rows}x{A.cols}", where=where.child("A"))
        if A.rows != len(self.states):
            raise ModelError(f"A is {A.rows}x{A.cols} but {len(self.states)} states are named",
                             where=where.child("A"))
        if B.rows != A.rows:
            raise ModelError(f"B must have {A.rows} rows (one per state), found {B.rows}",
                             where=where.child("B"))
        if B.cols != len(self.inputs):
            raise ModelError(f"B has {B.cols} columns but {len(self.inputs)} inputs are named",
                             where=where.child("B"))
        if self.C is not None:
            C = sp.ImmutableMatrix(self.C)
            object.__setattr__(self, "C", C)
            if C.cols != A.rows:
                raise ModelError(f"C must have {A.rows} columns, found {C.cols}", where=where.child("C"))
            if self.outputs and C.rows != len(self.outputs):
                raise ModelError(f"C has {C.rows} rows but {len(self.outputs)} outputs are named",
                                 where=where.child("C"))
        if self.D is not None:
            object.__setattr__(self, "D", sp.ImmutableMatrix(self.D))
        names = [p.name for p in self.parameters]
        for label, group in (("state", self.states), ("input", self.inputs), ("output", self.outputs)):
            for n in group:
                if not _IDENTIFIER.match(n):
                    raise ModelError(f"{label} name {n!r} is not an identifier", where=where)
                if n in names:
                    raise ModelError(f"{label} name {n!r} clashes with a parameter", where=where)
        declared = {p.symbol for p in self.parameters}
        for key, mat in (("A", A), ("B", B), ("C", self.C), ("D", self.D)):
            if mat is None:
                continue
            stray = mat.free_symbols - declared
            if stray:
                raise ModelError(f"undeclared symbol {sorted(map(str, stray))[0]!r}", where=where.child(key))

    # -- convenient views -------------------------------------------------
    @property
    def n_states(self) -> int:
        return self.A.rows

    @property
    def n_inputs(self) -> int:
        return self.B.cols

    @property
    def n_outputs(self) -> int:
        return 0 if self.C is None else self.C.rows

    @property
    def symbols(self) -> dict[str, sp.Symbol]:
        """Parameter name -> sympy symbol, in declaration order."""
        return {p.name: p.symbol for p in self.parameters}

    def parameter(self, name: str) -> Parameter:
        for p in self.parameters:
            if p.name == name:
                return p
        raise KeyError(name)

    def nominal_values(self) -> dict[str, float]:
        """Nominal value of every parameter that has one."""
        return {p.name: p.nominal for p in self.parameters if p.nominal is not None}

    def _repr_markdown_(self) -> str:
        """Jupyter display: parameters, matrices and targets (see :mod:`symgain.notebook`)."""
        from ..notebook import model_markdown

        return model_markdown(self)
