"""Build models in Python, without a model file.

Two functions cover the two ways a plant is usually at hand in code: as
matrices (sympy matrices, lists of rows, or LaTeX strings) and as nonlinear
equations of motion with an equilibrium. Both end in the same validated
:class:`~symgain.model.Model` that a model file gives, so ``derive``,
``check_design`` and the emitters work the same on it.

>>> import sympy as sp
>>> from symgain import derive
>>> m, w = sp.symbols("m w", positive=True)
>>> model = model_from_matrices(
...     "cart", sp.Matrix([[0, 1], [0, 0]]), sp.Matrix([[0], [1 / m]]),
...     states=["p", "v"], inputs=["F"],
...     parameters={"m": {"sign": "positive", "range": [1, 3]},
...                 "w": {"sign": "positive", "range": [1, 4], "role": "design"}},
...     feedback={"poles": [-w, -2 * w]})
>>> derive(model).feedback.gain
Matrix([[2*m*w**2, 3*m*w]])

Expressions given as text follow the model-file syntax; sympy values are
written out as text and read back through the same safe reader, so both
routes validate alike. Names are matched by name: a sympy symbol ``m``
without assumptions becomes the declared parameter ``m`` with its sign.
"""
from __future__ import annotations

from typing import Any, Iterable, Mapping

import sympy as sp

from ..errors import ModelError, Where
from .definition import Model, Parameter, TargetSpec, _shown
from .toml_file import model_from_dict

__all__ = ["model_from_matrices", "model_from_equations"]

_PARAMETER_FIELDS = ("sign", "range", "nominal", "role", "unit", "meaning")


def _text(value: Any, where: str) -> Any:
    """A sympy value as model-file text; text and plain numbers pass unchanged."""
    if isinstance(value, bool):
        raise ModelError(f"expected an expression, found {value!r}", where=Where(key=where))
    if isinstance(value, (str, int, float)):
        return value
    if isinstance(value, sp.Basic):
        return sp.sstr(value).replace("Abs(", "abs(")
    raise ModelError(f"expected an expression, found {type(value).__name__} {_shown(value)}",
                     where=Where(key=where))


def _rows(value: Any, key: str) -> Any:
    """A matrix as lists of rows of text (a LaTeX string passes unchanged)."""
    if value is None or isinstance(value, str):
        return value
    if isinstance(value, sp.MatrixBase):
        return [[_text(value[i, j], key) for j in range(value.cols)] for i in range(value.rows)]
    if isinstance(value, (list, tuple)):
        return [[_text(v, key) for v in row] if isinstance(row, (list, tuple)) else row for row in value]
    raise ModelError(f"expected a matrix, found {type(value).__name__}", where=Where(key=key))


def _target(value: Any, key: str) -> Any:
    if value is None or isinstance(value, TargetSpec):
        return value
    if not isinstance(value, Mapping):
        raise ModelError(f"expected a table such as {{'poles': [...]}}, found {_shown(value)}",
                         where=Where(key=key))
    table = {}
    for name, entry in value.items():
        if name == "pattern":
            table[name] = [[_text(v, key) for v in row] for row in entry]
        elif isinstance(entry, (list, tuple)):
            table[name] = [_text(v, key) for v in entry]
        else:
            table[name] = _text(entry, key)
    return table


def _symbol_fields(symbol: sp.Symbol) -> dict:
    for sign in ("positive", "nonnegative", "nonzero"):
        if getattr(symbol, f"is_{sign}"):
            return {"sign": sign}
    return {}


def _parameters(parameters: Any, found: Iterable[sp.Basic]) -> dict:
    if parameters is None:  # declare what the sympy values use, with the symbols' own signs
        symbols = sorted({s for v in found if isinstance(v, sp.Basic) for s in v.free_symbols}, key=str)
        return {s.name: _symbol_fields(s) for s in symbols}
    if isinstance(parameters, Mapping):
        return {name: dict(spec) if isinstance(spec, Mapping) else spec for name, spec in parameters.items()}
    table = {}
    for p in parameters:
        if not isinstance(p, Parameter):
            raise ModelError(f"parameters must be Parameter objects or a dict, found {_shown(p)}",
                             where=Where(key="parameters"))
        table[p.name] = {f: getattr(p, f) for f in _PARAMETER_FIELDS if getattr(p, f) not in (None, "")}
    return table


def _sympy_values(*values) -> list[sp.Basic]:
    found = []
    for v in values:
        if isinstance(v, sp.MatrixBase):
            found.extend(v)
        elif isinstance(v, sp.Basic):
            found.append(v)
        elif isinstance(v, Mapping):
            found.extend(_sympy_values(*v.values()))
        elif isinstance(v, (list, tuple)):
            found.extend(_sympy_values(*v))
    return found


def _names(value: Any, key: str) -> list[str] | None:
    """A list of names; a bare string is refused (``states="pv"`` is not two states)."""
    if value is None:
        return None
    if isinstance(value, (str, bytes)) or not isinstance(value, (list, tuple)):
        raise ModelError(f"{key} must be a list of names, found {type(value).__name__} {_shown(value)}",
                         where=Where(key=key))
    return list(value)


def _build(name, title, plant, parameters, targets, feedforward, source) -> Model:
    if not isinstance(feedforward, bool):
        raise ModelError(f"feedforward must be True or False, found {type(feedforward).__name__} "
                         f"{_shown(feedforward)}", where=Where(key="feedforward"))
    if not isinstance(title, str):
        raise ModelError(f"title must be text, found {type(title).__name__}", where=Where(key="title"))
    data: dict[str, Any] = {"name": name, "plant": plant, "parameters": parameters}
    if title:
        data["title"] = title
    specs = {}
    for part, value in targets.items():
        if isinstance(value, TargetSpec):
            specs[part] = value
        elif value is not None:
            data[part] = _target(value, part)
    if feedforward:
        data["feedforward"] = {"enabled": True}
    model = model_from_dict(data, source)
    if specs:
        from dataclasses import replace

        model = replace(model, **specs)
    return model


def model_from_matrices(name: str, A, B, *, C=None, D=None, states=None, inputs=None, outputs=None,
                        parameters=None, feedback=None, estimator=None, integral=None,
                        feedforward: bool = False, title: str = "") -> Model:
    r"""A model from plant matrices: sympy matrices, lists of rows, or LaTeX strings.

    *parameters* is a dict ``name -> {"sign": ..., "range": [lo, hi], ...}``
    (the model-file fields) or a list of :class:`~symgain.model.Parameter`;
    when omitted, every symbol of the sympy matrices is declared with the
    sign its assumptions give (and no range, so no numeric check).
    *states*, *inputs* default to ``x1, x2, ...`` and ``u1, ...``.
    Targets are tables as in a model file; values may be sympy expressions.

    >>> model = model_from_matrices(
    ...     "coil", r'\begin{bmatrix} -\frac{R}{L} \end{bmatrix}', [["1/L"]],
    ...     parameters={"R": {"sign": "positive"}, "L": {"sign": "positive"}},
    ...     feedback={"poles": ["-2*R/L"]})
    >>> model.states, model.A
    (('x1',), Matrix([[-R/L]]))
    """
    states, inputs, outputs = _names(states, "states"), _names(inputs, "inputs"), _names(outputs, "outputs")
    values = _sympy_values(A, B, C, D, feedback, estimator, integral)
    plant: dict[str, Any] = {"A": _rows(A, "A"), "B": _rows(B, "B")}
    if C is not None:
        plant["C"] = _rows(C, "C")
    if D is not None:
        plant["D"] = _rows(D, "D")
    params = _parameters(parameters, values)
    if states is None or inputs is None or (outputs is None and C is not None):
        shape_A, shape_B, shape_C = _shapes(plant, params)
        states = list(states) if states is not None else [f"x{i + 1}" for i in range(shape_A)]
        inputs = list(inputs) if inputs is not None else [f"u{j + 1}" for j in range(shape_B)]
        if outputs is None and shape_C:
            outputs = [f"y{i + 1}" for i in range(shape_C)]
    plant.update(states=list(states), inputs=list(inputs), outputs=list(outputs or ()))
    return _build(name, title, plant, params,
                  {"feedback": feedback, "estimator": estimator, "integral": integral},
                  feedforward, "<model_from_matrices>")


def _shapes(plant: dict, params: dict) -> tuple[int, int, int]:
    """Rows of A, columns of B and rows of C, reading the matrices once."""
    from .toml_file import parse_matrix

    declared = {}
    for pname, spec in params.items():
        fields = spec if isinstance(spec, Mapping) else {"nominal": spec}
        declared[pname] = Parameter.declare(pname, **{k: v for k, v in fields.items()
                                                      if k in _PARAMETER_FIELDS}).symbol
    where = Where("<model_from_matrices>", "plant")
    A = parse_matrix(plant["A"], declared, where.child("A"))
    B = parse_matrix(plant["B"], declared, where.child("B"))
    C = parse_matrix(plant["C"], declared, where.child("C")) if "C" in plant else None
    return A.rows, B.cols, (C.rows if C is not None else 0)


def model_from_equations(name: str, equations: Mapping[str, Any], equilibrium: Mapping[str, Any], *,
                         states=None, inputs=None, outputs=None, output_equations=None,
                         parameters=None, feedback=None, estimator=None, integral=None,
                         feedforward: bool = False, title: str = "") -> Model:
    """A model from equations of motion ``{state: right-hand side}`` and an equilibrium.

    Right-hand sides and equilibrium values may be text or sympy expressions;
    an input whose equilibrium value is ``"solve"`` is solved for.
    *states* default to the keys of *equations*, *inputs* to the other keys
    of *equilibrium*.

    >>> import sympy as sp
    >>> h, v, T = sp.symbols("h v T")
    >>> m, g, w = sp.symbols("m g w", positive=True)
    >>> model = model_from_equations(
    ...     "lift", {h: v, v: T / m - g}, {h: 0, v: 0, T: "solve"},
    ...     parameters={"m": {"sign": "positive", "range": [1, 2]},
    ...                 "g": {"sign": "positive", "range": [9.81, 9.81]},
    ...                 "w": {"sign": "positive", "range": [1, 2], "role": "design"}},
    ...     feedback={"poles": [-w, -w]})
    >>> model.extra["equilibrium"]["T"], model.B
    (g*m, Matrix([
    [  0],
    [1/m]]))
    """
    states, inputs, outputs = _names(states, "states"), _names(inputs, "inputs"), _names(outputs, "outputs")
    for key, table in (("equations", equations), ("equilibrium", equilibrium)):
        if not isinstance(table, Mapping):
            raise ModelError(f"{key} must be a dict, found {type(table).__name__}", where=Where(key=key))
    eqs = {str(k): _text(v, "equations") for k, v in equations.items()}
    point = {str(k): _text(v, "equilibrium") for k, v in equilibrium.items()}
    states = list(states) if states is not None else list(eqs)
    inputs = list(inputs) if inputs is not None else [k for k in point if k not in states]
    plant: dict[str, Any] = {"states": states, "inputs": inputs, "equations": eqs, "equilibrium": point}
    if output_equations is not None:
        plant["output_equations"] = {str(k): _text(v, "output_equations") for k, v in output_equations.items()}
        if outputs is None:
            outputs = list(plant["output_equations"])
    plant["outputs"] = [str(o) for o in (outputs or ())]
    names = set(states) | set(inputs)
    values = [s for s in _sympy_values(equations, equilibrium, output_equations, feedback, estimator,
                                       integral)]
    params = _parameters(parameters, values)
    if parameters is None:
        params = {k: v for k, v in params.items() if k not in names}
    return _build(name, title, plant, params,
                  {"feedback": feedback, "estimator": estimator, "integral": integral},
                  feedforward, "<model_from_equations>")
