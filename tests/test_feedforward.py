"""Reference feedforward N: unit steady-state gain from r to y, computed numerically.

References:
* The steady-state gain from r to y of x' = (A - B K) x + B N r, y = C x is found here with
  scipy.signal.ss2tf (numerator over denominator at s = 0) and with numpy.linalg.solve, not
  with symgain's formula.
* For a plant whose measured output is the first state of an integrator chain (x' = v), the
  reference gain equals the feedback gain on that state, N = K_x (common practice).
"""
from pathlib import Path

import numpy as np
import pytest
import sympy as sp
from scipy import signal

from symgain.analysis.check import check_design
from symgain.cli import main
from symgain.design import derive
from symgain.errors import DesignError
from symgain.model import Model, Parameter, TargetSpec
from symgain.model.toml_file import load_model

ROOT = Path(__file__).resolve().parent.parent
STAGE = ROOT / "examples" / "linear_stage.toml"
BOAT = ROOT / "examples" / "twin_thruster_boat.toml"


def test_stage_unit_dc_gain_with_ss2tf():
    model = load_model(STAGE)
    design = derive(model)
    rng = np.random.default_rng(5)
    for _ in range(6):
        vals = {p.symbol: rng.uniform(*p.range) for p in model.parameters}
        A, B, C = (np.array(M.subs(vals), dtype=float) for M in (model.A, model.B, model.C))
        K = np.array(design.feedback.gain.subs(vals), dtype=float)
        N = np.array(design.feedforward.gain.subs(vals), dtype=float)
        num, den = signal.ss2tf(A - B @ K, B @ N, C, np.zeros((1, 1)))
        assert abs(np.polyval(num[0], 0.0) / np.polyval(den, 0.0) - 1) < 1e-9


def test_stage_reference_gain_equals_the_position_gain():
    design = derive(load_model(STAGE))
    assert sp.simplify(design.feedforward.gain[0, 0] - design.feedback.gain[0, 0]) == 0
    assert design.feedforward.target is None
    assert "formula" in [st.name for st in design.feedforward.steps]


def test_three_state_drive_unit_dc_gain():
    m, c, tau = (Parameter.declare(n, sign="positive", range=r) for n, r in
                 (("m", (1, 3)), ("c", (0.5, 2)), ("tau", (0.01, 0.05))))
    A = sp.Matrix([[0, 1, 0], [0, -c.symbol / m.symbol, 1 / m.symbol], [0, 0, -1 / tau.symbol]])
    B = sp.Matrix([[0], [0], [1 / tau.symbol]])
    model = Model(name="drive", parameters=(m, c, tau), states=("x", "v", "F"), inputs=("u",), outputs=("x",),
                  A=A, B=B, C=sp.Matrix([[1, 0, 0]]), feedback=TargetSpec("poles", {"poles": (-2, -3, -40)}),
                  feedforward=True)
    design = derive(model)
    rng = np.random.default_rng(2)
    for _ in range(5):
        vals = {p.symbol: rng.uniform(*p.range) for p in model.parameters}
        An, Bn, Cn = (np.array(M.subs(vals), dtype=float) for M in (model.A, model.B, model.C))
        K = np.array(design.feedback.gain.subs(vals), dtype=float)
        N = np.array(design.feedforward.gain.subs(vals), dtype=float)
        dc = -Cn @ np.linalg.solve(An - Bn @ K, Bn @ N)
        assert abs(dc[0, 0] - 1) < 1e-9
    assert check_design(design, n_points=5).passed


def test_output_that_cannot_hold_a_constant_is_refused():
    """A velocity behind an integrator in the loop: in steady state v = x' = 0, whatever N."""
    m = Parameter.declare("m", sign="positive", range=(1, 2))
    model = Model(name="cart", parameters=(m,), states=("p", "v"), inputs=("F",), outputs=("v",),
                  A=sp.Matrix([[0, 1], [0, 0]]), B=sp.Matrix([[0], [1 / m.symbol]]), C=sp.Matrix([[0, 1]]),
                  feedback=TargetSpec("poles", {"poles": (-1, -2)}), feedforward=True)
    with pytest.raises(DesignError, match="singular for every parameter value"):
        derive(model)


def test_two_input_boat_feedforward_is_identity_at_dc():
    """Two inputs, two outputs (surge speed, heading); K has a free gain, so N has it too."""
    import tomllib

    data = tomllib.loads(BOAT.read_text())
    data["feedforward"] = {}
    from symgain.model.toml_file import model_from_dict

    model = model_from_dict(data, "boat.toml")
    design = derive(model)
    free = design.feedback.free_gains
    assert design.feedforward.gain.shape == (2, 2) and free
    assert design.feedforward.free_gains == free
    rng = np.random.default_rng(9)
    for _ in range(4):
        vals = {p.symbol: rng.uniform(*p.range) for p in model.parameters}
        vals.update({g: rng.uniform(0.5, 1.5) for g in free})
        A, B, C = (np.array(M.subs(vals), dtype=float) for M in (model.A, model.B, model.C))
        K = np.array(design.feedback.gain.subs(vals), dtype=float)
        N = np.array(design.feedforward.gain.subs(vals), dtype=float)
        dc = -C @ np.linalg.solve(A - B @ K, B @ N)
        assert np.allclose(dc, np.eye(2), atol=1e-8)
    assert check_design(design, n_points=5).passed


CART = '''name = "cart"
[parameters]
m = { sign = "positive", range = [1, 2] }
[plant]
states = ["p", "v"]
inputs = ["F"]
%s
A = [["0", "1"], ["0", "0"]]
B = [["0"], ["1/m"]]
%s
[feedforward]
'''


@pytest.mark.parametrize("outputs, tables, message", [
    ("", '[feedback]\npoles = ["-1", "-2"]', "no outputs"),
    ('outputs = ["p", "v"]', '[feedback]\npoles = ["-1", "-2"]', "as many outputs as inputs"),
    ('outputs = ["p"]', '[integral]\npoles = ["-1", "-2", "-3"]', "only [integral]"),
    ('outputs = ["p"]', "", "no [feedback]"),
])
def test_bad_feedforward_exits_2_with_one_line(outputs, tables, message, tmp_path, capsys):
    path = tmp_path / "cart.toml"
    path.write_text(CART % (outputs, tables))
    with pytest.raises(DesignError, match=message.replace("[", r"\[").replace("]", r"\]")):
        derive(load_model(path))
    assert main(["derive", str(path)]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "feedforward" in err


def test_generated_python_gives_unit_dc_gain(tmp_path):
    """Through the emitted module: feedback_gain and feedforward_gain evaluated by the generated code."""
    import importlib.util

    from symgain.emit import emit

    model = load_model(STAGE)
    (path,) = emit(derive(model), ["python"], tmp_path, name="stage_gains")
    spec = importlib.util.spec_from_file_location("stage_gains", path)
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    for m, c, w in ((2.0, 1.0, 40.0), (3.5, 5.0, 100.0)):
        K = module.feedback_gain(m=m, c=c, w=w)
        N = module.feedforward_gain(m=m, c=c, w=w)
        L = module.estimator_gain(m=m, c=c, w=w)
        A = np.array([[0, 1], [0, -c / m]]); B = np.array([[0], [1 / m]]); C = np.array([[1.0, 0.0]])
        num, den = signal.ss2tf(A - B @ K, B @ N, C, np.zeros((1, 1)))
        assert abs(np.polyval(num[0], 0.0) / np.polyval(den, 0.0) - 1) < 1e-9
        assert np.allclose(np.sort(np.linalg.eigvals(A - L @ C).real), [-5 * w, -4 * w])


def test_check_catches_a_wrong_feedforward_gain():
    from dataclasses import replace

    design = derive(load_model(STAGE))
    wrong = replace(design, feedforward=replace(design.feedforward, gain=sp.ImmutableMatrix(design.feedforward.gain * 1.01)))
    report = check_design(wrong, n_points=3)
    assert not report.passed and report.counts("feedforward")["fail"] == 3
