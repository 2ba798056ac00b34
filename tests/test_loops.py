"""The loop every analysis closes (symgain.analysis.loops), continuous and sampled.

References:
- separation principle (common practice): with u = -K x_hat, the closed loop of plant,
  regulator and estimator has the eigenvalues of A - B K together with those of A - L C;
  in discrete time the same holds for Phi - Gamma K and Phi - L C (prediction form) or
  Phi - L C Phi (current form);
- the sampled plant is built independently here with scipy.signal.cont2discrete (ZOH);
- continuous poles s map to z = exp(s T) (common practice).
"""
from __future__ import annotations

import numpy as np
import pytest
import scipy.signal
import sympy as sp

from symgain.analysis.loops import closed_loop
from symgain.analysis.robust import ClosedLoop
from symgain.design import derive
from symgain.model.toml_file import model_from_text

STAGE = """
name = "stage"
[parameters]
m = { sign = "positive", range = [2, 6], nominal = 4 }
c = { sign = "positive", range = [1, 8], nominal = 3 }
[plant]
states = ["x", "v"]
inputs = ["F"]
outputs = ["x"]
A = [["0", "1"], ["0", "-c/m"]]
B = [["0"], ["1/m"]]
"""
POINT = {"m": 4.0, "c": 3.0}
T = 0.01


def _plant(values):
    A = np.array([[0.0, 1.0], [0.0, -values["c"] / values["m"]]])
    B = np.array([[0.0], [1.0 / values["m"]]])
    return A, B, np.array([[1.0, 0.0]])


def _loop_eigenvalues(design, true, estimate):
    loop = ClosedLoop(design)
    return np.sort_complex(np.linalg.eigvals(loop(true, estimate))), loop


def _design(tail: str):
    return derive(model_from_text(STAGE + tail))


@pytest.mark.parametrize("form", ["prediction", "current"])
def test_sampled_loop_with_estimator_has_the_separated_poles(form):
    design = _design(f'[discrete]\nsample_time = "{T}"\nestimator_form = "{form}"\n'
                     '[feedback]\npoles = ["-8", "-10"]\n[estimator]\npoles = ["-30", "-40"]\n')
    eig, loop = _loop_eigenvalues(design, POINT, POINT)
    assert loop.discrete
    target = np.sort_complex(np.exp(np.array([-8, -10, -30, -40]) * T).astype(complex))
    assert np.allclose(eig, target, atol=1e-9)


def test_sampled_loop_matches_an_independent_construction_under_mismatch():
    """Plant at true values (scipy's ZOH), controller K, L from the design at the estimate."""
    design = _design(f'[discrete]\nsample_time = "{T}"\n'
                     '[feedback]\npoles = ["-8", "-10"]\n[estimator]\npoles = ["-30", "-40"]\n')
    true, estimate = {"m": 5.5, "c": 2.0}, POINT
    subs = {design.model.symbols[k]: v for k, v in estimate.items()}
    K = np.array(design.feedback.gain.xreplace(subs), dtype=float)
    L = np.array(design.estimator.gain.xreplace(subs), dtype=float)
    A, B, C = _plant(true)
    Phi, Gamma, *_ = scipy.signal.cont2discrete((A, B, C, np.zeros((1, 1))), T, method="zoh")
    Ah, Bh, Ch = _plant(estimate)
    Phih, Gammah, *_ = scipy.signal.cont2discrete((Ah, Bh, Ch, np.zeros((1, 1))), T, method="zoh")
    M = np.block([[Phi, -Gamma @ K], [L @ C, Phih - Gammah @ K - L @ Ch]])
    eig, _ = _loop_eigenvalues(design, true, estimate)
    assert np.allclose(eig, np.sort_complex(np.linalg.eigvals(M)), atol=1e-9)


def test_sampled_integral_loop_has_the_target_poles():
    design = _design(f'[discrete]\nsample_time = "{T}"\n[integral]\npoles = ["-6", "-7", "-8"]\n')
    eig, loop = _loop_eigenvalues(design, POINT, POINT)
    assert loop.discrete and "q[k+1] = q[k] + T (y - r)" in closed_loop(design).description
    assert np.allclose(eig, np.sort_complex(np.exp(np.array([-6, -7, -8]) * T).astype(complex)), atol=1e-9)


def test_continuous_loop_with_estimator_has_the_separated_poles():
    design = _design('[feedback]\npoles = ["-8", "-10"]\n[estimator]\npoles = ["-30", "-40"]\n')
    eig, loop = _loop_eigenvalues(design, POINT, POINT)
    assert not loop.discrete
    assert np.allclose(eig, np.sort_complex(np.array([-40, -30, -10, -8], dtype=complex)), atol=1e-8)


def test_a_sampled_loop_is_judged_by_the_unit_circle():
    design = _design(f'[discrete]\nsample_time = "{T}"\n[feedback]\npoles = ["-8", "-10"]\n')
    loop = closed_loop(design)
    assert loop.stable([0.5, -0.9 + 0.1j]) and not loop.stable([1.01, 0.2])
    assert loop.stable([-0.5])
    assert sp.Symbol("T") not in loop.matrix.free_symbols  # a numeric period is put in


@pytest.mark.parametrize("form", ["prediction", "current"])
def test_delayed_loop_with_estimator_has_the_separated_poles(form):
    """compute_delay: the loop holds [x; u[k-1]; x_hat]; at matched values its eigenvalues are the
    target's z poles, the delay pole (z = 0 by default) and the estimator's (separation principle)."""
    design = _design(f'[discrete]\nsample_time = "{T}"\ncompute_delay = true\nestimator_form = "{form}"\n'
                     '[feedback]\npoles = ["-8", "-10"]\n[estimator]\npoles = ["-30", "-40"]\n')
    eig, loop = _loop_eigenvalues(design, POINT, POINT)
    assert loop.discrete and len(eig) == 5
    target = np.sort_complex(np.r_[np.exp(np.array([-8, -10, -30, -40]) * T), 0.0].astype(complex))
    assert np.allclose(eig, target, atol=1e-7)


def test_delayed_loop_matches_an_independent_construction_under_mismatch():
    """[x; v; x_hat] with v[k+1] = u[k] = -K_x x_hat - K_v v, built here from scipy's ZOH."""
    design = _design(f'[discrete]\nsample_time = "{T}"\ncompute_delay = true\n'
                     '[feedback]\npoles = ["-8", "-10"]\n[estimator]\npoles = ["-30", "-40"]\n')
    true, estimate = {"m": 5.5, "c": 2.0}, POINT
    subs = {design.model.symbols[k]: v for k, v in estimate.items()}
    K = np.array(design.feedback.gain.xreplace(subs), dtype=float)
    L = np.array(design.estimator.gain.xreplace(subs), dtype=float)
    Kx, Kv = K[:, :2], K[:, 2:]
    A, B, C = _plant(true)
    Phi, Gamma, *_ = scipy.signal.cont2discrete((A, B, C, np.zeros((1, 1))), T, method="zoh")
    Ah, Bh, Ch = _plant(estimate)
    Phih, Gammah, *_ = scipy.signal.cont2discrete((Ah, Bh, Ch, np.zeros((1, 1))), T, method="zoh")
    M = np.block([[Phi, Gamma, np.zeros((2, 2))],
                  [np.zeros((1, 2)), -Kv, -Kx],
                  [L @ C, Gammah, Phih - L @ Ch]])
    eig, _ = _loop_eigenvalues(design, true, estimate)
    assert np.allclose(eig, np.sort_complex(np.linalg.eigvals(M)), atol=1e-9)


def test_delayed_loop_with_integral_action():
    """[x; v; q] with q[k+1] = q[k] + T C x: eigenvalues at the integral target's z poles and z = 0."""
    design = _design(f'[discrete]\nsample_time = "{T}"\ncompute_delay = true\n'
                     '[integral]\npoles = ["-6", "-8", "-10"]\n')
    eig, loop = _loop_eigenvalues(design, POINT, POINT)
    target = np.sort_complex(np.r_[np.exp(np.array([-6, -8, -10]) * T), 0.0].astype(complex))
    assert loop.discrete and np.allclose(eig, target, atol=1e-7)
