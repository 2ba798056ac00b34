"""Nonlinear equations of motion, linearized at an equilibrium.

The plant is given as one right-hand side per state, x' = f(x, u), and an
equilibrium (x0, u0). A and B are the symbolic Jacobians of f with respect
to the states and the inputs at the equilibrium; C (and D) come from the
outputs picked by name or from output equations y = h(x, u). The linear
model works in deviations from the equilibrium: x - x0, u - u0, y - h(x0, u0).

An input set to ``"solve"`` is solved for: the value that makes every
right-hand side vanish (for example the torque that holds an arm at an
angle). It is reported and used.

>>> import sympy as sp
>>> m, g, l, b = sp.symbols("m g l b", positive=True)
>>> symbols = {"m": m, "g": g, "l": l, "b": b}
>>> plant = {"equations": {"theta": "omega", "omega": "(tau - m*g*l*sin(theta) - b*omega)/(m*l^2)"},
...          "equilibrium": {"theta": "pi", "omega": "0", "tau": "0"}}
>>> lin = linearize_plant(plant, symbols, ("theta", "omega"), ("tau",), ("theta",))
>>> lin.A
Matrix([
[  0,           1],
[g/l, -b/(l**2*m)]])
>>> lin.B.T, lin.C
(Matrix([[0, 1/(l**2*m)]]), Matrix([[1, 0]]))
>>> lin.equations.T   # the nonlinear right-hand sides stay available (for simulation)
Matrix([[omega, (-b*omega - g*l*m*sin(theta) + tau)/(l**2*m)]])
>>> theta0 = sp.Symbol("theta0", real=True)
>>> plant["equilibrium"] = {"theta": "theta0", "omega": "0", "tau": "solve"}
>>> lin = linearize_plant(plant, {**symbols, "theta0": theta0}, ("theta", "omega"), ("tau",), ())
>>> lin.equilibrium["tau"]
g*l*m*sin(theta0)
"""
from __future__ import annotations

from dataclasses import dataclass
from typing import Any, Mapping

import sympy as sp

from ..errors import ModelError, Where
from ..mathtext import math_text
from .expressions import parse_expression

__all__ = ["Linearization", "linearize_plant", "SOLVE"]

SOLVE = "solve"  # the equilibrium value that asks for the input to be solved for


@dataclass(frozen=True)
class Linearization:
    """The linear model at an equilibrium, with notes for reports."""

    A: sp.Matrix
    B: sp.Matrix
    C: sp.Matrix | None
    D: sp.Matrix | None
    notes: tuple[str, ...]
    equilibrium: dict[str, sp.Expr]
    equations: sp.Matrix | None = None  # the nonlinear right-hand sides f(x, u), in the order of the states
    output_equations: sp.Matrix | None = None  # h(x, u) when output equations are given


def _table(plant: Mapping, key: str, where: Where) -> dict:
    value = plant.get(key)
    if not isinstance(value, Mapping) or not value:
        raise ModelError(f"'{key}' must be a table such as {{ x = \"v\", v = \"u/m\" }}, "
                         f"found {value!r}", where=where.child(key))
    return dict(value)


def _simplify(expr: sp.Expr) -> sp.Expr:
    expr = sp.cancel(sp.together(expr)) if not expr.has(sp.Function) else expr
    return sp.simplify(expr)


def _is_zero(expr: sp.Expr) -> bool:
    if expr == 0:
        return True
    return _simplify(expr) == 0


def linearize_plant(plant: Mapping[str, Any], symbols: Mapping[str, sp.Symbol], states, inputs,
                    outputs=(), *, where: Where | None = None) -> Linearization:
    """Linearize the equations of motion in *plant* at its equilibrium.

    *plant* holds ``equations`` (state -> right-hand side text),
    ``equilibrium`` (state or input -> value text, or ``"solve"`` for an
    input) and optionally ``output_equations`` (output -> text). Errors are
    one line naming the key and what was found:

    >>> x = sp.Symbol("k", positive=True)
    >>> linearize_plant({"equations": {"p": "v", "v": "-k*p + F", "q": "1"},
    ...                  "equilibrium": {"p": "0", "v": "0", "F": "0"}},
    ...                 {"k": x}, ("p", "v"), ("F",), where=Where("f.toml", "plant"))
    Traceback (most recent call last):
    ...
    symgain.errors.ModelError: f.toml: plant.equations.q: equation for 'q', which is not a state (states: p, v)
    >>> linearize_plant({"equations": {"p": "v", "v": "-k*p + F"},
    ...                  "equilibrium": {"p": "1", "v": "0", "F": "0"}}, {"k": x}, ("p", "v"), ("F",))
    Traceback (most recent call last):
    ...
    symgain.errors.ModelError: plant.equilibrium: not an equilibrium: the right-hand sides do not vanish there: v' = -k (set an input to "solve" to find the input that holds it)
    """
    where = where or Where(key="plant")
    states, inputs, outputs = tuple(states), tuple(inputs), tuple(outputs or ())
    for name in (*states, *inputs):
        if name in symbols:
            raise ModelError(f"state or input name {name!r} clashes with a parameter", where=where)
    variables = {n: sp.Symbol(n, real=True) for n in (*states, *inputs)}
    ew = where.child("equations")
    equations = _table(plant, "equations", where)
    for name in equations:
        if name not in states:
            raise ModelError(f"equation for {name!r}, which is not a state (states: {', '.join(states)})",
                             where=ew.child(str(name)))
    for name in states:
        if name not in equations:
            raise ModelError(f"state {name!r} has no equation; give {name} = \"...\" (its time derivative)",
                             where=ew)
    f = sp.Matrix([parse_expression(equations[n], symbols, where=ew.child(n), extra=variables)
                   for n in states])

    equilibrium, solve_for = _equilibrium(plant, symbols, states, inputs, where)
    qw = where.child("equilibrium")
    notes: list[str] = []
    point = {variables[n]: v for n, v in equilibrium.items()}
    if solve_for:
        unknowns = [sp.Symbol(f"_{n}_at_equilibrium", real=True) for n in solve_for]
        point.update({variables[n]: u for n, u in zip(solve_for, unknowns)})
        residual_eqs = [e for e in (sp.together(r.xreplace(point)) for r in f) if e != 0]
        numerators = [sp.numer(e) for e in residual_eqs]
        try:
            solutions = sp.solve(numerators, unknowns, dict=True) if numerators else []
        except (NotImplementedError, ValueError, TypeError) as exc:
            raise ModelError(f"cannot solve for {', '.join(solve_for)} at the equilibrium "
                             f"({type(exc).__name__})", where=qw) from None
        if not numerators:
            raise ModelError(f"the equilibrium holds for any {', '.join(solve_for)}: "
                             "no unique value to solve for; give it instead of \"solve\"", where=qw)
        shown = {**point, **{variables[n]: variables[n] for n in solve_for}}
        if not solutions:
            raise ModelError(f"no value of {', '.join(solve_for)} holds the equilibrium "
                             f"(right-hand sides there: {_show_residuals(states, f, shown)})", where=qw)
        solutions = [s for s in solutions if all(u in s for u in unknowns)]
        if len(solutions) != 1:
            found = "; ".join(", ".join(f"{n} = {math_text(_simplify(s[u]))}" for n, u in zip(solve_for, unknowns))
                              for s in solutions) or "a family of values"
            raise ModelError(f"\"solve\" for {', '.join(solve_for)} is ambiguous: several values hold "
                             f"the equilibrium ({found}); give the one meant", where=qw)
        for n, u in zip(solve_for, unknowns):
            value = _simplify(solutions[0][u])
            equilibrium[n] = value
            point[variables[n]] = value
            notes.append(f"input {n} at the equilibrium solved as {n} = {math_text(value)}")
    if any(not _is_zero(r.xreplace(point)) for r in f):
        raise ModelError("not an equilibrium: the right-hand sides do not vanish there: "
                         + _show_residuals(states, f, point)
                         + (' (set an input to "solve" to find the input that holds it)' if not solve_for else ""),
                         where=qw)
    xs = sp.Matrix([variables[n] for n in states])
    us = sp.Matrix([variables[n] for n in inputs])
    A = f.jacobian(xs).xreplace(point).applyfunc(_simplify)
    B = f.jacobian(us).xreplace(point).applyfunc(_simplify)
    C, D, h = _outputs(plant, symbols, states, inputs, outputs, variables, point, where)
    at = ", ".join(f"{n} = {math_text(v)}" for n, v in equilibrium.items())
    notes.insert(0, f"linearized at the equilibrium {at}; states, inputs and outputs are deviations from it")
    return Linearization(A=A, B=B, C=C, D=D, notes=tuple(notes), equilibrium=equilibrium,
                         equations=sp.ImmutableMatrix(f), output_equations=h)


def _show_residuals(states, f, point) -> str:
    shown = []
    for n, r in zip(states, f):
        value = _simplify(r.xreplace(point))
        if value != 0:
            shown.append(f"{n}' = {math_text(value)}")
    return ", ".join(shown) or "none"


def _equilibrium(plant, symbols, states, inputs, where: Where):
    qw = where.child("equilibrium")
    table = _table(plant, "equilibrium", where)
    for name in table:
        if name not in states and name not in inputs:
            raise ModelError(f"{name!r} in the equilibrium is neither a state nor an input", where=qw)
    for label, group in (("state", states), ("input", inputs)):
        for name in group:
            if name not in table:
                raise ModelError(f"the equilibrium misses {label} {name!r}; give {name} = \"...\"", where=qw)
    values: dict[str, sp.Expr] = {}
    solve_for: list[str] = []
    for name in (*states, *inputs):
        text = table[name]
        if isinstance(text, str) and text.strip().lower() == SOLVE:
            if name in states:
                raise ModelError(f"\"solve\" is for inputs only; give the value of state {name!r}",
                                 where=qw.child(name))
            solve_for.append(name)
            continue
        values[name] = parse_expression(text, symbols, where=qw.child(name))
    return values, solve_for


def _outputs(plant, symbols, states, inputs, outputs, variables, point, where: Where):
    xs = sp.Matrix([variables[n] for n in states])
    us = sp.Matrix([variables[n] for n in inputs])
    if "output_equations" in plant:
        ow = where.child("output_equations")
        table = _table(plant, "output_equations", where)
        names = outputs or tuple(table)
        for name in table:
            if name not in names:
                raise ModelError(f"output equation for {name!r}, which is not a listed output "
                                 f"(outputs: {', '.join(names)})", where=ow.child(str(name)))
        for name in names:
            if name not in table:
                raise ModelError(f"output {name!r} has no output equation", where=ow)
        h = sp.Matrix([parse_expression(table[n], symbols, where=ow.child(n), extra=variables)
                       for n in names])
        C = h.jacobian(xs).xreplace(point).applyfunc(_simplify)
        D = h.jacobian(us).xreplace(point).applyfunc(_simplify)
        return C, (D if any(d != 0 for d in D) else None), sp.ImmutableMatrix(h)
    if not outputs:
        return None, None, None
    rows = []
    for name in outputs:
        if name not in states:
            raise ModelError(f"output {name!r} is not a state; give output_equations", where=where.child("outputs"))
        rows.append([1 if s == name else 0 for s in states])
    return sp.Matrix(rows), None, None
