"""Design targets (symgain.design.targets) against the standard second-order formulas.

Sources: the overshoot/damping relation Mp = exp(-pi zeta / sqrt(1 - zeta^2)) and the 2 %
settling time Ts = 4 / (zeta omega_n) are common practice (every control text, e.g. Ogata,
Modern Control Engineering, transient-response chapter; Franklin, Powell & Emami-Naeini);
the tabulated value zeta = 0.5912 for 10 % overshoot is common practice (textbook tables).
The five-times rule for the extra poles is the rule of thumb stated in the model-file contract.
"""
import math

import numpy as np
import pytest
import sympy as sp

from symgain.errors import ModelError, Where
from symgain.model import S, TargetSpec
from symgain.design.targets import damping_from_overshoot, poles_polynomial, resolve_target

w = sp.Symbol("w", positive=True)


def roots_of(poly, subs=None):
    coeffs = [complex(c) for c in sp.Poly(poly.subs(subs or {}), S).all_coeffs()]
    return np.sort_complex(np.roots(coeffs))


# --- conjugate pairs -----------------------------------------------------------------------------
def test_conjugate_pair_gives_real_quadratic():
    # (s + 2 - 3j)(s + 2 + 3j) = s^2 + 4 s + 13 (arithmetic)
    assert poles_polynomial([-2 + 3 * sp.I, -2 - 3 * sp.I]) == S**2 + 4 * S + 13


def test_symbolic_conjugate_pair_in_any_order():
    a, b = sp.symbols("a b", positive=True)
    poly = poles_polynomial([-a - sp.I * b, -3, -a + sp.I * b])
    assert sp.expand(poly - (S + 3) * (S**2 + 2 * a * S + a**2 + b**2)) == 0


def test_unpaired_complex_pole_is_refused_with_place():
    with pytest.raises(ModelError, match="conjugate") as err:
        resolve_target(TargetSpec("poles", {"poles": (-1 + sp.I, -1 + sp.I)},
                                  Where("m.toml", "feedback.poles")), 2)
    assert str(err.value).startswith("m.toml: feedback.poles")


def test_wrong_number_of_poles():
    with pytest.raises(ModelError, match="3 poles given but the closed loop has 2"):
        resolve_target(TargetSpec("poles", {"poles": (-1, -2, -3)}), 2)


def test_pole_target_roots_are_the_poles():
    poles = (-1, -2 + sp.I, -2 - sp.I, -7)
    t = resolve_target(TargetSpec("poles", {"poles": poles}), 4)
    assert sp.Poly(t.polynomial, S).LC() == 1
    np.testing.assert_allclose(roots_of(t.polynomial), np.sort_complex([complex(p) for p in poles]),
                               atol=1e-12)


# --- damping and natural frequency ---------------------------------------------------------------
def test_damping_pair_only():
    zeta = sp.Rational(7, 10)
    t = resolve_target(TargetSpec("damping", {"damping": zeta, "natural_frequency": w}), 2)
    # common practice: s^2 + 2 zeta omega_n s + omega_n^2
    assert sp.expand(t.polynomial - (S**2 + 2 * zeta * w * S + w**2)) == 0
    assert t.notes == ()


@pytest.mark.parametrize("order", [3, 4, 5])
def test_damping_extra_poles_rule_of_thumb(order):
    zeta, wn = sp.Rational(1, 2), sp.Integer(4)
    t = resolve_target(TargetSpec("damping", {"damping": zeta, "natural_frequency": wn}), order)
    roots = sp.roots(sp.Poly(t.polynomial, S))  # exact roots with multiplicities
    # dominant pair: -zeta wn +- j wn sqrt(1 - zeta^2) = -2 +- 2 sqrt(3) j (common practice);
    # extra poles at five times the dominant real part (rule of thumb of the contract): -10
    expected = {-2 + 2 * sp.sqrt(3) * sp.I: 1, -2 - 2 * sp.sqrt(3) * sp.I: 1, sp.Integer(-10): order - 2}
    assert roots == expected
    assert any("rule of thumb" in note for note in t.notes)


def test_damping_with_given_extra_poles():
    t = resolve_target(TargetSpec("damping", {"damping": sp.Rational(1, 2), "natural_frequency": w,
                                              "extra_poles": (-3 * w, -8 * w)}), 4)
    expected = (S**2 + w * S + w**2) * (S + 3 * w) * (S + 8 * w)
    assert sp.expand(t.polynomial - expected) == 0
    assert not any("rule of thumb" in note for note in t.notes)


def test_damping_wrong_number_of_extra_poles():
    with pytest.raises(ModelError, match="extra_poles"):
        resolve_target(TargetSpec("damping", {"damping": sp.Rational(1, 2), "natural_frequency": w,
                                              "extra_poles": (-3 * w,)}), 4)


# --- settling time and overshoot ------------------------------------------------------------------
def test_ten_percent_overshoot_damping_table_value():
    # common practice, textbook tables: 10 % overshoot <-> zeta = 0.5912 (0.591)
    assert float(damping_from_overshoot(sp.Rational(1, 10))) == pytest.approx(0.5912, abs=5e-5)


@pytest.mark.parametrize("overshoot", [0.01, 0.05, 0.1, 0.2, 0.3, 0.5])
def test_overshoot_formula_inverts_the_standard_relation(overshoot):
    # common practice: Mp = exp(-pi zeta / sqrt(1 - zeta^2)) for an underdamped second-order pair
    zeta = float(damping_from_overshoot(sp.nsimplify(overshoot)))
    assert 0 < zeta < 1
    assert math.exp(-math.pi * zeta / math.sqrt(1 - zeta**2)) == pytest.approx(overshoot, rel=1e-12)


def test_settling_target_natural_frequency_and_roots():
    # 2 % settling: omega_n = 4 / (zeta Ts) (common practice); Ts = 2 s, Mp = 10 % -> the pair
    # -zeta omega_n +- j omega_n sqrt(1 - zeta^2) with real part -4/Ts = -2
    t = resolve_target(TargetSpec("settling", {"settling_time": sp.Integer(2),
                                               "overshoot": sp.Rational(1, 10)}), 2)
    zeta = 0.5912
    wn = 4 / (zeta * 2)
    roots = roots_of(t.polynomial)
    assert roots.real == pytest.approx([-2.0, -2.0], rel=1e-9)
    assert abs(roots[0]) == pytest.approx(wn, rel=2e-4)  # |pole| = omega_n
    assert any("settling" in note for note in t.notes)


def test_settling_target_with_rule_of_thumb_extra_pole():
    t = resolve_target(TargetSpec("settling", {"settling_time": sp.Integer(4),
                                               "overshoot": sp.Rational(1, 20)}), 3)
    roots = roots_of(t.polynomial)
    # dominant real part -4/Ts = -1, so the rule-of-thumb pole is at -5
    assert roots.real == pytest.approx([-5.0, -1.0, -1.0], rel=1e-9)
    # 5 % overshoot: zeta = 0.6901 (common practice, textbook tables)
    pair = roots[1:]
    zeta = -pair[0].real / abs(pair[0])
    assert zeta == pytest.approx(0.6901, abs=5e-5)


# --- polynomial targets ---------------------------------------------------------------------------
def test_polynomial_target_kept_as_given():
    poly = S**3 + 2 * w * S**2 + 2 * w**2 * S + w**3
    t = resolve_target(TargetSpec("polynomial", {"polynomial": poly}), 3)
    assert sp.expand(t.polynomial - poly) == 0
    assert t.poles is None


def test_polynomial_target_must_be_monic():
    with pytest.raises(ModelError, match="monic"):
        resolve_target(TargetSpec("polynomial", {"polynomial": 2 * S**2 + S + 1}), 2)


def test_polynomial_target_symbolic_leading_coefficient_is_not_monic():
    with pytest.raises(ModelError, match="monic"):
        resolve_target(TargetSpec("polynomial", {"polynomial": w * S**2 + S + 1}), 2)


@pytest.mark.parametrize("order", [2, 4])
def test_polynomial_target_wrong_degree(order):
    with pytest.raises(ModelError, match="degree 3"):
        resolve_target(TargetSpec("polynomial", {"polynomial": S**3 + S + 1}), order)


def test_polynomial_without_s_is_refused():
    with pytest.raises(ModelError, match="does not contain s"):
        resolve_target(TargetSpec("polynomial", {"polynomial": w + 1}), 2)
