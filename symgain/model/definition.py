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

import math
import numbers
from dataclasses import dataclass, field
from typing import Any, Mapping

import sympy as sp

from ..errors import ModelError, Where, printable
from .identifiers import describe_name, is_identifier

__all__ = ["Parameter", "TargetSpec", "Model", "SIGNS", "ROLES", "TARGET_KINDS"]

SIGNS = ("positive", "nonnegative", "nonzero", "real")
ROLES = ("plant", "design")
TARGET_KINDS = ("poles", "polynomial", "prototype", "damping", "settling", "z_poles", "deadbeat")
#: target keys kept as given (read by the design stage), never read as expressions
_RAW_TARGET_KEYS = ("pattern", "input_direction", "output_direction", "prototype", "branch", "method", "deadbeat",
                    "target_split")
MAX_TEXT = 2000  # characters of a title, meaning, unit or note

S = sp.Symbol("s")  # the Laplace variable, shared by all modules
Z = sp.Symbol("z")  # the shift variable of sampled-data designs
MAX_DIMENSION = 100  # states, inputs or outputs of one model


def _safe_matrix(value, symbols: Mapping[str, sp.Symbol], where: Where) -> sp.ImmutableMatrix:
    """A matrix from sympy, or from rows whose text entries go through the safe reader.

    Nothing is handed to ``sympy.sympify``: text is read by
    :func:`symgain.expressions.parse_expression` (so ``"__import__('os')"`` is
    refused, never run), numbers become exact, anything else is refused.

    >>> _safe_matrix([["0", 1], [0.5, "-2"]], {}, Where(key="plant.A"))
    Matrix([
    [  0,  1],
    [1/2, -2]])
    """
    from .expressions import parse_expression

    if isinstance(value, sp.MatrixBase):
        rows = value.tolist()
    elif hasattr(value, "tolist") and not isinstance(value, (str, bytes)):  # numpy arrays
        rows = value.tolist()
    else:
        rows = value
    if not isinstance(rows, (list, tuple)) or not rows or not all(isinstance(r, (list, tuple)) for r in rows):
        raise ModelError(f"must be a matrix (a list of rows), found {type(value).__name__} {_shown(value)}",
                         where=where)
    if len(rows) > MAX_DIMENSION or any(len(r) > MAX_DIMENSION for r in rows):
        raise ModelError(f"matrices up to {MAX_DIMENSION} x {MAX_DIMENSION} are supported", where=where)
    width = len(rows[0])
    out = []
    for i, row in enumerate(rows):
        if len(row) != width or not width:
            raise ModelError(f"row {i} has {len(row)} entries but row 0 has {width}", where=where.at(i))
        entries = []
        for j, entry in enumerate(row):
            if isinstance(entry, sp.Basic) and not isinstance(entry, sp.MatrixBase):
                if entry.has(sp.zoo, sp.nan, sp.oo, -sp.oo):
                    raise ModelError("entry has no finite value", where=where.at(i, j))
                entries.append(entry)
            elif isinstance(entry, (str, int, float)) and not isinstance(entry, bool):
                entries.append(parse_expression(entry, symbols, where=where.at(i, j)))
            elif isinstance(entry, numbers.Real) and not isinstance(entry, bool):
                entries.append(parse_expression(float(entry), symbols, where=where.at(i, j)))
            else:
                raise ModelError(f"entry must be an expression, found {type(entry).__name__} "
                                 f"{_shown(entry)}", where=where.at(i, j))
        out.append(entries)
    return sp.ImmutableMatrix(out)


def _assumptions(sign: str) -> dict[str, bool]:
    return {
        "positive": {"positive": True},
        "nonnegative": {"nonnegative": True, "real": True},
        "nonzero": {"nonzero": True, "real": True},
        "real": {"real": True},
    }[sign]


# The standard normalized pole patterns a target may name (tables in symgain.design.prototypes).
PROTOTYPE_NAMES: tuple[str, ...] = ("binomial", "butterworth", "bessel", "itae")


def _shown(value) -> str:
    """A value as echoed in a message: its repr, one line, at most about 60 characters."""
    import reprlib

    short = reprlib.Repr()
    short.maxstring, short.maxother, short.maxlist, short.maxlevel = 50, 50, 4, 2
    return printable(short.repr(value), 70)


def _real_number(label: str, value, where: Where) -> float:
    """A finite real number given as a number (never text, a boolean or nan)."""
    if isinstance(value, bool) or not isinstance(value, (numbers.Real, sp.Number)) \
            or (isinstance(value, sp.Number) and not value.is_real):
        raise ModelError(f"{label} must be a number, found {type(value).__name__} {_shown(value)}",
                         where=where)
    try:
        number = float(value)
    except (TypeError, ValueError, OverflowError):
        raise ModelError(f"{label} must be a finite number, found {_shown(value)}", where=where) from None
    if not math.isfinite(number) or abs(number) > 1e300:
        raise ModelError(f"{label} must be a finite number, found {_shown(value)}", where=where)
    return number


def _text_field(label: str, value, where: Where) -> str:
    if value is None:
        return ""
    if not isinstance(value, str):
        raise ModelError(f"{label} must be text, found {type(value).__name__} {_shown(value)}", where=where)
    if len(value) > MAX_TEXT:
        raise ModelError(f"{label} is longer than {MAX_TEXT} characters", where=where)
    return value


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
        where = where or Where(key=f"parameters.{printable(name, 60)}")
        from .expressions import RESERVED_NAMES

        if not is_identifier(name):
            raise ModelError(f"parameter name {_shown(name)} is not a name: {describe_name(name)}", where=where)
        if name in RESERVED_NAMES:
            raise ModelError(f"{name!r} is reserved and cannot be a parameter", where=where)
        for label, value, choices in (("sign", sign, SIGNS), ("role", role, ROLES)):
            if not isinstance(value, str) or value not in choices:
                raise ModelError(f"{label} {_shown(value)} is not one of {', '.join(choices)}", where=where)
        unit = _text_field("unit", unit, where)
        meaning = _text_field("meaning", meaning, where)
        if range is not None:
            if not isinstance(range, (list, tuple)) or len(range) != 2:
                raise ModelError(f"range must be [low, high] numbers, found {_shown(range)}", where=where)
            low, high = (_real_number("range", v, where) for v in range)
            if not low <= high:
                raise ModelError(f"range [{low:g}, {high:g}] has low above high", where=where)
            range = (low, high)
        if nominal is None and range is not None:
            nominal = (range[0] + range[1]) / 2
        if nominal is not None:
            nominal = _real_number("nominal", nominal, where)
            if range is not None and not range[0] <= nominal <= range[1]:
                raise ModelError(f"nominal {nominal:g} lies outside range [{range[0]:g}, {range[1]:g}]",
                                 where=where)
        for value in ([nominal] if nominal is not None else []) + list(range or []):
            if sign != "nonzero" and not sign_admits(sign, value):
                raise ModelError(f"value {value:g} contradicts sign {sign!r}", where=where)
        if nominal is not None and not sign_admits(sign, nominal):
            raise ModelError("nominal value 0 contradicts sign 'nonzero'", where=where)
        symbol = sp.Symbol(name, **_assumptions(sign))
        return cls(name, symbol, sign, range, nominal, role, unit, meaning)

    def admits(self, value: float) -> bool:
        """Whether ``value`` agrees with the declared sign (the range is not consulted).

        >>> Parameter.declare("m", sign="positive").admits(0.0)
        False
        """
        return sign_admits(self.sign, value)


def sign_admits(sign: str, value: float) -> bool:
    """The one sign rule: positive > 0, nonnegative >= 0, nonzero != 0, real anything (NaN never).

    >>> [sign_admits(s, 0.0) for s in ("positive", "nonnegative", "nonzero", "real")]
    [False, True, False, True]
    """
    if value != value:
        return False
    return {"positive": value > 0, "nonnegative": value >= 0, "nonzero": value != 0}.get(sign, True)


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
        if not isinstance(self.where, Where):
            object.__setattr__(self, "where", Where())
        if not isinstance(self.kind, str) or self.kind not in TARGET_KINDS:
            raise ModelError(f"unknown target kind {_shown(self.kind)}; choose one of "
                             f"{', '.join(TARGET_KINDS)}", where=self.where)
        if not isinstance(self.values, Mapping):
            raise ModelError(f"target values must be a dict, found {type(self.values).__name__}",
                             where=self.where)
        for key, value in self.values.items():
            if key in _RAW_TARGET_KEYS:
                continue
            if key in ("poles", "extra_poles", "z_poles") and not isinstance(value, (list, tuple)):
                raise ModelError(f"{key} must be a list, found {type(value).__name__} {_shown(value)}",
                                 where=self.where)
            for item in (value if isinstance(value, (list, tuple)) else [value]):
                if isinstance(item, bool) or not isinstance(item, (str, int, float, sp.Basic)) \
                        or isinstance(item, sp.MatrixBase):
                    raise ModelError(f"target value {key} must be an expression, found "
                                     f"{type(item).__name__} {_shown(item)}", where=self.where)

    def read_with(self, symbols: Mapping[str, sp.Symbol]) -> "TargetSpec":
        """The same target with every text value read by the safe expression reader.

        >>> w = sp.Symbol("w", positive=True)
        >>> TargetSpec("poles", {"poles": ["-w", -2]}).read_with({"w": w}).values["poles"]
        (-w, -2)
        """
        from .expressions import parse_expression

        def read(key, item, index=None):
            where = self.where.child(key) if self.where.key else Where(self.where.file, key)
            where = where.at(index) if index is not None else where
            if isinstance(item, sp.Basic):
                return item
            extra = {"s": S} if key == "polynomial" else None
            return parse_expression(item, symbols, where=where, extra=extra)

        values: dict[str, Any] = {}
        for key, value in self.values.items():
            if key in _RAW_TARGET_KEYS:
                values[key] = value
            elif isinstance(value, (list, tuple)):
                values[key] = tuple(read(key, item, i) for i, item in enumerate(value))
            else:
                values[key] = read(key, value)
        return TargetSpec(self.kind, values, self.where)


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
        where = Where(self.source if isinstance(self.source, str) else None, "plant")
        self._check_fields()
        symbols = {p.name: p.symbol for p in self.parameters}
        A = _safe_matrix(self.A, symbols, where.child("A"))
        B = _safe_matrix(self.B, symbols, where.child("B"))
        object.__setattr__(self, "A", A)
        object.__setattr__(self, "B", B)
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
            C = _safe_matrix(self.C, symbols, where.child("C"))
            object.__setattr__(self, "C", C)
            if C.cols != A.rows:
                raise ModelError(f"C must have {A.rows} columns, found {C.cols}", where=where.child("C"))
            if self.outputs and C.rows != len(self.outputs):
                raise ModelError(f"C has {C.rows} rows but {len(self.outputs)} outputs are named",
                                 where=where.child("C"))
        if self.D is not None:
            object.__setattr__(self, "D", _safe_matrix(self.D, symbols, where.child("D")))
        for part in ("feedback", "estimator", "integral"):
            spec = getattr(self, part)
            if spec is not None:
                if not isinstance(spec, TargetSpec):
                    raise ModelError(f"{part} must be a TargetSpec, found {type(spec).__name__}",
                                     where=Where(where.file, part))
                object.__setattr__(self, part, spec.read_with(symbols))
        names = [p.name for p in self.parameters]
        for label, group in (("state", self.states), ("input", self.inputs), ("output", self.outputs)):
            for n in group:
                if not is_identifier(n):
                    raise ModelError(f"{label} name {_shown(n)} is not a name: {describe_name(n)}",
                                     where=where)
                if n in names:
                    raise ModelError(f"{label} name {n!r} clashes with a parameter", where=where)
        declared = {p.symbol for p in self.parameters}
        for key, mat in (("A", A), ("B", B), ("C", self.C), ("D", self.D)):
            if mat is None:
                continue
            stray = mat.free_symbols - declared
            if stray:
                raise ModelError(f"undeclared symbol {sorted(map(str, stray))[0]!r}", where=where.child(key))

    def _check_fields(self) -> None:
        """Types of the plain fields: refused, never coerced (a string is not a list of names)."""
        top = Where(self.source if isinstance(self.source, str) else None)
        if not is_identifier(self.name):
            raise ModelError(f"name {_shown(self.name)} is not a name: {describe_name(self.name)}",
                             where=top.child("name"))
        for label in ("states", "inputs", "outputs"):
            group = getattr(self, label)
            if isinstance(group, (str, bytes)) or not isinstance(group, (list, tuple)):
                raise ModelError(f"{label} must be a list of names, found {type(group).__name__} "
                                 f"{_shown(group)}", where=top.child(label))
            if len(group) > MAX_DIMENSION:
                raise ModelError(f"{len(group)} {label}; at most {MAX_DIMENSION} are supported",
                                 where=top.child(label))
            if len(set(map(str, group))) != len(group):
                raise ModelError(f"names repeat in {label}", where=top.child(label))
            object.__setattr__(self, label, tuple(group))
        params = self.parameters
        if isinstance(params, (list, tuple)) and all(isinstance(p, Parameter) for p in params):
            object.__setattr__(self, "parameters", tuple(params))
        else:
            raise ModelError("parameters must be a list of Parameter objects", where=top.child("parameters"))
        if len({p.name for p in params}) != len(params):
            raise ModelError("parameter names repeat", where=top.child("parameters"))
        if not isinstance(self.feedforward, bool):
            raise ModelError(f"feedforward must be True or False, found {type(self.feedforward).__name__} "
                             f"{_shown(self.feedforward)}", where=top.child("feedforward"))
        object.__setattr__(self, "title", _text_field("title", self.title, top.child("title")))
        notes = self.notes
        if isinstance(notes, str) or not isinstance(notes, (list, tuple)) \
                or not all(isinstance(n, str) for n in notes):
            raise ModelError("notes must be a list of texts", where=top.child("notes"))
        object.__setattr__(self, "notes", tuple(notes))

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
