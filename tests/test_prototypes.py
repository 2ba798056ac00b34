"""Tests for symgain.design.prototypes against published tables and defining formulas.

Sources are named beside each table; "from memory" marks values written down
from memory of the published table rather than copied from it.
"""
from fractions import Fraction
from math import comb, factorial

import mpmath
import numpy as np
import pytest
import sympy
from scipy import signal

from symgain.errors import ModelError, Where
from symgain.design.prototypes import MAX_ORDER, PROTOTYPES, prototype_polynomial, prototype_source

s = sympy.Symbol("s")
w = sympy.Symbol("w", positive=True)
ORDERS = range(1, MAX_ORDER + 1)
ALL = [(name, n) for name in PROTOTYPES for n in ORDERS]


def coefficients(poly, n):
    """Coefficients of s**n .. s**0 (sympy objects)."""
    return sympy.Poly(poly, s).all_coeffs()


def numeric_coefficients(name, n, bandwidth=1):
    if not isinstance(bandwidth, sympy.Expr):
        bandwidth = sympy.Integer(bandwidth)
    poly = prototype_polynomial(name, n, bandwidth, s)
    return np.array([float(c) for c in coefficients(poly, n)])


def sorted_roots(roots):
    roots = np.asarray(roots, dtype=complex)
    return roots[np.lexsort((roots.imag, roots.real.round(9)))]


# ---------------------------------------------------------------- API, errors


def test_public_names():
    assert PROTOTYPES == ("binomial", "butterworth", "bessel", "itae")
    assert MAX_ORDER == 8


def test_unknown_name_message():
    with pytest.raises(ModelError) as info:
        prototype_polynomial("foo", 3, w, s)
    assert str(info.value) == (
        "unknown prototype 'foo'; choose one of binomial, butterworth, bessel, itae"
    )


def test_unknown_name_carries_where():
    where = Where("plant.toml", "feedback.prototype")
    with pytest.raises(ModelError) as info:
        prototype_source("chebyshev", where=where)
    assert str(info.value).startswith(
        "plant.toml: feedback.prototype: unknown prototype 'chebyshev'"
    )


@pytest.mark.parametrize("order", [0, -1, 9, 12])
def test_order_outside_range(order):
    with pytest.raises(ModelError, match="supported range 1 to 8"):
        prototype_polynomial("bessel", order, w, s, where=Where(None, "feedback"))


@pytest.mark.parametrize("order", [2.0, True, "3"])
def test_order_not_whole_number(order):
    with pytest.raises(ModelError, match="whole number"):
        prototype_polynomial("itae", order, w, s)


def test_bandwidth_as_text_is_refused():
    with pytest.raises(ModelError, match="bandwidth"):
        prototype_polynomial("binomial", 2, "w", s)


def test_bandwidth_plain_numbers():
    assert prototype_polynomial("binomial", 2, 3, s) == s**2 + 6 * s + 9
    half = prototype_polynomial("itae", 2, Fraction(1, 2), s)
    assert half == s**2 + sympy.Rational(7, 10) * s + sympy.Rational(1, 4)


@pytest.mark.parametrize("name", PROTOTYPES)
def test_source_is_one_line(name):
    text = prototype_source(name)
    assert text and "\n" not in text


# ---------------------------------------------------------- all prototypes


@pytest.mark.parametrize("name,n", ALL)
def test_monic_degree_and_constant_term(name, n):
    poly = prototype_polynomial(name, n, w, s)
    p = sympy.Poly(poly, s)
    assert p.degree() == n
    assert p.LC() == 1
    # every normalization used here puts the constant term at w**n
    assert sympy.simplify(p.all_coeffs()[-1] - w**n) == 0


@pytest.mark.parametrize("name,n", ALL)
def test_roots_in_open_left_half_plane(name, n):
    roots = np.roots(numeric_coefficients(name, n))
    assert len(roots) == n
    assert np.all(roots.real < 0)


@pytest.mark.parametrize("name,n", [(name, n) for name, n in ALL if name != "binomial"])
def test_roots_scale_linearly_with_bandwidth(name, n):
    # binomial roots are one n-fold root, which numpy cannot resolve finely;
    # they are checked exactly in test_binomial_roots_exact
    base = sorted_roots(np.roots(numeric_coefficients(name, n, 1)))
    scaled = sorted_roots(np.roots(numeric_coefficients(name, n, sympy.Rational(5, 2))))
    np.testing.assert_allclose(scaled, 2.5 * base, rtol=1e-8, atol=1e-8)


@pytest.mark.parametrize("name,n", ALL)
def test_symbolic_scaling(name, n):
    p_w = prototype_polynomial(name, n, w, s)
    p_1 = prototype_polynomial(name, n, sympy.Integer(1), s)
    assert sympy.expand(p_w - w**n * p_1.subs(s, s / w)) == 0


# ------------------------------------------------------------------ binomial


@pytest.mark.parametrize("n", ORDERS)
def test_binomial_pascal(n):
    # Pascal's triangle (common practice)
    assert coefficients(prototype_polynomial("binomial", n, w, s), n) == [
        comb(n, k) * w**k for k in range(n + 1)
    ]


@pytest.mark.parametrize("n", ORDERS)
def test_binomial_roots_exact(n):
    assert sympy.roots(prototype_polynomial("binomial", n, w, s), s) == {-w: n}


# --------------------------------------------------------------- butterworth

# Normalized Butterworth polynomial coefficients, s**(n-1) .. s**1 (the outer
# ones are 1), as tabulated in filter design handbooks, e.g. A. B. Williams and
# F. J. Taylor, "Electronic Filter Design Handbook" (values from memory).
BUTTERWORTH_TABLE = {
    1: [],
    2: [1.4142],
    3: [2.0000, 2.0000],
    4: [2.6131, 3.4142, 2.6131],
    5: [3.2361, 5.2361, 5.2361, 3.2361],
    6: [3.8637, 7.4641, 9.1416, 7.4641, 3.8637],
    7: [4.4940, 10.0978, 14.5918, 14.5918, 10.0978, 4.4940],
    8: [5.1258, 13.1371, 21.8462, 25.6884, 21.8462, 13.1371, 5.1258],
}


@pytest.mark.parametrize("n", ORDERS)
def test_butterworth_handbook_table(n):
    got = numeric_coefficients("butterworth", n)
    assert got[0] == 1 and got[-1] == 1
    np.testing.assert_allclose(got[1:-1], BUTTERWORTH_TABLE[n], atol=1e-4)


def test_butterworth_known_exact_values():
    # s^2 + sqrt(2) s + 1 and s^3 + 2 s^2 + 2 s + 1 (common practice);
    # order 5: 1/sin(pi/10) = 1 + sqrt(5) (exact trigonometric value)
    assert prototype_polynomial("butterworth", 2, w, s) == s**2 + sympy.sqrt(2) * w * s + w**2
    third = prototype_polynomial("butterworth", 3, w, s)
    assert third == s**3 + 2 * w * s**2 + 2 * w**2 * s + w**3
    c5 = coefficients(prototype_polynomial("butterworth", 5, sympy.Integer(1), s), 5)
    assert sympy.simplify(c5[1] - (1 + sympy.sqrt(5))) == 0


def butterworth_poles(n):
    """Poles from the defining formula exp(i*pi*(2k+n-1)/(2n)), k = 1..n."""
    return [mpmath.expjpi(mpmath.mpf(2 * k + n - 1) / (2 * n)) for k in range(1, n + 1)]


@pytest.mark.parametrize("n", ORDERS)
def test_butterworth_roots_at_defining_angles(n):
    roots = sorted_roots(np.roots(numeric_coefficients("butterworth", n)))
    expected = sorted_roots([complex(p) for p in butterworth_poles(n)])
    np.testing.assert_allclose(np.abs(roots), 1.0, atol=1e-9)
    np.testing.assert_allclose(roots, expected, atol=1e-9)


@pytest.mark.parametrize("n", ORDERS)
def test_butterworth_coefficients_exact_to_40_digits(n):
    # expand prod (s - p_k) from the defining formula at 50 digits
    with mpmath.workdps(50):
        poly = [mpmath.mpc(1)]
        for pole in butterworth_poles(n):
            poly = [a - pole * b for a, b in zip(poly + [0], [0] + poly)]
        exact = coefficients(prototype_polynomial("butterworth", n, sympy.Integer(1), s), n)
        for got, want in zip(exact, poly):
            assert abs(want.imag) < mpmath.mpf("1e-45")
            assert abs(sympy.N(got, 50) - sympy.Float(want.real, 50)) < sympy.Float("1e-40")


@pytest.mark.parametrize("n", ORDERS)
def test_butterworth_matches_scipy_and_is_3db_at_bandwidth(n):
    # scipy.signal.buttap: analog Butterworth prototype with cutoff 1 rad/s
    _, poles, _ = signal.buttap(n)
    roots = np.roots(numeric_coefficients("butterworth", n, 3))
    np.testing.assert_allclose(sorted_roots(roots), sorted_roots(3 * poles), atol=1e-8)
    # |w^n / p(i w)|^2 = 1/2 (definition of the -3 dB bandwidth)
    gain = 3.0**n / abs(np.polyval(numeric_coefficients("butterworth", n, 3), 3j))
    assert gain**2 == pytest.approx(0.5, rel=1e-12)


# -------------------------------------------------------------------- bessel

# Reverse Bessel polynomials theta_n(s), coefficients s**n .. s**0, as tabulated
# in Thomson (Proc. IEE 96, 1949) and filter handbooks (from memory).
BESSEL_THETA_TABLE = {
    1: [1, 1],
    2: [1, 3, 3],
    3: [1, 6, 15, 15],
    4: [1, 10, 45, 105, 105],
    5: [1, 15, 105, 420, 945, 945],
}

# Poles of theta_n (unit group delay at DC), from Bessel pole tables in filter
# handbooks, e.g. Williams and Taylor (from memory), 4 decimals.
BESSEL_UNIT_DELAY_POLES = {
    2: [-1.5000 + 0.8660j, -1.5000 - 0.8660j],
    3: [-2.3222, -1.8389 + 1.7544j, -1.8389 - 1.7544j],
    4: [-2.8962 + 0.8672j, -2.8962 - 0.8672j, -2.1038 + 2.6574j, -2.1038 - 2.6574j],
    5: [-3.6467, -3.3520 + 1.7427j, -3.3520 - 1.7427j, -2.3247 + 3.5710j, -2.3247 - 3.5710j],
}


def theta_by_recurrence(n):
    """theta_n = (2n-1) theta_(n-1) + s^2 theta_(n-2), theta_0 = 1, theta_1 = s + 1
    (the standard three-term recurrence of the reverse Bessel polynomials)."""
    prev, cur = sympy.Integer(1), s + 1
    for m in range(2, n + 1):
        prev, cur = cur, sympy.expand((2 * m - 1) * cur + s**2 * prev)
    return cur


def unit_delay_scale(n):
    """theta_n(0)**(1/n) = ((2n)! / (2^n n!))**(1/n): the bandwidth that gives theta_n."""
    return sympy.Integer(factorial(2 * n) // (2**n * factorial(n))) ** sympy.Rational(1, n)


@pytest.mark.parametrize("n", ORDERS)
def test_bessel_unscaled_is_reverse_bessel_polynomial(n):
    poly = prototype_polynomial("bessel", n, unit_delay_scale(n), s)
    got = coefficients(poly, n)
    want = coefficients(theta_by_recurrence(n), n)
    x = sympy.Dummy("x")
    for g, v in zip(got, want):
        # exact: the coefficient is the rational number v (its minimal polynomial is x - v)
        assert sympy.minimal_polynomial(g, x) == x - v


@pytest.mark.parametrize("n", sorted(BESSEL_THETA_TABLE))
def test_bessel_theta_table(n):
    got = coefficients(prototype_polynomial("bessel", n, unit_delay_scale(n), s), n)
    assert [float(c) for c in got] == pytest.approx(BESSEL_THETA_TABLE[n], rel=1e-12)


@pytest.mark.parametrize("n", sorted(BESSEL_UNIT_DELAY_POLES))
def test_bessel_unit_delay_pole_table(n):
    theta = prototype_polynomial("bessel", n, unit_delay_scale(n), s)
    coeffs = [float(c) for c in coefficients(theta, n)]
    np.testing.assert_allclose(
        sorted_roots(np.roots(coeffs)), sorted_roots(BESSEL_UNIT_DELAY_POLES[n]), atol=1e-4
    )


@pytest.mark.parametrize("n", ORDERS)
def test_bessel_matches_scipy_phase_normalization(n):
    # scipy.signal.besselap(norm="phase"): poles scaled so the phase passes
    # its midpoint at 1 rad/s, i.e. the pole magnitudes have geometric mean 1
    _, poles, gain = signal.besselap(n, norm="phase")
    roots = np.roots(numeric_coefficients("bessel", n, 2))
    np.testing.assert_allclose(sorted_roots(roots), sorted_roots(2 * poles), atol=1e-8)
    assert gain == pytest.approx(1.0)


@pytest.mark.parametrize("n", ORDERS)
def test_bessel_geometric_mean_pole_magnitude(n):
    # the chosen normalization: the pole magnitudes have geometric mean w
    roots = np.roots(numeric_coefficients("bessel", n, 3))
    assert np.exp(np.mean(np.log(np.abs(roots)))) == pytest.approx(3.0, rel=1e-10)


def test_bessel_order_two_exact():
    # theta_2 = s^2 + 3 s + 3 rescaled to constant term 1: s^2 + sqrt(3) s + 1
    assert prototype_polynomial("bessel", 2, w, s) == s**2 + sympy.sqrt(3) * w * s + w**2


# ---------------------------------------------------------------------- itae

# ITAE-optimal step-response forms, s**n .. s**0 at omega_n = 1.
# Orders 1-6: Dorf and Bishop, "Modern Control Systems", table of optimum
# coefficients of T(s) based on the ITAE criterion for a step input (from memory).
# Orders 7-8: Graham and Lathrop, Trans. AIEE 72 (1953) (from memory).
ITAE_TABLE = {
    1: ["1", "1"],
    2: ["1", "1.4", "1"],
    3: ["1", "1.75", "2.15", "1"],
    4: ["1", "2.1", "3.4", "2.7", "1"],
    5: ["1", "2.8", "5.0", "5.5", "3.4", "1"],
    6: ["1", "3.25", "6.60", "8.60", "7.45", "3.95", "1"],
    7: ["1", "4.475", "10.42", "15.08", "15.54", "10.64", "4.58", "1"],
    8: ["1", "5.20", "12.80", "21.60", "25.75", "22.20", "13.30", "5.15", "1"],
}


@pytest.mark.parametrize("n", ORDERS)
def test_itae_published_table_exact(n):
    want = [sympy.Rational(f.numerator, f.denominator) * w**k
            for k, f in enumerate(map(Fraction, ITAE_TABLE[n]))]
    assert coefficients(prototype_polynomial("itae", n, w, s), n) == want


def itae_of(den):
    """Integral of t*|1 - y(t)| for the step response of den[-1]/den(s)."""
    t = np.linspace(0.0, 50.0, 5001)
    _, y = signal.step(signal.lti([den[-1]], den), T=t)
    return np.trapezoid(t * np.abs(1.0 - y), t)


@pytest.mark.parametrize("n", range(3, MAX_ORDER + 1))
def test_itae_beats_binomial_and_butterworth(n):
    # the criterion the forms were chosen by (Graham and Lathrop's definition);
    # at order 2 Butterworth (zeta 0.707) and ITAE (zeta 0.7) are practically equal
    itae = itae_of(numeric_coefficients("itae", n))
    assert itae < itae_of(numeric_coefficients("binomial", n))
    assert itae < itae_of(numeric_coefficients("butterworth", n))


@pytest.mark.parametrize("n", range(2, MAX_ORDER + 1))
def test_itae_rows_are_near_optimal(n):
    # moving any one middle coefficient by 5 % does not lower the ITAE by
    # more than 3 %; the published rows are analog-computer approximations of
    # the optimum, so an exact local minimum is not expected
    den = numeric_coefficients("itae", n)
    best = itae_of(den)
    for i in range(1, n):
        for factor in (0.95, 1.05):
            moved = den.copy()
            moved[i] *= factor
            if np.all(np.roots(moved).real < 0):
                assert itae_of(moved) > 0.97 * best
