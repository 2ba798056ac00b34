"""Linearized plants checked against published state-space matrices.

Each check builds the plant through symgain's own input routes (equations of motion,
LaTeX, the example files) and compares with the matrices as printed in the named source.
The matrices below are quoted from memory of those sources (noted beside each).
"""
from pathlib import Path

import sympy as sp

from symgain.model.equations import linearize_plant
from symgain.model.toml_file import load_model

EXAMPLES = Path(__file__).resolve().parent.parent / "examples"


def _same(a, b) -> bool:
    return (sp.Matrix(a) - sp.Matrix(b)).applyfunc(sp.simplify) == sp.zeros(*sp.Matrix(a).shape)


def test_cart_pendulum_against_ogata():
    """Inverted pendulum on a cart (point mass m on a massless rod of length l, cart mass M),
    linearized about upright. K. Ogata, Modern Control Engineering, inverted-pendulum example
    of the pole-placement chapter (from memory): with x1 = theta, x2 = theta', x3 = x, x4 = x',
        A = [[0, 1, 0, 0], [(M+m) g/(M l), 0, 0, 0], [0, 0, 0, 1], [-m g/M, 0, 0, 0]],
        B = [0, -1/(M l), 0, 1/M]^T.
    symgain linearizes the balancing-robot example's nonlinear equations (force tau/r)."""
    model = load_model(EXAMPLES / "balancing_robot.toml")
    M, m, l, g, r = (model.symbols[n] for n in ("M", "m", "l", "g", "r"))
    ogata_A = sp.Matrix([[0, 1, 0, 0], [(M + m) * g / (M * l), 0, 0, 0], [0, 0, 0, 1], [-m * g / M, 0, 0, 0]])
    ogata_B = sp.Matrix([0, -1 / (M * l), 0, 1 / M])
    order = [model.states.index(n) for n in ("phi", "phi_rate", "x", "v")]  # Ogata's state order
    P = sp.Matrix([[1 if j == i else 0 for j in range(4)] for i in order])
    assert _same(P * model.A * P.T, ogata_A)
    assert _same(P * model.B * r, ogata_B)  # our input is the torque tau = r F


def test_quarter_car_against_published_form():
    """Quarter-car suspension with an actuator force F between the masses, road at rest.
    Published form (for example R. Rajamani, Vehicle Dynamics and Control, active suspension
    chapter; from memory), states z_s, z_s', z_u, z_u':
        A = [[0, 1, 0, 0], [-ks/ms, -bs/ms, ks/ms, bs/ms], [0, 0, 0, 1],
             [ks/mu, bs/mu, -(ks+kt)/mu, -bs/mu]],  B = [0, 1/ms, 0, -1/mu]^T.
    Checked twice: symgain's linearization of Newton's law for the two masses, and the
    example file's matrices in deviation coordinates (travel, v_s, tyre, v_u)."""
    model = load_model(EXAMPLES / "quarter_car_suspension.toml")
    ms, mu, ks, bs, kt = (model.symbols[n] for n in ("m_s", "m_u", "k_s", "b_s", "k_t"))
    A_pub = sp.Matrix([[0, 1, 0, 0], [-ks / ms, -bs / ms, ks / ms, bs / ms], [0, 0, 0, 1],
                       [ks / mu, bs / mu, -(ks + kt) / mu, -bs / mu]])
    B_pub = sp.Matrix([0, 1 / ms, 0, -1 / mu])
    plant = {"equations": {"z_s": "v_s", "v_s": "(-k_s*(z_s - z_u) - b_s*(v_s - v_u) + F)/m_s",
                           "z_u": "v_u", "v_u": "(k_s*(z_s - z_u) + b_s*(v_s - v_u) - k_t*z_u - F)/m_u"},
             "equilibrium": {"z_s": "0", "v_s": "0", "z_u": "0", "v_u": "0", "F": "0"}}
    lin = linearize_plant(plant, model.symbols, ("z_s", "v_s", "z_u", "v_u"), ("F",))
    assert _same(lin.A, A_pub) and _same(lin.B, B_pub)
    # travel = z_s - z_u, v_s, tyre = z_u (road at rest), v_u
    T = sp.Matrix([[1, 0, -1, 0], [0, 1, 0, 0], [0, 0, 1, 0], [0, 0, 0, 1]])
    assert _same(model.A, T * A_pub * T.inv())
    assert _same(model.B, T * B_pub)


def test_dc_motor_against_franklin_powell_emami_naeini():
    """DC motor with winding inductance, position output: J theta'' + b theta' = K i,
    L di/dt + R i = v - K theta'. G. F. Franklin, J. D. Powell, A. Emami-Naeini, Feedback
    Control of Dynamic Systems, DC motor model (from memory); states (theta, theta', i):
        A = [[0, 1, 0], [0, -b/J, K/J], [0, -K/L, -R/L]], B = [0, 0, 1/L]^T.
    The example file gives these matrices in LaTeX."""
    model = load_model(EXAMPLES / "dc_motor_position.toml")
    J, b, K, R, L = (model.symbols[n] for n in ("J", "b", "K_t", "R", "L_a"))
    assert _same(model.A, [[0, 1, 0], [0, -b / J, K / J], [0, -K / L, -R / L]])
    assert _same(model.B, [[0], [0], [1 / L]])


def test_flexible_joint_against_spong():
    """Single flexible joint without gravity: J_l q_l'' + k (q_l - q_m) = 0,
    J_m q_m'' + b q_m' - k (q_l - q_m) = u. M. W. Spong, 'Modeling and control of elastic
    joint robots' (1987), linear single-link case (from memory). The example gives A in LaTeX;
    here the same plant comes from the equations of motion."""
    model = load_model(EXAMPLES / "flexible_joint_arm.toml")
    plant = {"equations": {"q_l": "q_l_rate", "q_l_rate": "-k*(q_l - q_m)/J_l",
                           "q_m": "q_m_rate", "q_m_rate": "(torque - b*q_m_rate + k*(q_l - q_m))/J_m"},
             "equilibrium": {"q_l": "0", "q_l_rate": "0", "q_m": "0", "q_m_rate": "0", "torque": "0"}}
    lin = linearize_plant(plant, model.symbols, model.states, model.inputs)
    assert _same(model.A, lin.A) and _same(model.B, lin.B)
