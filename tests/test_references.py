"""Pole placement against published worked examples and facts of the trade.

Each check names its source. "From memory" marks values written down from
memory of the book rather than copied from it; "common practice" marks a
fact any control text states. Each reference is checked through both
coefficient matching (place_single_input) and Ackermann's formula, through
the full Model -> derive pipeline, and by the closed-loop determinant
computed independently with sympy's Matrix.det.
"""
import numpy as np
import pytest
import sympy as sp
from scipy import signal

from symgain.analysis.check import check_design
from symgain.design import derive
from symgain.model import Model, Parameter, TargetSpec
from symgain.design.placement import ackermann, place_single_input

s = sp.Symbol("s")


def target_from_poles(poles):
    return sp.expand(sp.Mul(*[s - p for p in poles]))


def closed_loop_det(A, B, K):
    """det(sI - A + B K) by sympy's own determinant, an independent route."""
    n = A.rows
    return sp.expand((s * sp.eye(n) - A + B * K).det(method="berkowitz"))


# --- Ogata, "Modern Control Engineering", 5th ed., Example 10-1 (12-1 in the 4th ed.),
#     from memory: A, B below, desired poles -2 +- j4 and -10, published K = [199 55 8].
#     The book solves it three ways (transformation matrix, direct substitution, Ackermann).
OGATA_A = sp.Matrix([[0, 1, 0], [0, 0, 1], [-1, -5, -6]])
OGATA_B = sp.Matrix([0, 0, 1])
OGATA_POLES = (-2 + 4 * sp.I, -2 - 4 * sp.I, -10)
OGATA_K = sp.Matrix([[199, 55, 8]])


def test_ogata_coefficient_matching_gives_published_gain():
    # source: Ogata, Modern Control Engineering, Example 10-1 (from memory)
    K = place_single_input(OGATA_A, OGATA_B, target_from_poles(OGATA_POLES)).gain
    assert K == OGATA_K


def test_ogata_ackermann_gives_published_gain():
    # source: Ogata, Modern Control Engineering, Example 10-1, method 3 (Ackermann; from memory)
    assert ackermann(OGATA_A, OGATA_B, target_from_poles(OGATA_POLES)) == OGATA_K


def test_ogata_through_the_model_pipeline_and_scipy():
    # source: Ogata, Example 10-1 (from memory); second opinion: scipy.signal.place_poles
    model = Model(name="ogata", parameters=(), states=("x1", "x2", "x3"), inputs=("u",),
                  A=OGATA_A, B=OGATA_B, feedback=TargetSpec("poles", {"poles": OGATA_POLES}))
    design = derive(model)
    assert design.feedback.gain == OGATA_K
    assert design.feedback.valid_when == ()
    poles = np.array([complex(p) for p in OGATA_POLES])
    ref = signal.place_poles(np.array(OGATA_A, dtype=float), np.array(OGATA_B, dtype=float), poles)
    np.testing.assert_allclose(ref.gain_matrix, np.array(OGATA_K, dtype=float), rtol=1e-9)
    assert check_design(design, n_points=1).passed


def test_ogata_closed_loop_polynomial_by_determinant():
    # source: Ogata, Example 10-1 (from memory): |sI - A + BK| = (s + 2 - j4)(s + 2 + j4)(s + 10)
    #   = s^3 + 14 s^2 + 60 s + 200
    assert closed_loop_det(OGATA_A, OGATA_B, OGATA_K) == s**3 + 14 * s**2 + 60 * s + 200


# --- Double integrator x'' = u with both poles at -1: K = [1, 2] (common practice:
#     (s + 1)^2 = s^2 + 2 s + 1 matched against s^2 + k2 s + k1).
def test_double_integrator_unit_poles():
    A, B = sp.Matrix([[0, 1], [0, 0]]), sp.Matrix([0, 1])
    target = target_from_poles((-1, -1))
    assert place_single_input(A, B, target).gain == sp.Matrix([[1, 2]])
    assert ackermann(A, B, target) == sp.Matrix([[1, 2]])


def test_double_integrator_with_mass_symbolic():
    # common practice: m x'' = u, poles -w, -w -> K = [m w^2, 2 m w]
    m, w = sp.symbols("m w", positive=True)
    A, B = sp.Matrix([[0, 1], [0, 0]]), sp.Matrix([0, 1 / m])
    target = target_from_poles((-w, -w))
    K = place_single_input(A, B, target).gain
    assert sp.simplify(K - sp.Matrix([[m * w**2, 2 * m * w]])) == sp.zeros(1, 2)
    assert sp.simplify(ackermann(A, B, target) - K) == sp.zeros(1, 2)
    assert sp.expand(closed_loop_det(A, B, K) - target) == 0


def test_double_integrator_with_mass_via_derive():
    # common practice, as above, through the Model -> derive pipeline
    mp = Parameter.declare("m", sign="positive", range=(1, 5))
    wp = Parameter.declare("w", sign="positive", range=(1, 5), role="design")
    m, w = mp.symbol, wp.symbol
    model = Model(name="di", parameters=(mp, wp), states=("x", "v"), inputs=("u",),
                  A=sp.Matrix([[0, 1], [0, 0]]), B=sp.Matrix([0, 1 / m]),
                  feedback=TargetSpec("poles", {"poles": (-w, -w)}))
    gain = derive(model).feedback.gain
    assert sp.simplify(gain - sp.Matrix([[m * w**2, 2 * m * w]])) == sp.zeros(1, 2)


# --- Franklin, Powell & Emami-Naeini, "Feedback Control of Dynamic Systems", the
#     "control law for a pendulum" example of the state-space design chapter (from memory;
#     the example number varies with the edition): x1' = x2, x2' = -w0^2 x1 + u, both poles
#     at -2 w0, published K = [3 w0^2, 4 w0].
def test_franklin_powell_oscillator():
    w0 = sp.Symbol("omega_0", positive=True)
    A, B = sp.Matrix([[0, 1], [-w0**2, 0]]), sp.Matrix([0, 1])
    target = target_from_poles((-2 * w0, -2 * w0))
    K = place_single_input(A, B, target).gain
    assert sp.simplify(K - sp.Matrix([[3 * w0**2, 4 * w0]])) == sp.zeros(1, 2)
    assert sp.simplify(ackermann(A, B, target) - K) == sp.zeros(1, 2)
    assert sp.expand(closed_loop_det(A, B, K) - target) == 0


@pytest.mark.parametrize("w0", [0.5, 1.0, 7.0])
def test_franklin_powell_oscillator_numeric(w0):
    # same example (from memory), numeric second opinion: scipy.signal.place_poles needs distinct
    # poles, so here the eigenvalues of A - B K are compared with the double root -2 w0 instead.
    w = sp.Symbol("omega_0", positive=True)
    A, B = sp.Matrix([[0, 1], [-w**2, 0]]), sp.Matrix([0, 1])
    K = place_single_input(A, B, target_from_poles((-2 * w, -2 * w))).gain
    An = np.array(A.subs(w, w0), dtype=float)
    Kn = np.array(K.subs(w, w0), dtype=float)
    eig = np.linalg.eigvals(An - np.array([[0.0], [1.0]]) @ Kn)
    # a double root is only determined to about sqrt(machine epsilon)
    np.testing.assert_allclose(eig, [-2 * w0, -2 * w0], atol=1e-6 * w0)
