"""One sample of computation delay (``compute_delay = true``): u[k], computed from y[k], acts from k+1.

References: the delay-state augmentation x_a = [x; u[k-1]], Phi_a = [[Phi, Gamma], [0, 0]],
Gamma_a = [[0], [I]] (common practice; Franklin, Powell and Workman, "Digital Control of Dynamic
Systems", the full-period delay, from memory), built here from scipy.signal.cont2discrete and
placed by scipy.signal.place_poles; Ackermann's formula (common practice) for the deadbeat gains
of the delayed double integrator; and the independent recursion of tests/controller_reference.py
for the emitted Python and C controllers (agreement to 1e-9).
"""
import importlib.util

import numpy as np
import pytest
import scipy.signal
import sympy as sp

from controller_reference import simulate
from symgain.analysis.check import check_design
from symgain.design import derive
from symgain.emit import emit
from symgain.errors import SymgainError
from symgain.model import model_from_text

STAGE = """
name = "delay_stage"
[parameters]
m = { sign = "positive", range = [2, 6], nominal = 4 }
c = { sign = "positive", range = [1, 8], nominal = 3 }
w = { sign = "positive", range = [10, 40], nominal = 20, role = "design" }
T = { sign = "positive", range = [0.001, 0.01], nominal = 0.002, role = "design" }
[plant]
states  = ["x", "v"]
inputs  = ["F"]
outputs = ["x"]
A = [["0", "1"], ["0", "-c/m"]]
B = [["0"], ["1/m"]]
[discrete]
sample_time = "T"
compute_delay = true
[feedback]
damping = "0.8"
natural_frequency = "w"
[estimator]
poles = ["-4*w", "-5*w"]
[feedforward]
[input_limits]
F = { min = "-60", max = "60", rate = "20000" }
"""

CART = """
name = "delay_cart"
[parameters]
T = { sign = "positive", range = [0.01, 0.1], nominal = 0.05, role = "design" }
[plant]
states = ["p", "v"]
inputs = ["F"]
A = [["0", "1"], ["0", "0"]]
B = [["0"], ["1"]]
[discrete]
sample_time = "T"
compute_delay = true
[feedback]
deadbeat = true
"""

MIRROR = """
name = "delay_mirror"
[parameters]
J = { sign = "positive", range = [2e-5, 5e-5], nominal = 3e-5 }
k = { sign = "positive", range = [0.5, 2], nominal = 1.2 }
[plant]
states  = ["theta", "omega"]
inputs  = ["tau"]
outputs = ["theta"]
A = [["0", "1"], ["-k/J", "0"]]
B = [["0"], ["1/J"]]
[discrete]
sample_time = "0.001"
compute_delay = true
delay_poles = ["0.2"]
[integral]
z_poles = ["0.6", "0.65", "0.7"]
[input_limits]
tau = { min = "-0.015", max = "0.015" }
"""


def _augmented(A, B, T):
    ad, bd, *_ = scipy.signal.cont2discrete((A, B, np.eye(A.shape[0]), np.zeros(B.shape)), T, method="zoh")
    n, m = bd.shape
    return np.block([[ad, bd], [np.zeros((m, n + m))]]), np.vstack([np.zeros((n, m)), np.eye(m)]), ad, bd


def _module(design, tmp_path):
    emit(design, ["python"], tmp_path)
    name = design.model.name
    spec = importlib.util.spec_from_file_location(f"emitted_{name}", tmp_path / f"{name}.py")
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


@pytest.fixture(scope="module")
def stage():
    return derive(model_from_text(STAGE))


def test_gain_matches_place_poles_on_the_delayed_plant(stage):
    K = sp.lambdify(sp.symbols("m c w T"), stage.feedback.gain, "numpy")
    for m, c, w, T in [(4.0, 3.0, 20.0, 0.002), (2.5, 7.0, 35.0, 0.009), (5.0, 1.5, 12.0, 0.005)]:
        A, B = np.array([[0, 1], [0, -c / m]]), np.array([[0], [1 / m]])
        Pa, Ga, _, _ = _augmented(A, B, T)
        sigma, omega = -0.8 * w, 0.6 * w  # damping 0.8, natural frequency w, mapped by z = exp(s T)
        poles = [np.exp((sigma + 1j * omega) * T), np.exp((sigma - 1j * omega) * T), 0.0]  # delay pole at 0
        ref = scipy.signal.place_poles(Pa, Ga, poles).gain_matrix
        got = np.array(K(m, c, w, T), dtype=float)
        assert got.shape == (1, 3)
        # closed form vs scipy: short-period cancellation in the closed form costs digits (1e-7 here)
        np.testing.assert_allclose(got, ref, rtol=1e-6)
        np.testing.assert_allclose(np.sort_complex(np.linalg.eigvals(Pa - Ga @ got)), np.sort_complex(poles),
                                   atol=1e-6)
    assert check_design(stage, n_points=6).passed  # symgain check on the augmented pair as well


def test_deadbeat_double_integrator_with_delay_by_ackermann():
    design = derive(model_from_text(CART))
    T = sp.Symbol("T", positive=True)
    Phi, Gamma = sp.Matrix([[1, T], [0, 1]]), sp.Matrix([[T**2 / 2], [T]])  # ZOH of 1/s^2: common practice
    Pa = sp.Matrix([[1, T, T**2 / 2], [0, 1, T], [0, 0, 0]])
    Ga = sp.Matrix([0, 0, 1])
    ctrb = sp.Matrix.hstack(Ga, Pa * Ga, Pa**2 * Ga)
    ackermann = (sp.Matrix([[0, 0, 1]]) * ctrb.inv() * Pa**3).applyfunc(sp.simplify)  # target z^3
    assert sp.simplify(sp.Matrix(design.feedback.gain).subs(sp.Symbol("T", positive=True), T) - ackermann) == \
        sp.zeros(1, 3)
    # by hand: det(zI - Pa + Ga K) = (z-1)^2 (z+k3) + T k2 (z-1) + k1 T^2 (z+1)/2
    #   = z^3 + (k3-2) z^2 + (1 - 2 k3 + T k2 + k1 T^2/2) z + (k3 - T k2 + k1 T^2/2) = z^3
    #   gives k3 = 2, k2 = 5/(2T), k1 = 1/T^2
    assert sp.simplify(ackermann - sp.Matrix([[1 / T**2, 5 / (2 * T), 2]])) == sp.zeros(1, 3)
    assert Pa[:2, :2] == Phi and Pa[:2, 2:] == Gamma


def test_deadbeat_with_delay_reaches_zero_in_three_samples(tmp_path):
    design = derive(model_from_text(CART))
    ctl = _module(design, tmp_path).Controller(T=0.05)
    us, ys, uc = simulate(design, {"T": 0.05}, 0.05, 8, [1.0, -0.5], np.zeros(0), ctl)
    np.testing.assert_allclose(uc, us, atol=1e-12)
    assert us[0, 0] == 0.0  # the first sample acts with the held (zero) input
    # n + 1 = 3 samples (two states and the delay state) after the first computed input acts
    x = np.array([1.0, -0.5])
    Phi, Gamma = np.array([[1, 0.05], [0, 1]]), np.array([0.05**2 / 2, 0.05])
    for u in us[:, 0]:
        x = Phi @ x + Gamma * u
    assert np.max(np.abs(ys[4:])) < 1e-12 and np.max(np.abs(ys[:3])) > 0.1


def test_python_controller_matches_recursion(stage, tmp_path):
    module = _module(stage, tmp_path)
    values = stage.model.nominal_values()
    ctl = module.Controller(T=values["T"])
    assert ctl.DELAY and ctl.K.shape == (1, 3)
    us, ys, uc = simulate(stage, values, values["T"], 500, [0.0, 0.0], np.array([0.01]), ctl)
    assert np.max(np.abs(uc - us)) < 1e-9 * max(1.0, np.max(np.abs(us)))
    assert abs(ys[-1, 0] - 0.01) < 1e-5  # feedforward on the delayed loop: unit steady-state gain
    assert us[0, 0] == 0.0 and us[1, 0] != 0.0  # the first input acts one sample late


def test_mirror_integral_with_delay_and_delay_pole(tmp_path):
    design = derive(model_from_text(MIRROR))
    J, k, T = 3e-5, 1.2, 0.001
    A, B = np.array([[0, 1], [-k / J, 0]]), np.array([[0], [1 / J]])
    Pa, Ga, ad, bd = _augmented(A, B, T)
    Pi = np.block([[Pa, np.zeros((3, 1))], [T * np.array([[1.0, 0.0, 0.0]]), np.eye(1)]])  # q += T (y - r)
    Gi = np.vstack([Ga, np.zeros((1, 1))])
    full = np.hstack([np.array(design.integral.gain.subs({sp.Symbol("J", positive=True): J,
                                                          sp.Symbol("k", positive=True): k}), dtype=float),
                      np.array(design.integral.extra["integral_gain"].subs(
                          {sp.Symbol("J", positive=True): J, sp.Symbol("k", positive=True): k}), dtype=float)])
    ref = scipy.signal.place_poles(Pi, Gi, [0.6, 0.65, 0.7, 0.2]).gain_matrix
    np.testing.assert_allclose(full, ref, rtol=1e-7)
    ctl = _module(design, tmp_path).Controller()
    us, ys, uc = simulate(design, {"J": J, "k": k}, T, 400, [-0.01, 0.0], np.array([0.012]), ctl)
    assert np.max(np.abs(uc - us)) < 1e-9 * np.max(np.abs(us))
    assert np.sum(np.abs(us) >= 0.015 - 1e-15) >= 2  # saturates, clamped integrator
    assert abs(ys[-1, 0] - 0.012) < 1e-7


def test_c_controller_with_delay_matches_recursion(stage, tmp_path):
    from test_controller_c import CC, _Recorder, _build, _run
    if CC is None:
        pytest.skip("no C compiler")
    for design, values, r, steps in [(stage, stage.model.nominal_values(), [0.01], 400),
                                     (derive(model_from_text(MIRROR)), {"J": 3e-5, "k": 1.2}, [0.012], 300)]:
        T = values.get("T", 0.001)
        recorder = _Recorder(design.model.n_inputs)
        us, _, _ = simulate(design, values, T, steps, [0.0, 0.0], np.array(r), recorder)
        folder = tmp_path / design.model.name
        folder.mkdir()
        uc = _run(_build(design, folder, values, T), recorder.fed)
        assert uc.shape == us.shape
        assert np.max(np.abs(uc - us)) < 1e-9 * max(1.0, np.max(np.abs(us)))


def test_delay_keys_are_checked():
    with pytest.raises(SymgainError, match="compute_delay"):
        model_from_text(CART.replace("compute_delay = true", 'delay_poles = ["0"]'))
    with pytest.raises(SymgainError, match="delay_poles"):
        derive(model_from_text(CART.replace("deadbeat = true", 'z_poles = ["0.5", "0.4"]').replace(
            "compute_delay = true", 'compute_delay = true\ndelay_poles = ["0", "0.1"]')))
