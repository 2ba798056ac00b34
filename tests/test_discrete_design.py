"""Sampled-data gains against outside references.

Sources: the double integrator's ZOH model and deadbeat gains are common practice (derived by
hand below); Franklin, Powell and Workman, "Digital Control of Dynamic Systems" (satellite
attitude example, T = 0.1 s, poles 0.8 +- 0.25j, K = [10.25, 3.4875], from memory); Ogata,
"Discrete-Time Control Systems" (plant Phi = [[0, 1], [-0.16, -1]], Gamma = [[0], [1]]:
poles 0.5 +- 0.5j give K = [0.34, -2], deadbeat gives K = [-0.16, -1], from memory);
scipy.signal.cont2discrete and place_poles at sampled points (via symgain.check).
"""
from pathlib import Path

import numpy as np
import pytest
import scipy.signal
import sympy as sp

from symgain.analysis.check import check_design
from symgain.design import derive, design_gain
from symgain.design.sampled import z_spec
from symgain.design.discrete_targets import Z
from symgain.errors import ModelError
from symgain.model import S, Model, Parameter, TargetSpec
from symgain.model import load_model, model_from_text
from symgain.design.placement import ackermann
from symgain.model.sampling_keys import Sampling

EXAMPLES = Path(__file__).resolve().parent.parent / "examples"
SAMPLED = [p for p in sorted(EXAMPLES.glob("*.toml")) if "[discrete]" in p.read_text()]


def _double_integrator(target: TargetSpec, period="T"):
    T = Parameter.declare("T", sign="positive", range=(0.01, 0.5), role="design")
    sampling = Sampling(T.symbol if period == "T" else sp.nsimplify(period))
    return Model(name="di", parameters=(T,), states=("p", "v"), inputs=("u",), A=sp.Matrix([[0, 1], [0, 0]]),
                 B=sp.Matrix([[0], [1]]), feedback=target, sampling=sampling)


def test_double_integrator_deadbeat_common_practice():
    T = sp.Symbol("T", positive=True)
    k1, k2 = sp.symbols("k1 k2")
    # by hand: Phi - Gamma K = [[1 - k1 T^2/2, T - k2 T^2/2], [-k1 T, 1 - k2 T]]; asking z^2 gives
    # trace 2 - k1 T^2/2 - k2 T = 0 and determinant 1 - k2 T + k1 T^2/2 = 0
    hand = sp.solve([2 - k1 * T**2 / 2 - k2 * T, 1 - k2 * T + k1 * T**2 / 2], [k1, k2])
    assert hand == {k1: 1 / T**2, k2: 3 / (2 * T)}
    design = derive(_double_integrator(TargetSpec("deadbeat", {"deadbeat": True})))
    assert design.feedback.gain == sp.Matrix([[hand[k1], hand[k2]]])
    # deadbeat: any state reaches zero in two samples (scipy's sampled plant)
    ad, bd, *_ = scipy.signal.cont2discrete((np.array([[0, 1.0], [0, 0]]), np.array([[0], [1.0]]),
                                             np.eye(2), np.zeros((2, 1))), 0.2)
    K = np.array([[1 / 0.2**2, 3 / (2 * 0.2)]])
    x = np.array([0.7, -1.3])
    for _ in range(2):
        x = (ad - bd @ K) @ x
    assert np.max(np.abs(x)) < 1e-12


def test_satellite_attitude_franklin_powell_workman():
    # FPW "Digital Control of Dynamic Systems", satellite attitude (double integrator), T = 0.1 s,
    # z poles 0.8 +- 0.25j: K = [10.25, 3.4875] (from memory)
    design = derive(_double_integrator(TargetSpec("z_poles", {"z_poles": (sp.Rational(4, 5) + sp.I / 4,
                                                                         sp.Rational(4, 5) - sp.I / 4)}), "0.1"))
    assert design.feedback.gain == sp.Matrix([[sp.Rational(1025, 100), sp.Rational(34875, 10000)]])


@pytest.mark.parametrize("target,expected", [
    (TargetSpec("z_poles", {"z_poles": (sp.Rational(1, 2) + sp.I / 2, sp.Rational(1, 2) - sp.I / 2)}),
     [sp.Rational(34, 100), -2]),
    (TargetSpec("deadbeat", {"deadbeat": True}), [-sp.Rational(16, 100), -1]),
])
def test_ogata_discrete_plant(target, expected):
    # Ogata, "Discrete-Time Control Systems": Phi = [[0, 1], [-0.16, -1]], Gamma = [[0], [1]] (from memory)
    Phi = sp.Matrix([[0, 1], [-sp.Rational(16, 100), -1]])
    Gamma = sp.Matrix([[0], [1]])
    _, spec = z_spec(target, 2, sp.Symbol("T", positive=True))
    part = design_gain(Phi, Gamma, spec, part="feedback", symbol="K", states=("x1", "x2"), avoid=set())
    assert part.gain == sp.Matrix([expected])
    assert ackermann(Phi, Gamma, spec.values["polynomial"]) == sp.Matrix([expected])  # second route


@pytest.mark.parametrize("path", SAMPLED, ids=[p.stem for p in SAMPLED])
def test_ackermann_agrees_on_examples(path):
    design = derive(load_model(path))
    for part in (design.feedback, design.integral):
        if part is None or part.gain.rows != 1:
            continue
        if part.part == "integral":
            Pa, Ga = part.step("augmented_plant").value
            full = sp.Matrix.hstack(sp.Matrix(part.gain), sp.Matrix(part.extra["integral_gain"]))
        else:
            Pa, Ga = design.sampled.Phi, design.sampled.Gamma
            full = sp.Matrix(part.gain)
        route2 = ackermann(sp.Matrix(Pa), sp.Matrix(Ga), part.target.polynomial.xreplace({Z: S}))
        point = {p.symbol: sp.Float(p.nominal, 30) for p in design.model.parameters}
        diff = (route2 - full).xreplace(point).evalf(30)
        assert max(abs(complex(d)) for d in diff) < 1e-20 * max(1, max(abs(complex(e)) for e in full.xreplace(point).evalf(30)))


@pytest.mark.parametrize("path", SAMPLED, ids=[p.stem for p in SAMPLED])
def test_examples_check_against_scipy(path):
    report = check_design(derive(load_model(path)), n_points=8)
    assert report.passed
    assert report.counts("sampled_plant")["ok"] == 8
    assert all(report.counts(part)["ok"] > 0 for part in report.points)


def test_oscillator_loses_controllability_at_half_its_period():
    # common practice: sampling an undamped mode of frequency w at T = pi/w hides it
    text = '''
    name = "swing"
    [parameters]
    w = { sign = "positive", range = [1, 3] }
    T = { sign = "positive", range = [0.01, 0.2], role = "design" }
    [plant]
    states = ["a", "b"]
    inputs = ["u"]
    A = [["0", "1"], ["-w^2", "0"]]
    B = [["0"], ["1"]]
    [discrete]
    sample_time = "T"
    [feedback]
    z_poles = ["0.5", "0.6"]
    '''
    design = derive(model_from_text(text))
    w, T = (design.model.symbols[n] for n in ("w", "T"))
    assert sp.Ne(sp.sin(T * w), 0) in design.feedback.valid_when
    assert design.feedback.gain.xreplace({T: sp.pi / w}).has(sp.zoo, sp.nan) or \
        any(sp.simplify(c.lhs.xreplace({T: sp.pi / w})) == 0 for c in design.feedback.valid_when)


def test_gains_approach_the_continuous_design_as_T_goes_to_zero():
    text = (EXAMPLES / "sampled_stage.toml").read_text()
    sampled = derive(model_from_text(text))
    continuous = derive(model_from_text(text.replace('[discrete]\nsample_time = "T"\nmethod = "zoh"\n', "")))
    assert continuous.sampled is None
    point = {"m": 4, "c": 3, "w": 20}
    syms = sampled.model.symbols
    Kc = continuous.feedback.gain.xreplace({syms[n]: v for n, v in point.items()})
    errors = []
    for period in (sp.Rational(1, 10**3), sp.Rational(1, 10**4), sp.Rational(1, 10**5)):
        sub = {syms[n]: v for n, v in point.items()} | {syms["T"]: period}
        Kd = sampled.feedback.gain.xreplace(sub).evalf(40)
        errors.append(max(abs(float(a - b)) / abs(float(b)) for a, b in zip(Kd, Kc.evalf(40))))
    assert errors[0] < 0.05 and errors[1] < errors[0] / 5 and errors[2] < errors[1] / 5  # O(T)


def test_z_targets_need_a_sample_period():
    text = '''
    name = "x"
    [plant]
    states = ["a"]
    inputs = ["u"]
    A = [["1"]]
    B = [["1"]]
    [feedback]
    deadbeat = true
    '''
    with pytest.raises(ModelError, match="sample period"):
        model_from_text(text)
