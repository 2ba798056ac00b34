"""The Routh-Hurwitz conditions against the published criterion and against numpy's roots.

Source of the written-out conditions: the Routh-Hurwitz stability criterion as
stated for third- and fourth-order polynomials in K. Ogata, "Modern Control
Engineering" (section on Routh's stability criterion) and R. C. Dorf and
R. H. Bishop, "Modern Control Systems" (chapter on stability), from memory.
"""
import numpy as np
import pytest
import sympy as sp

from symgain.analysis.robust import hurwitz_determinants, routh_hurwitz

a0, a1, a2, a3, a4 = sp.symbols("a0:5")


def test_cubic_matches_published_conditions():
    # a3 s^3 + a2 s^2 + a1 s + a0: all coefficients positive and a2 a1 > a3 a0 (Ogata; Dorf & Bishop)
    conditions = routh_hurwitz([a3, a2, a1, a0])
    assert conditions[:4] == [a3, a2, a1, a0]
    assert conditions[4:] == [sp.expand(a2 * a1 - a3 * a0)]


def test_quartic_matches_published_conditions():
    # a4 s^4 + ... + a0: all positive, a3 a2 > a4 a1, a3 a2 a1 > a4 a1^2 + a3^2 a0 (Ogata; Dorf & Bishop)
    conditions = routh_hurwitz([a4, a3, a2, a1, a0])
    assert conditions[:5] == [a4, a3, a2, a1, a0]
    assert sp.expand(conditions[5] - (a3 * a2 - a4 * a1)) == 0
    assert sp.expand(conditions[6] - (a3 * a2 * a1 - a4 * a1**2 - a3**2 * a0)) == 0


def test_last_hurwitz_determinant_is_constant_term_times_previous():
    # Delta_n = a_0 Delta_(n-1): a property of the Hurwitz matrix (common practice)
    c = sp.symbols("c0:6")
    d = hurwitz_determinants(c)
    assert sp.expand(d[-1] - c[-1] * d[-2]) == 0


def test_classic_gain_range_third_order_loop():
    # Unity feedback around K / (s (s + 1) (s + 2)): s^3 + 3 s^2 + 2 s + K, stable for 0 < K < 6
    # (the standard worked example of Ogata and of Dorf & Bishop, from memory)
    K = sp.Symbol("K", real=True)
    conditions = routh_hurwitz([1, 3, 2, K])
    stable = sp.Interval(-sp.oo, sp.oo)
    for cond in conditions:
        if cond.free_symbols:
            stable = stable.intersect(sp.solve_univariate_inequality(cond > 0, K, relational=False))
        else:
            assert cond > 0
    assert stable == sp.Interval.open(0, 6)


def test_example_with_two_right_half_plane_roots():
    # s^4 + 2 s^3 + 3 s^2 + 4 s + 5: first column of the Routh array 1, 2, 1, -6, 5 has two
    # sign changes, so two roots in the right half-plane (Ogata's example, from memory)
    conditions = routh_hurwitz([1, 2, 3, 4, 5])
    assert any(c <= 0 for c in conditions)
    roots = np.roots([1, 2, 3, 4, 5])
    assert int(np.sum(roots.real > 0)) == 2


def test_marginal_cubic_is_not_stable():
    # s^3 + s^2 + s + 1 = (s + 1)(s^2 + 1): roots on the imaginary axis, Delta_2 = 0
    conditions = routh_hurwitz([1, 1, 1, 1])
    assert conditions[-1] == 0


@pytest.mark.parametrize("degree", [1, 2, 3, 4, 5, 6])
def test_verdict_agrees_with_numpy_roots(degree):
    rng = np.random.default_rng(degree)
    checked = 0
    for _ in range(300):
        roots = []
        while len(roots) < degree:
            if degree - len(roots) >= 2 and rng.random() < 0.5:
                re, im = rng.normal(-0.5, 1.0), rng.uniform(0.1, 3.0)
                roots += [complex(re, im), complex(re, -im)]
            else:
                roots.append(complex(rng.normal(-0.5, 1.0), 0.0))
        if min(abs(r.real) for r in roots) < 1e-2:
            continue  # too close to the boundary for a float verdict
        coeffs = [sp.Rational(float(c)).limit_denominator(10**12) for c in np.real(np.poly(roots))]
        verdict = all(c > 0 for c in routh_hurwitz(coeffs))
        assert verdict == all(r.real < 0 for r in roots), roots
        checked += 1
    assert checked > 200
