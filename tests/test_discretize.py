"""The sampled plant (Phi, Gamma) against outside references: hand formulas and scipy.

Sources: the double integrator and the harmonic oscillator under a zero-order hold are
common practice (any sampled-data text); numeric references are
scipy.signal.cont2discrete (methods "zoh", "euler", "bilinear").
"""
import numpy as np
import pytest
import scipy.signal
import sympy as sp

from symgain.design.discretize import exp_times, sampled_plant
from symgain.errors import DesignError

T = sp.Symbol("T", positive=True)
m, c, w, k = sp.symbols("m c w k", positive=True)


def _numeric(plant, values):
    sub = {sp.Symbol(n, positive=True): v for n, v in values.items()}
    Phi = np.array(plant.Phi.xreplace(sub).evalf(), dtype=complex)
    Gamma = np.array(plant.Gamma.xreplace(sub).evalf(), dtype=complex)
    return Phi, Gamma


def test_double_integrator_zoh_common_practice():
    # common practice: Phi = [[1, T], [0, 1]], Gamma = [[T^2/2], [T]]
    plant = sampled_plant(sp.Matrix([[0, 1], [0, 0]]), sp.Matrix([[0], [1]]), T)
    assert plant.Phi == sp.Matrix([[1, T], [0, 1]])
    assert plant.Gamma == sp.Matrix([[T**2 / 2], [T]])


def test_oscillator_zoh_common_practice():
    # common practice: Phi = [[cos wT, sin(wT)/w], [-w sin wT, cos wT]], Gamma = [(1 - cos wT)/w^2, sin(wT)/w]
    plant = sampled_plant(sp.Matrix([[0, 1], [-w**2, 0]]), sp.Matrix([[0], [1]]), T)
    expected_phi = sp.Matrix([[sp.cos(w * T), sp.sin(w * T) / w], [-w * sp.sin(w * T), sp.cos(w * T)]])
    expected_gamma = sp.Matrix([[(1 - sp.cos(w * T)) / w**2], [sp.sin(w * T) / w]])
    assert sp.simplify(plant.Phi - expected_phi) == sp.zeros(2, 2)
    assert sp.simplify(plant.Gamma - expected_gamma) == sp.zeros(2, 1)


CASES = [
    ("stage", sp.Matrix([[0, 1], [0, -c / m]]), sp.Matrix([[0], [1 / m]])),
    ("spring", sp.Matrix([[0, 1], [-k / m, -c / m]]), sp.Matrix([[0], [1 / m]])),
    ("chain", sp.Matrix([[-c, 1, 0], [0, -c, 1], [0, 0, -k]]), sp.Matrix([[0], [0], [1]])),
    ("two_inputs", sp.Matrix([[0, 1], [0, -c]]), sp.Matrix([[1, 0], [0, 1 / m]])),
]


@pytest.mark.parametrize("name,A,B", CASES, ids=[c[0] for c in CASES])
@pytest.mark.parametrize("method,scipy_method", [("zoh", "zoh"), ("euler", "euler"), ("tustin", "bilinear")])
def test_against_scipy_cont2discrete(name, A, B, method, scipy_method):
    plant = sampled_plant(A, B, T, method)
    rng = np.random.default_rng(3)
    for _ in range(4):
        values = {"T": rng.uniform(0.01, 0.5), "m": rng.uniform(1, 3), "c": rng.uniform(0.5, 2),
                  "k": rng.uniform(2, 9), "w": 1.0}
        sub = {sp.Symbol(n, positive=True): v for n, v in values.items()}
        An = np.array(A.xreplace(sub), dtype=float)
        Bn = np.array(B.xreplace(sub), dtype=float)
        n = A.rows
        ad, bd, *_ = scipy.signal.cont2discrete((An, Bn, np.eye(n), np.zeros((n, B.cols))), values["T"],
                                                method=scipy_method)
        Phi, Gamma = _numeric(plant, values)
        assert np.max(np.abs(Phi - ad)) < 1e-12 and np.max(np.abs(Gamma - bd)) < 1e-12


def test_repeated_eigenvalue_uses_the_derivative():
    # exp of a Jordan block: [[e^-t, t e^-t], [0, e^-t]] (common practice)
    t = sp.Symbol("t", positive=True)
    assert exp_times(sp.Matrix([[-2, 1], [0, -2]]), t, [-2, -2]) == sp.Matrix(
        [[sp.exp(-2 * t), t * sp.exp(-2 * t)], [0, sp.exp(-2 * t)]])


def test_distinct_eigenvalues_that_can_meet_become_a_condition():
    plant = sampled_plant(sp.Matrix([[0, 1], [0, -c / m]]), sp.Matrix([[0], [1 / m]]), T)
    assert plant.valid_when == ()  # c positive: -c/m never meets 0
    c0 = sp.Symbol("c0", nonnegative=True)
    plant = sampled_plant(sp.Matrix([[0, 1], [0, -c0 / m]]), sp.Matrix([[0], [1 / m]]), T)
    assert plant.valid_when == (sp.Ne(c0, 0),)


def test_no_closed_form_is_refused_and_series_is_offered():
    A = sp.Matrix([[0, 1, 0], [0, 0, 1], [-k, -c, -m]])  # an irreducible cubic
    with pytest.raises(DesignError, match="series"):
        sampled_plant(A, sp.Matrix([[0], [0], [1]]), T)
    plant = sampled_plant(A, sp.Matrix([[0], [0], [1]]), T, "series")
    values = {"T": 0.05, "m": 1.5, "c": 2.0, "k": 3.0}
    An = np.array(A.xreplace({sp.Symbol(n, positive=True): v for n, v in values.items()}), dtype=float)
    ad, bd, *_ = scipy.signal.cont2discrete((An, np.array([[0], [0], [1.0]]), np.eye(3), np.zeros((3, 1))), 0.05)
    Phi, Gamma = _numeric(plant, values)
    assert 0 < np.max(np.abs(Phi - ad)) < 1e-9  # truncated, but close at a short period
