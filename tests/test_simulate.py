"""Closed-loop simulation checked against analytic responses and hand-worked cases.

Outside references:
* second-order step response (common practice): overshoot exp(-pi zeta / sqrt(1 - zeta^2)),
  y(t) = 1 - exp(-zeta wn t) (cos(wd t) + zeta / sqrt(1 - zeta^2) sin(wd t)), 2 % settling near 4 / (zeta wn);
* scipy.signal.step of the continuous closed loop (a reference library);
* constant acceleration from rest (common practice): p = a t^2 / 2, so a point d is reached after sqrt(2 d / a);
* the period of a pendulum of amplitude theta0 (common practice): 4 sqrt(l / g) K(sin^2(theta0 / 2)),
  K the complete elliptic integral of the first kind (scipy.special.ellipk, parameter m = k^2).
"""
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest
import scipy.signal
import scipy.special

from symgain.cli import main
from symgain.design import derive
from symgain.model.toml_file import model_from_text
from symgain.analysis.simulation.campaign import prepare, run_campaign
from symgain.analysis.simulation.metrics import output_metrics
from symgain.analysis.simulation.plant import PlantSpec
from symgain.model.simulation_keys import Scenario

ROOT = Path(__file__).resolve().parent.parent
EXAMPLES = sorted((ROOT / "examples").glob("*.toml"))

DOUBLE_INTEGRATOR = """
name = "slide"
[parameters]
m = {{ sign = "positive", range = [1, 1], nominal = 1 }}
[plant]
states = ["p", "v"]
inputs = ["F"]
outputs = ["p"]
A = [["0", "1"], ["0", "0"]]
B = [["0"], ["1/m"]]
[feedback]
{target}
[feedforward]
{extra}
"""


def campaign_of(text, tmp_path, **kw):
    design = derive(model_from_text(text, "test.toml"))
    setup = prepare(design, tmp_path, **kw)
    return setup, run_campaign(setup, jobs=1)


def test_second_order_step_meets_the_analytic_response(tmp_path):
    zeta, wn = 0.5, 2.0
    text = DOUBLE_INTEGRATOR.format(target=f'damping = "{zeta}"\nnatural_frequency = "{wn}"', extra="")
    setup, campaign = campaign_of(text, tmp_path, sample_time=1e-3, duration=12.0,
                                  scenarios=[Scenario("step", reference={"p": 1})])
    (run,) = campaign.runs
    t, y = run.trace.t, run.trace.y[:, 0]
    wd = wn * np.sqrt(1 - zeta**2)
    analytic = 1 - np.exp(-zeta * wn * t) * (np.cos(wd * t) + zeta / np.sqrt(1 - zeta**2) * np.sin(wd * t))
    assert np.max(np.abs(y - analytic)) < 5e-3  # sampled at 1 ms with a held input
    rows = {r.name: r.value for r in run.rows}
    overshoot = np.exp(-np.pi * zeta / np.sqrt(1 - zeta**2))  # 0.163
    assert rows["overshoot"] == pytest.approx(overshoot, abs=3e-3)
    assert rows["settling_time"] == pytest.approx(4 / (zeta * wn), rel=0.15)
    # the same metric on scipy's continuous step response agrees closely
    system = scipy.signal.lti([wn**2], [1, 2 * zeta * wn, wn**2])
    ts, ys = scipy.signal.step(system, T=t)
    reference = output_metrics(ts, ys, start=0.0, target=1.0, event_time=0.0, moved=True)
    assert rows["settling_time"] == pytest.approx(reference["settling_time"], abs=0.02)
    assert rows["steady_state_error"] < 1e-3


def test_saturated_thrust_reaches_a_point_after_sqrt_2d_over_a(tmp_path):
    a_max, d = 2.0, 1.0
    text = DOUBLE_INTEGRATOR.format(target='poles = ["-1", "-1"]', extra="") + (
        f'[input_limits]\nF = {{ min = "{-a_max}", max = "{a_max}" }}\n')
    setup, campaign = campaign_of(text, tmp_path, sample_time=1e-3, duration=3.0,
                                  scenarios=[Scenario("far", reference={"p": 50})])
    (run,) = campaign.runs
    t, p = run.trace.t, run.trace.y[:, 0]
    reached = t[np.argmax(p >= d)]
    assert reached == pytest.approx(np.sqrt(2 * d / a_max), abs=2e-3)
    assert np.all(run.trace.u <= a_max + 1e-12)
    saturated = {r.name: r.value for r in run.rows if r.signal == "F"}
    assert saturated["time_saturated"] >= np.sqrt(2 * d / a_max)
    assert saturated["peak_input"] == pytest.approx(a_max)


def test_rate_limited_thrust_worked_by_hand(tmp_path):
    # u ramps at 4 N/s from 0 to 2 N (0.5 s), then stays at 2 N (m = 1 kg):
    # p(0.5) = 4 * 0.5^3 / 6, v(0.5) = 0.5; then p = p(0.5) + 0.5 s + s^2 with s = t - 0.5.
    text = DOUBLE_INTEGRATOR.format(target='poles = ["-1", "-1"]', extra="") + (
        '[input_limits]\nF = { min = "-2", max = "2", rate = "4" }\n')
    setup, campaign = campaign_of(text, tmp_path, sample_time=1e-3, duration=3.0,
                                  scenarios=[Scenario("far", reference={"p": 50})])
    (run,) = campaign.runs
    p05 = 4 * 0.5**3 / 6
    s = (-0.5 + np.sqrt(0.25 + 4 * (1 - p05))) / 2
    reached = run.trace.t[np.argmax(run.trace.y[:, 0] >= 1.0)]
    assert reached == pytest.approx(0.5 + s, abs=3e-3)
    assert np.max(np.diff(np.concatenate([[0.0], run.trace.u[:, 0]]))) <= 4 * 1e-3 + 1e-12


PENDULUM = """
name = "upright_pendulum"
[parameters]
m = { sign = "positive", range = [1, 1] }
l = { sign = "positive", range = [1, 1] }
g = { sign = "positive", range = [9.81, 9.81] }
[plant]
states = ["theta", "omega"]
inputs = ["tau"]
outputs = ["theta"]
equations = { theta = "omega", omega = "(tau + m*g*l*sin(theta))/(m*l^2)" }
equilibrium = { theta = "0", omega = "0", tau = "0" }
[feedback]
poles = ["-4", "-5"]
[input_limits]
tau = { min = "-0.5*m*g*l", max = "0.5*m*g*l" }
"""


def test_nonlinear_pendulum_recovers_from_small_offset_and_falls_from_large(tmp_path):
    # the held torque is at most half of m g l: beyond asin(0.5) = 0.52 rad gravity wins at rest
    setup, campaign = campaign_of(PENDULUM, tmp_path, sample_time=2e-3, duration=4.0,
                                  scenarios=[Scenario("small", initial={"theta": 0.1}),
                                             Scenario("large", initial={"theta": 0.8})])
    assert setup.plant.nonlinear
    small, large = campaign.runs
    assert abs(small.trace.y[-1, 0]) < 1e-3 and small.passed
    assert np.nanmax(np.abs(large.trace.y[:, 0])) > np.pi / 2 and not large.passed
    assert np.all(np.abs(large.trace.u) <= 0.5 * 9.81 + 1e-9)


def test_nonlinear_plant_has_the_large_amplitude_pendulum_period():
    text = PENDULUM.replace("+ m*g*l*sin(theta)", "- m*g*l*sin(theta)")  # hanging pendulum
    model = model_from_text(text, "hanging.toml")
    plant = PlantSpec.from_model(model).at({"m": 1, "l": 1, "g": 9.81}, {"m": 1, "l": 1, "g": 9.81})
    theta0, dt = 2.0, 1e-3
    x, t = np.array([theta0, 0.0]), 0.0
    while x[0] > 0:
        previous, x, t = x, plant.advance(x, np.zeros(1), t, t + dt), t + dt
    crossing = t - dt * x[0] / (x[0] - previous[0])  # linear interpolation of the zero crossing
    quarter = np.sqrt(1 / 9.81) * scipy.special.ellipk(np.sin(theta0 / 2) ** 2)
    assert crossing == pytest.approx(quarter, rel=1e-4)
    assert quarter > 0.25 * 2 * np.pi * np.sqrt(1 / 9.81) * 1.2  # far from the small-angle period


def _write(tmp_path, text):
    path = tmp_path / "model.toml"
    path.write_text(text)
    return str(path)


def test_a_failing_requirement_gives_exit_code_1(tmp_path, capsys):
    base = DOUBLE_INTEGRATOR.format(target='damping = "0.5"\nnatural_frequency = "2"', extra="")
    failing = _write(tmp_path, base + '[requirements]\nsettling_time = 2.0\novershoot = 0.05\n')
    code = main(["simulate", failing, "-o", str(tmp_path / "out"), "--reference", "p=1", "--quiet"])
    out = capsys.readouterr().out
    assert code == 1
    assert "FAIL" in out and "worst point" in out
    assert (tmp_path / "out" / "slide-simulation-1.png").stat().st_size > 10_000
    passing = _write(tmp_path, base + '[requirements]\nsettling_time = 6.0\novershoot = 0.25\n')
    assert main(["simulate", passing, "-o", str(tmp_path / "out"), "--reference", "p=1", "--quiet"]) == 0


def test_bad_input_gives_exit_code_2(tmp_path, capsys):
    path = _write(tmp_path, DOUBLE_INTEGRATOR.format(target='poles = ["-1", "-2"]', extra=""))
    assert main(["simulate", path, "--reference", "q=1", "-o", str(tmp_path)]) == 2
    assert "not one of p" in capsys.readouterr().err
    bad = _write(tmp_path, DOUBLE_INTEGRATOR.format(target='poles = ["-1", "-2"]', extra="")
                 + "[requirements]\nrise_time = 1\n")
    assert main(["simulate", bad, "-o", str(tmp_path)]) == 2


def test_mismatch_points_run_in_a_process_pool_like_in_one_process(tmp_path):
    text = """
name = "cart"
[parameters]
m = { sign = "positive", range = [10, 40] }
c = { sign = "nonnegative", range = [0, 5] }
[plant]
states = ["p", "v"]
inputs = ["F"]
outputs = ["p"]
A = [["0", "1"], ["0", "-c/m"]]
B = [["0"], ["1/m"]]
[feedback]
poles = ["-2", "-3"]
[simulation]
points = 5
[[simulation.scenario]]
name = "noisy offset"
initial = { p = 0.2 }
noise = { p = 0.001, v = 0.001 }
"""
    design = derive(model_from_text(text, "cart.toml"))
    setup = prepare(design, tmp_path)
    serial, parallel = run_campaign(setup, jobs=1), run_campaign(setup, jobs=2)
    assert len(setup.points) == 1 + 4 + 5 and parallel.workers == 2
    for a, b in zip(serial.runs, parallel.runs):
        assert np.array_equal(a.trace.y, b.trace.y)  # same seeds, same noise
    assert serial.worst.point == parallel.worst.point


@pytest.mark.parametrize("path", EXAMPLES, ids=[p.stem for p in EXAMPLES])
def test_simulate_runs_on_every_example(path, tmp_path, capsys):
    code = main(["simulate", str(path), "-o", str(tmp_path), "--points", "2", "--no-corners", "--jobs", "1",
                 "--quiet"])
    captured = capsys.readouterr()
    assert code in (0, 1), captured.err  # 1: a requirement fails somewhere; never 2 or 3
    assert "worst point" in captured.out
    assert list(tmp_path.glob("*-simulation-1.png"))


def test_simulate_command_line_in_a_fresh_process(tmp_path):
    path = ROOT / "examples" / "greenhouse_cart.toml"
    result = subprocess.run([sys.executable, "-m", "symgain", "simulate", str(path), "-o", str(tmp_path),
                             "--points", "4", "--quiet"], capture_output=True, text=True, cwd=tmp_path,
                            timeout=600, env={"PYTHONPATH": str(ROOT), "PATH": "/usr/bin:/bin"})
    assert result.returncode in (0, 1), result.stderr
    assert "points per second" in result.stdout


LINEAR_STAGE = ROOT / "examples" / "linear_stage.toml"


def test_push_leaves_the_offset_of_the_linear_closed_loop_steady_state(tmp_path):
    # Reference: the steady state of plant + estimator + u = -K x_hat under a constant input
    # disturbance d, solved with numpy (0 = A_cl z + B_d d), K from the damping/frequency target
    # (common practice: K = [m wn^2, 2 zeta m wn - c]) and L from scipy.signal.place_poles.
    from symgain.model.toml_file import load_model

    design = derive(load_model(LINEAR_STAGE))
    setup = prepare(design, tmp_path, points=0, corners=False,
                    scenarios=[Scenario("push", disturbance={"F": 20})])
    (run,) = run_campaign(setup, jobs=1).runs
    m, c, w = 2.5, 2.0, 60.0
    A = np.array([[0, 1], [0, -c / m]])
    B = np.array([[0], [1 / m]])
    C = np.array([[1.0, 0.0]])
    K = np.array([[m * w**2, 2 * 0.7 * m * w - c]])
    L = scipy.signal.place_poles(A.T, C.T, [-4 * w, -5 * w]).gain_matrix.T
    A_cl = np.block([[A, -B @ K], [L @ C, A - B @ K - L @ C]])
    steady = np.linalg.solve(A_cl, -np.vstack([B, np.zeros((2, 1))]) * 20.0)
    error = {r.name: r.value for r in run.rows if r.signal == "x"}["steady_state_error"]
    assert error == pytest.approx(abs(steady[0, 0]), rel=1e-3)
    assert abs(steady[0, 0]) > 20.0 / K[0, 0] * 1.2  # the estimator makes it larger than d / k_p


def test_runs_that_do_not_settle_are_the_unstable_points(tmp_path):
    # Reference: numpy's eigenvalues of A(true) - B(true) K(nominal) at each sampled point.
    from symgain.model.toml_file import load_model
    from symgain.analysis.simulation.plant import PlantSpec

    design = derive(load_model(ROOT / "examples" / "quarter_car_suspension.toml"))
    setup = prepare(design, tmp_path, points=6, corners=False)
    campaign = run_campaign(setup, jobs=1)
    probe_K, checked = None, set()
    for run in campaign.runs:
        point = setup.points[run.point]
        plant = PlantSpec.from_model(design.model).at(point.values, setup.nominal)
        if probe_K is None:
            from symgain.analysis.simulation.controller import new_controller
            probe_K = new_controller(setup.module_path, setup.T, setup.nominal).K
        growth = np.max(np.linalg.eigvals(plant.A - plant.B @ probe_K).real)
        settles = [r for r in run.rows if r.name == "settles"][0].passed
        if growth >= 0:
            assert not settles, (point.label, growth)
            checked.add(False)
        elif 6.0 / -growth < setup.duration:  # stable and fast enough to settle within the run
            assert settles, (point.label, growth)
            checked.add(True)
    assert checked == {True, False}  # the sample holds both kinds


def test_sampled_design_follows_its_own_discrete_recursion(tmp_path):
    # Reference: scipy.signal.cont2discrete (zero-order hold) and the recursion
    # x[k+1] = (Phi - Gamma K) x[k] of the sampled state feedback, with the emitted K.
    text = (ROOT / "examples" / "sampled_stage.toml").read_text()
    text = text.replace("[estimator]\npoles = [\"-4*w\", \"-5*w\"]\n", "").replace("[feedforward]\n", "")
    design = derive(model_from_text(text, "sampled.toml"))
    setup = prepare(design, tmp_path, points=0, corners=False, duration=0.2,
                    scenarios=[Scenario("offset", initial={"x": 0.01})])
    (run,) = run_campaign(setup, jobs=1).runs
    from symgain.analysis.simulation.controller import new_controller

    ctl = new_controller(setup.module_path, None, setup.nominal)
    T = 0.002
    m, c = 4.0, 3.0
    Phi, Gamma, *_ = scipy.signal.cont2discrete((np.array([[0, 1], [0, -c / m]]), np.array([[0], [1 / m]]),
                                                 np.eye(2), np.zeros((2, 1))), T, method="zoh")
    x = np.array([0.01, 0.0])
    for k in range(50):
        assert np.allclose(run.trace.x[k], x, atol=1e-12, rtol=1e-9), k
        x = (Phi - Gamma @ ctl.K) @ x
    assert setup.cases[0].T == pytest.approx(T)


def test_latex_report_carries_the_simulation_section(tmp_path, capsys):
    import shutil

    path = _write(tmp_path, DOUBLE_INTEGRATOR.format(target='damping = "0.5"\nnatural_frequency = "2"', extra="")
                  + '[simulation]\npoints = 0\n[[simulation.scenario]]\nname = "unit move"\nreference = { p = 1 }\n'
                  + '[requirements]\novershoot = 0.05\n')
    out = tmp_path / "report"
    assert main(["emit", path, "--to", "latex", "--with-simulation", "-o", str(out)]) == 0
    tex = (out / "slide.tex").read_text()
    assert r"\section{Closed-loop simulation}" in tex and r"\includegraphics" in tex
    assert r"\textbf{FAIL}" in tex  # 16 % overshoot against 5 %
    assert (out / "slide-simulation-1.png").is_file()
    assert main(["emit", path, "--to", "c", "--with-simulation", "-o", str(out)]) == 2
    if shutil.which("pdflatex") is None:
        pytest.skip("pdflatex not installed (Debian: apt-get install texlive-latex-base)")
    result = subprocess.run(["pdflatex", "-interaction=nonstopmode", "-halt-on-error", "slide.tex"], cwd=out,
                            capture_output=True, text=True, timeout=120)
    assert result.returncode == 0, result.stdout[-2000:]


def test_scheduled_gains_give_every_plant_the_design_response(tmp_path):
    # With the controller scheduled on the true values, every point's closed loop has the design
    # poles (-2, -3): the same response everywhere; at nominal gains the responses differ.
    text = """
name = "cart"
[parameters]
m = { sign = "positive", range = [10, 40] }
[plant]
states = ["p", "v"]
inputs = ["F"]
outputs = ["p"]
A = [["0", "1"], ["0", "0"]]
B = [["0"], ["1/m"]]
[feedback]
poles = ["-2", "-3"]
"""
    design = derive(model_from_text(text, "cart.toml"))
    traces = {}
    for gains in ("scheduled", "nominal"):
        setup = prepare(design, tmp_path / gains, gains=gains, points=3, sample_time=1e-3)
        traces[gains] = [r.trace.y[:, 0] for r in run_campaign(setup, jobs=1).runs]
    spread = {g: max(np.max(np.abs(y - ys[0])) for y in ys) for g, ys in traces.items()}
    assert spread["scheduled"] < 1e-12 and spread["nominal"] > 1e-3
    t = np.arange(traces["scheduled"][0].size) * 1e-3  # continuous reference: 0.1 (3 e^-2t - 2 e^-3t)
    assert np.max(np.abs(traces["scheduled"][0] - 0.1 * (3 * np.exp(-2 * t) - 2 * np.exp(-3 * t)))) < 1e-3
