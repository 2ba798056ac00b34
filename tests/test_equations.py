"""Equations of motion: Jacobians at the equilibrium, "solve" for inputs, and each bad input."""
import subprocess
import sys

import numpy as np
import pytest
import sympy as sp

from symgain.model.equations import linearize_plant
from symgain.errors import ModelError, Where
from symgain.model.toml_file import model_from_text

m, g, l, b, k = sp.symbols("m g l b k", positive=True)
theta0 = sp.Symbol("theta0", real=True)
SYMBOLS = {"m": m, "g": g, "l": l, "b": b, "k": k, "theta0": theta0}
PENDULUM = {"theta": "omega", "omega": "(tau - m*g*l*sin(theta) - b*omega)/(m*l^2)"}


def lin(equations, equilibrium, states=("theta", "omega"), inputs=("tau",), outputs=(), **more):
    return linearize_plant({"equations": equations, "equilibrium": equilibrium, **more}, SYMBOLS,
                           states, inputs, outputs, where=Where("f.toml", "plant"))


def test_pendulum_hanging_and_inverted():
    """Pendulum linearized: theta'' = -(g/l) theta hanging, +(g/l) theta inverted (common practice)."""
    down = lin(PENDULUM, {"theta": "0", "omega": "0", "tau": "0"})
    up = lin(PENDULUM, {"theta": "pi", "omega": "0", "tau": "0"})
    assert down.A == sp.Matrix([[0, 1], [-g / l, -b / (m * l**2)]])
    assert up.A == sp.Matrix([[0, 1], [g / l, -b / (m * l**2)]])
    assert down.B == up.B == sp.Matrix([0, 1 / (m * l**2)])


def test_solve_finds_the_holding_torque_and_linearizes_there():
    result = lin(PENDULUM, {"theta": "theta0", "omega": "0", "tau": "solve"})
    assert sp.simplify(result.equilibrium["tau"] - m * g * l * sp.sin(theta0)) == 0
    assert sp.simplify(result.A[1, 0] + g * sp.cos(theta0) / l) == 0  # d/dtheta of -g sin(theta)/l
    assert any("solved" in note and "tau" in note for note in result.notes)


CART_POLE = {"x": "v", "v": "(F + m*l*sin(phi)*w^2 - m*g*sin(phi)*cos(phi))/(k + m*sin(phi)^2)",
             "phi": "w",
             "w": "(-F*cos(phi) - m*l*w^2*sin(phi)*cos(phi) + (k + m)*g*sin(phi))/(l*(k + m*sin(phi)^2))"}


@pytest.mark.parametrize("equations, point, states, inputs", [
    (CART_POLE, {"x": "0", "v": "0", "phi": "0", "w": "0", "F": "solve"}, ("x", "v", "phi", "w"), ("F",)),
    (PENDULUM, {"theta": "1/5", "omega": "0", "tau": "solve"}, ("theta", "omega"), ("tau",)),
])
def test_jacobian_matches_finite_differences(equations, point, states, inputs):
    """The symbolic A, B agree with central differences of the nonlinear right-hand side (numpy)."""
    from symgain.model.expressions import parse_expression

    result = lin(equations, point, states=states, inputs=inputs)
    values = {m: 2.0, g: 9.81, l: 0.7, k: 3.0, b: 0.3}
    A = np.array(result.A.subs(values).evalf(), dtype=float)
    B = np.array(result.B.subs(values).evalf(), dtype=float)
    names = {n: sp.Symbol(n, real=True) for n in (*states, *inputs)}
    f = sp.Matrix([parse_expression(equations[n], SYMBOLS, extra=names) for n in states])
    fn = sp.lambdify([[names[n] for n in states], names[inputs[0]]], f.subs(values), "numpy")
    x0 = np.array([float(parse_expression(point[n], {})) for n in states])
    u0 = float(result.equilibrium[inputs[0]].subs(values))
    h, n = 1e-6, len(states)
    for j in range(n):
        dx = np.zeros(n)
        dx[j] = h
        column = (np.array(fn(x0 + dx, u0), float) - np.array(fn(x0 - dx, u0), float)).ravel() / (2 * h)
        assert np.allclose(column, A[:, j], atol=1e-5)
    column = (np.array(fn(x0, u0 + h), float) - np.array(fn(x0, u0 - h), float)).ravel() / (2 * h)
    assert np.allclose(column, B[:, 0], atol=1e-5)


def test_no_holding_input_shows_the_residuals_in_the_input():
    """A cart-pole tilted at rest has no equilibrium for any force: the cart must accelerate."""
    with pytest.raises(ModelError, match=r"no value of F holds the equilibrium .*v' = \(F - "):
        lin(CART_POLE, {"x": "0", "v": "0", "phi": "1/5", "w": "0", "F": "solve"},
            states=("x", "v", "phi", "w"), inputs=("F",))


def test_outputs_by_name_and_by_output_equations():
    by_name = lin(PENDULUM, {"theta": "0", "omega": "0", "tau": "0"}, outputs=("theta",))
    assert by_name.C == sp.Matrix([[1, 0]]) and by_name.D is None
    tip = lin(PENDULUM, {"theta": "theta0", "omega": "0", "tau": "solve"}, outputs=("x_tip",),
              output_equations={"x_tip": "l*sin(theta)"})
    assert tip.C == sp.Matrix([[l * sp.cos(theta0), 0]])


BASE = """
name = "rig"
[parameters]
m = { sign = "positive", range = [1, 2] }
k = { sign = "positive", range = [1, 2] }
[plant]
states = ["p", "v"]
inputs = ["F"]
equations = EQUATIONS
equilibrium = EQUILIBRIUM
[feedback]
poles = ["-1", "-2"]
"""
GOOD_EQUATIONS = '{ p = "v", v = "(F - k*p)/m" }'
GOOD_EQUILIBRIUM = '{ p = "0", v = "0", F = "0" }'

BAD_INPUTS = {
    "equation for a name that is not a state": (
        '{ p = "v", v = "(F - k*p)/m", q = "1" }', GOOD_EQUILIBRIUM, "equation for 'q', which is not a state"),
    "a state without an equation": ('{ p = "v" }', GOOD_EQUILIBRIUM, "state 'v' has no equation"),
    "equilibrium misses a state": (GOOD_EQUATIONS, '{ p = "0", F = "0" }', "misses state 'v'"),
    "equilibrium misses an input": (GOOD_EQUATIONS, '{ p = "0", v = "0" }', "misses input 'F'"),
    "equilibrium that is not one": (GOOD_EQUATIONS, '{ p = "1", v = "0", F = "0" }',
                                    "not an equilibrium: the right-hand sides do not vanish there: v' = -k/m"),
    "solve with no solution": ('{ p = "v", v = "(F - k*p)/m + 1" }', '{ p = "0", v = "1", F = "solve" }',
                               "no value of F holds the equilibrium"),
    "solve with several solutions": ('{ p = "v", v = "(F^2 - k*p)/m" }', '{ p = "1", v = "0", F = "solve" }',
                                     "several values hold the equilibrium"),
}


def _text(equations, equilibrium):
    return BASE.replace("EQUATIONS", equations).replace("EQUILIBRIUM", equilibrium)


def test_good_base_model_loads():
    model = model_from_text(_text(GOOD_EQUATIONS, GOOD_EQUILIBRIUM), "rig.toml")
    assert model.A == sp.Matrix([[0, 1], [-k / m, 0]])


@pytest.mark.parametrize("case", list(BAD_INPUTS))
def test_bad_input_raises_one_line(case):
    equations, equilibrium, fragment = BAD_INPUTS[case]
    with pytest.raises(ModelError) as info:
        model_from_text(_text(equations, equilibrium), "rig.toml")
    assert "\n" not in str(info.value)
    assert str(info.value).startswith("rig.toml: plant.")
    assert fragment in str(info.value)


@pytest.mark.parametrize("case", ["equation for a name that is not a state", "equilibrium that is not one",
                                  "solve with several solutions"])
def test_bad_input_on_the_command_line_exits_2(case, tmp_path):
    equations, equilibrium, fragment = BAD_INPUTS[case]
    path = tmp_path / "rig.toml"
    path.write_text(_text(equations, equilibrium))
    run = subprocess.run([sys.executable, "-m", "symgain", "derive", str(path)], capture_output=True, text=True)
    assert run.returncode == 2
    lines = run.stderr.strip().splitlines()
    assert len(lines) == 1 and fragment in lines[0]


def test_solve_is_for_inputs_only():
    with pytest.raises(ModelError, match="inputs only"):
        lin(PENDULUM, {"theta": "solve", "omega": "0", "tau": "0"})


def test_functions_of_the_listed_set_are_differentiated():
    """d/dx at x = 0 of tanh(k x), atan(k x), exp(k x) - 1, log(1 + k x), sqrt(1 + k x) - 1, x cos(x):
    k, k, k, k, k/2, 1 (calculus, common practice)."""
    eqs = {"x1": "tanh(k*x1) + atan(k*x2) + exp(k*x3) - 1", "x2": "log(1 + k*x1) + sqrt(1 + k*x2) - 1",
           "x3": "x3*cos(x3) + tan(u)"}
    result = lin(eqs, {"x1": "0", "x2": "0", "x3": "0", "u": "0"}, states=("x1", "x2", "x3"), inputs=("u",))
    assert result.A == sp.Matrix([[k, k, k], [k, k / 2, 0], [0, 0, 1]])
    assert result.B == sp.Matrix([0, 0, 1])
