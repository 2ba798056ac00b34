"""Read a model file (TOML, see docs/model-file.md) into a :class:`Model`.

Nothing in the file is evaluated as code: every expression goes through
:func:`symgain.model.expressions.parse_expression`.

>>> text = '''
... name = "cart"
... [parameters]
... m = { sign = "positive", range = [1, 2] }
... [plant]
... states = ["p", "v"]
... inputs = ["F"]
... A = [["0", "1"], ["0", "0"]]
... B = [["0"], ["1/m"]]
... [feedback]
... poles = ["-2", "-3"]
... '''
>>> model = model_from_text(text, "cart.toml")
>>> model.B
Matrix([
[  0],
[1/m]])
>>> model_from_text(text.replace("1/m", "1/q"), "cart.toml")
Traceback (most recent call last):
...
symgain.errors.ExpressionError: cart.toml: plant.B[1][0]: undeclared symbol 'q' in '1/q'
"""
from __future__ import annotations

import os
import stat
import sys
from pathlib import Path
from typing import Any

import sympy as sp

from ..errors import ModelError, Where, printable
from .expressions import parse_expression
from .definition import PROTOTYPE_NAMES, S, Model, Parameter, TargetSpec, _shown

if sys.version_info >= (3, 11):
    import tomllib
else:  # pragma: no cover
    import tomli as tomllib

__all__ = ["load_model", "model_from_text", "parse_matrix", "parse_target", "MAX_FILE_BYTES", "MAX_NESTING"]

MAX_FILE_BYTES = 1_000_000  # a model file is text of a few kilobytes; refuse anything far larger
MAX_NESTING = 20  # tables and arrays inside one another

TOP_KEYS = {"name", "title", "parameters", "plant", "feedback", "estimator", "integral",
            "feedforward", "discrete", "input_limits", "notes", "simulation", "requirements"}
PARAMETER_KEYS = {"meaning", "unit", "sign", "range", "nominal", "role"}
PLANT_KEYS = {"states", "inputs", "outputs", "A", "B", "C", "D", "equations", "equilibrium",
              "output_equations"}
TARGET_KEYS = {
    "poles": ("poles",),
    "z_poles": ("z_poles",),
    "deadbeat": ("deadbeat",),
    "polynomial": ("polynomial",),
    "prototype": ("prototype", "bandwidth"),
    "damping": ("damping", "natural_frequency"),
    "settling": ("settling_time", "overshoot"),
}
OPTIONAL_TARGET_KEYS = {"extra_poles", "pattern", "z_poles", "input_direction", "output_direction", "branch",
                        "method", "target_split"}
METHODS = ("canonical", "direction")  # design routes for several inputs (key method)


def load_model(path: str | Path) -> Model:
    """Read and validate a model file: a regular file of at most :data:`MAX_FILE_BYTES` bytes.

    Devices, FIFOs and folders are refused before they are opened (reading
    ``/dev/zero`` would never end, opening a FIFO would wait for a writer).

    >>> load_model("/dev/zero")
    Traceback (most recent call last):
    ...
    symgain.errors.ModelError: /dev/zero: not a regular file (a character device); give a model file
    """
    if isinstance(path, bytes) or not isinstance(path, (str, os.PathLike)):
        raise ModelError(f"load_model needs a file path, found {type(path).__name__} {_shown(path)}")
    path = Path(path)
    where = Where(str(path))
    try:
        info = os.stat(path)
    except FileNotFoundError:
        raise ModelError("no such model file", where=where) from None
    except (OSError, ValueError) as exc:
        raise ModelError(f"cannot read the model file: {getattr(exc, 'strerror', None) or exc}",
                         where=where) from None
    if not stat.S_ISREG(info.st_mode):
        kind = ("a folder" if stat.S_ISDIR(info.st_mode) else "a FIFO" if stat.S_ISFIFO(info.st_mode)
                else "a character device" if stat.S_ISCHR(info.st_mode)
                else "a block device" if stat.S_ISBLK(info.st_mode) else "a socket or device")
        raise ModelError(f"not a regular file ({kind}); give a model file", where=where)
    if info.st_size > MAX_FILE_BYTES:
        raise ModelError(f"file is {info.st_size} bytes; a model file may have at most {MAX_FILE_BYTES}",
                         where=where)
    try:
        with open(path, "rb") as handle:
            data = handle.read(MAX_FILE_BYTES + 1)
    except OSError as exc:
        raise ModelError(f"cannot read the model file: {exc.strerror or exc}", where=where) from None
    if len(data) > MAX_FILE_BYTES:
        raise ModelError(f"file grew beyond {MAX_FILE_BYTES} bytes while being read", where=where)
    try:
        text = data.decode("utf-8")
    except UnicodeDecodeError as exc:
        raise ModelError(f"not UTF-8 text (byte {exc.start})", where=where) from None
    return model_from_text(text, str(path))


def _check_keys(table: dict, allowed: set[str], where: Where) -> None:
    unknown = sorted(set(table) - allowed)
    if unknown:
        raise ModelError(f"unknown key {_shown(unknown[0])}; expected one of {', '.join(sorted(allowed))}",
                         where=where)


def _names(value: Any, where: Where) -> tuple[str, ...]:
    if value is None:
        return ()
    if not isinstance(value, list) or not all(isinstance(v, str) for v in value):
        raise ModelError(f"must be a list of names, found {_shown(value)}", where=where)
    if len(set(value)) != len(value):
        raise ModelError(f"names repeat in {_shown(value)}", where=where)
    return tuple(value)


def parse_matrix(value: Any, symbols: dict, where: Where) -> sp.Matrix:
    """A matrix given as a list of rows of expressions (strings or numbers), or a LaTeX string."""
    if isinstance(value, str):
        from .latex_matrix import parse_latex_matrix  # LaTeX input lives in its own module

        return parse_latex_matrix(value, symbols, where=where)
    if not isinstance(value, list) or not value or not all(isinstance(r, list) for r in value):
        raise ModelError(f"must be a list of rows (lists), found {_shown(value)}", where=where)
    width = len(value[0])
    rows = []
    for i, row in enumerate(value):
        if len(row) != width:
            raise ModelError(f"row {i} has {len(row)} entries but row 0 has {width}", where=where.at(i))
        rows.append([parse_expression(v, symbols, where=where.at(i, j)) for j, v in enumerate(row)])
    if width == 0:
        raise ModelError("rows are empty", where=where)
    return sp.Matrix(rows)


def _expr_list(value: Any, symbols: dict, where: Where, extra=None) -> tuple:
    if not isinstance(value, list):
        raise ModelError(f"must be a list, found {_shown(value)}", where=where)
    return tuple(parse_expression(v, symbols, where=where.at(i), extra=extra) for i, v in enumerate(value))


def parse_target(table: Any, symbols: dict, where: Where) -> TargetSpec:
    """One of the target forms of a [feedback], [estimator] or [integral] table."""
    if not isinstance(table, dict):
        raise ModelError("must be a table", where=where)
    allowed = {k for keys in TARGET_KEYS.values() for k in keys} | OPTIONAL_TARGET_KEYS
    _check_keys(table, allowed, where)
    kinds = [kind for kind, keys in TARGET_KEYS.items() if keys[0] in table]
    if len(kinds) != 1:
        found = ", ".join(TARGET_KEYS[k][0] for k in kinds) or "none"
        raise ModelError("give exactly one target (poles, polynomial, prototype, damping, "
                         f"settling_time, or for discrete designs z_poles or deadbeat), found {found}", where=where)
    kind = kinds[0]
    for key in TARGET_KEYS[kind]:
        if key not in table:
            raise ModelError(f"'{TARGET_KEYS[kind][0]}' needs '{key}' too", where=where)
    values: dict[str, Any] = {}
    if kind in ("poles", "z_poles"):
        values[kind] = _expr_list(table[kind], symbols, where.child(kind))
    elif kind == "deadbeat":
        if table["deadbeat"] is not True:
            raise ModelError("deadbeat = true is the only form", where=where.child("deadbeat"))
        values["deadbeat"] = True
    elif kind == "polynomial":
        from .definition import Z

        values["polynomial"] = parse_expression(table["polynomial"], symbols, where=where.child("polynomial"),
                                                extra={"s": S, "z": Z})
    elif kind == "prototype":
        if not isinstance(table["prototype"], str):
            raise ModelError("prototype must be a name", where=where.child("prototype"))
        values["prototype"] = table["prototype"].lower()
        values["bandwidth"] = parse_expression(table["bandwidth"], symbols, where=where.child("bandwidth"))
    else:
        for key in TARGET_KEYS[kind]:
            values[key] = parse_expression(table[key], symbols, where=where.child(key))
    if "extra_poles" in table:
        if kind not in ("damping", "settling"):
            raise ModelError("extra_poles goes with damping or settling_time targets", where=where)
        values["extra_poles"] = _expr_list(table["extra_poles"], symbols, where.child("extra_poles"))
    for key in ("pattern", "input_direction", "output_direction", "branch"):  # read by symgain.design.several_inputs
        if key in table:
            values[key] = table[key]
    if "method" in table:
        if table["method"] not in METHODS:
            raise ModelError(f"unknown method {table['method']!r}; choose one of {', '.join(METHODS)}",
                             where=where.child("method"))
        values["method"] = table["method"]
    if "target_split" in table:  # parsed by the design stage (symgain.design.target_split), like pattern
        values["target_split"] = table["target_split"]
    if kind == "prototype":
        if values["prototype"] not in PROTOTYPE_NAMES:
            raise ModelError(f"unknown prototype {_shown(table['prototype'])}; choose one of "
                             f"{', '.join(PROTOTYPE_NAMES)}", where=where.child("prototype"))
    return TargetSpec(kind, values, where)


def _parameters(table: Any, file: str) -> tuple[Parameter, ...]:
    """The declared parameters; a name given a number only (``g = 9.81``) is a constant, not listed."""
    where = Where(file, "parameters")
    if table is None:
        return ()  # a purely numeric plant needs no parameters
    if not isinstance(table, dict):
        raise ModelError("[parameters] must be a table of declarations", where=where)
    from .expressions import RESERVED_NAMES

    params = []
    for name, spec in table.items():
        pw = where.child(name)
        if name in RESERVED_NAMES:
            raise ModelError(f"{name!r} is reserved and cannot be a parameter", where=pw)
        if isinstance(spec, (int, float)) and not isinstance(spec, bool):
            _check_constant(name, spec, pw)
            continue  # a constant: see _constants
        if not isinstance(spec, dict):
            raise ModelError("must be a table such as { sign = \"positive\", range = [1, 2] }, found "
                             f"{_shown(spec)}", where=pw)
        _check_keys(spec, PARAMETER_KEYS, pw)
        params.append(Parameter.declare(name, where=pw, **spec))
    return tuple(params)


def _check_constant(name: str, value, where: Where) -> None:
    """A constant needs a parameter's name rules and a finite value of bounded size."""
    import math

    from .identifiers import describe_name, is_identifier

    if not is_identifier(name):
        raise ModelError(f"constant name {_shown(name)} is not a name: {describe_name(name)}", where=where)
    if isinstance(value, float) and not math.isfinite(value):
        raise ModelError(f"a constant must be a finite number, found {_shown(value)}", where=where)
    if isinstance(value, int) and abs(value) >= 10 ** 300:
        raise ModelError("a constant must be below 1e300 in size", where=where)


def _constants(table: Any) -> dict[str, sp.Expr]:
    """Names declared with a value only (``g = 9.81``): exact numbers put in place of the name.

    >>> _constants({"g": 9.81, "m": {"sign": "positive"}})
    {'g': 981/100}
    """
    if not isinstance(table, dict):
        return {}
    return {name: sp.Integer(value) if isinstance(value, int) else sp.Rational(repr(value))
            for name, value in table.items() if isinstance(value, (int, float)) and not isinstance(value, bool)}


def model_from_text(text: str, file: str = "<model>") -> Model:
    """Parse TOML text into a validated :class:`Model`."""
    if not isinstance(text, str):
        raise ModelError(f"model text must be a string, found {type(text).__name__}", where=Where(file))
    if len(text) > MAX_FILE_BYTES:
        raise ModelError(f"model text is longer than {MAX_FILE_BYTES} characters", where=Where(file))
    depth = _nesting(text)
    if depth > MAX_NESTING:
        raise ModelError(f"tables and arrays nest {depth} deep; at most {MAX_NESTING} levels are read",
                         where=Where(file))
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise ModelError(f"TOML syntax error: {exc}", where=Where(file)) from None
    except RecursionError:
        raise ModelError("TOML nested too deeply", where=Where(file)) from None
    return model_from_dict(data, file)


def _nesting(text: str) -> int:
    """Deepest nesting of ``[ ]`` and ``{ }`` outside strings and comments (an upper estimate).

    >>> _nesting('a = [[1, 2], {b = "[[["}]  # [[[')
    2
    """
    depth = deepest = 0
    quote = None
    i, n = 0, len(text)
    while i < n:
        ch = text[i]
        if quote:
            if ch == "\\" and quote == '"':
                i += 2
                continue
            if ch == quote:
                quote = None
        elif ch in "\"'":
            quote = ch
        elif ch == "#":
            end = text.find("\n", i)
            i = n if end < 0 else end
            continue
        elif ch in "[{":
            depth += 1
            deepest = max(deepest, depth)
        elif ch in "]}":
            depth = max(0, depth - 1)
        elif ch == "\n" and depth == 0:
            pass
        i += 1
    return deepest


def model_from_dict(data: dict, file: str = "<model>") -> Model:
    """Build a :class:`Model` from the parsed TOML tables."""
    top = Where(file)
    _check_keys(data, TOP_KEYS, top)
    if "name" not in data or not isinstance(data["name"], str):
        raise ModelError("a model needs name = \"identifier\"", where=top.child("name"))
    params = _parameters(data.get("parameters"), file)
    constants = _constants(data.get("parameters"))
    symbols = {**{p.name: p.symbol for p in params}, **constants}
    plant = data.get("plant")
    pw = top.child("plant")
    if not isinstance(plant, dict):
        raise ModelError("missing [plant] table", where=pw)
    _check_keys(plant, PLANT_KEYS, pw)
    states = _names(plant.get("states"), pw.child("states"))
    inputs = _names(plant.get("inputs"), pw.child("inputs"))
    outputs = _names(plant.get("outputs"), pw.child("outputs"))
    if not states or not inputs:
        raise ModelError("[plant] needs states = [...] and inputs = [...]", where=pw)
    notes: tuple[str, ...] = ()
    extra: dict[str, Any] = {}
    if "equations" in plant:
        from .equations import linearize_plant  # equations of motion live in their own module

        lin = linearize_plant(plant, symbols, states, inputs, outputs, where=pw)
        A, B, C, D = lin.A, lin.B, lin.C, lin.D
        notes, extra = lin.notes, {"equilibrium": lin.equilibrium, "equations": lin.equations}
        if lin.output_equations is not None:
            extra["output_equations"] = lin.output_equations
    else:
        for key in ("A", "B"):
            if key not in plant:
                raise ModelError(f"[plant] needs {key} (or equations of motion)", where=pw)
        A = parse_matrix(plant["A"], symbols, pw.child("A"))
        B = parse_matrix(plant["B"], symbols, pw.child("B"))
        C = parse_matrix(plant["C"], symbols, pw.child("C")) if "C" in plant else None
        D = parse_matrix(plant["D"], symbols, pw.child("D")) if "D" in plant else None
        if C is None and outputs:
            C = _pick_states(outputs, states, pw.child("outputs"))
    from .sampling_keys import ANTI_WINDUP_KEYS, read_anti_windup, read_input_limits, read_sampling

    targets = {}
    for part in ("feedback", "estimator", "integral"):
        if part in data:
            table = data[part]
            if part == "integral" and isinstance(table, dict):
                targets["anti_windup"] = read_anti_windup(table, symbols, top.child(part))
                table = {k: v for k, v in table.items() if k not in ANTI_WINDUP_KEYS}
            targets[part] = parse_target(table, symbols, top.child(part))
    feedforward = _feedforward(data.get("feedforward"), top.child("feedforward"))
    if "discrete" in data:
        targets["sampling"] = read_sampling(data["discrete"], symbols, top.child("discrete"))
    if "sampling" not in targets:
        from .sampling_keys import is_z_target

        for part in ("feedback", "estimator", "integral"):
            if part in targets and is_z_target(targets[part]):
                raise ModelError("z poles, deadbeat and polynomials in z need a sample period: add [discrete] "
                                 "sample_time = ...", where=top.child(part))
    if "input_limits" in data:
        targets["input_limits"] = read_input_limits(data["input_limits"], inputs, symbols, top.child("input_limits"))
    from .simulation_keys import read_simulation_tables  # [simulation], [requirements]

    extra.update(read_simulation_tables(data, symbols, states, inputs, outputs, file))
    title = data.get("title", "")
    if not isinstance(title, str):
        raise ModelError(f"title must be text, found {_shown(title)}", where=top.child("title"))
    if constants:
        notes = (*notes, "constants put in as numbers: "
                 + ", ".join(f"{k} = {float(v):g}" for k, v in constants.items()))
    return Model(name=data["name"], title=title, parameters=params, states=states, inputs=inputs,
                 outputs=outputs, A=A, B=B, C=C, D=D, source=file, notes=notes, extra=extra,
                 feedforward=feedforward, **targets)


def _pick_states(outputs, states, where: Where) -> sp.Matrix:
    """C that measures the named states (outputs given by name, no C matrix)."""
    rows = []
    for name in outputs:
        if name not in states:
            raise ModelError(f"output {name!r} is not a state; give C or output_equations", where=where)
        rows.append([1 if s == name else 0 for s in states])
    return sp.Matrix(rows)


def _feedforward(table: Any, where: Where) -> bool:
    if table is None:
        return False
    if not isinstance(table, dict):
        raise ModelError("must be a table", where=where)
    _check_keys(table, {"enabled"}, where)
    enabled = table.get("enabled", True)
    if not isinstance(enabled, bool):
        raise ModelError(f"enabled must be true or false, found {enabled!r}", where=where)
    return enabled
