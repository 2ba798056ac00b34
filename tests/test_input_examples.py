"""Each example of issue 4 derives, and its formulas pass the numeric check against scipy."""
import importlib.util
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest
import sympy as sp

from symgain import check_design, derive, load_model

EXAMPLES = Path(__file__).resolve().parent.parent / "examples"
FILES = ["balancing_robot", "flexible_joint_arm", "quarter_car_suspension", "dc_motor_position",
         "drone_altitude"]
SCRIPTS = ["api_dc_motor", "api_camera_arm"]


@pytest.mark.parametrize("name", FILES)
def test_example_derives_and_checks(name):
    model = load_model(EXAMPLES / f"{name}.toml")
    assert all(p.range is not None for p in model.parameters)
    design = derive(model)
    assert design.feedback is not None and design.feedback.gain.shape == (1, model.n_states)
    report = check_design(design, n_points=8)
    assert report.passed
    assert report.counts("feedback")["ok"] > 0


def test_drone_hover_thrust_is_solved():
    """Hover thrust with the ground-effect factor 1/(1 - (R/(4 h))^2) (Cheeseman and Bennett,
    1955, from memory): thrust = m g (1 - (R/(4 h0))^2)."""
    model = load_model(EXAMPLES / "drone_altitude.toml")
    m, g, R, h0 = (model.symbols[n] for n in ("m", "g", "R", "h0"))
    assert sp.simplify(model.extra["equilibrium"]["thrust"] - m * g * (1 - (R / (4 * h0)) ** 2)) == 0
    assert any("solved" in note for note in model.notes)


def test_balancing_robot_closed_loop_is_stable_at_nominal():
    model = load_model(EXAMPLES / "balancing_robot.toml")
    K = derive(model).feedback.gain
    values = {model.symbols[n]: v for n, v in model.nominal_values().items()}
    A = np.array(model.A.subs(values), float)
    B = np.array(model.B.subs(values), float)
    assert np.linalg.eigvals(A).real.max() > 0  # upright is unstable without feedback
    closed = A - B @ np.array(K.subs(values), float)
    assert np.linalg.eigvals(closed).real.max() < 0


@pytest.mark.parametrize("name", SCRIPTS)
def test_api_example_runs(name, capsys):
    spec = importlib.util.spec_from_file_location(name, EXAMPLES / f"{name}.py")
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    assert module.main() == 0
    assert "check passed" in capsys.readouterr().out


def test_example_on_the_command_line():
    run = subprocess.run([sys.executable, "-m", "symgain", "check", str(EXAMPLES / "drone_altitude.toml"),
                          "--points", "5"], capture_output=True, text=True)
    assert run.returncode == 0, run.stderr
    assert "check passed" in run.stdout
