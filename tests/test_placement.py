"""Single-input placement: coefficient matching against Ackermann's formula and the determinant.

Three independent routes must agree symbolically:
  1. place_single_input (coefficient matching over the fraction field),
  2. ackermann (Ackermann's formula K = e_n^T Ctrb^-1 alpha(A); the formula itself is common
     practice, e.g. Ogata, Modern Control Engineering, state-space design chapter),
  3. det(sI - A + B K) computed by sympy's Matrix.det, which must equal the target.
"""
import pytest
import sympy as sp

from symgain.design.placement import ackermann, controllability_matrix, gain_symbols, place_single_input
from symgain.design.algebra import Field

s = sp.Symbol("s")
m, k, c, w, J, b, T, g, l = sp.symbols("m k c w J b T g l", positive=True)
a, r = sp.symbols("a r", real=True)


def closed_loop_det(A, B, K):
    n = A.rows
    return (s * sp.eye(n) - A + B * K).det(method="berkowitz")


def assert_same(expr1, expr2):
    assert sp.cancel(sp.together(expr1 - expr2)) == 0, (expr1, expr2)


# small symbolic plants (each a textbook shape; parameters symbolic) and symbolic targets
CASES = {
    "mass_with_friction": (sp.Matrix([[0, 1], [0, -c / m]]), sp.Matrix([0, 1 / m]), [-w, -2 * w]),
    "spring_mass_damper": (sp.Matrix([[0, 1], [-k / m, -c / m]]), sp.Matrix([0, 1 / m]),
                           [-w + sp.I * w, -w - sp.I * w]),
    "motor_with_lag": (sp.Matrix([[0, 1, 0], [0, -b / J, 1 / J], [0, 0, -1 / T]]),
                       sp.Matrix([0, 0, 1 / T]), [-w, -2 * w, -3 * w]),
    "pendulum_upright": (sp.Matrix([[0, 1], [g / l, 0]]), sp.Matrix([0, 1 / (m * l**2)]), [-w, -w]),
    "real_parameter_input": (sp.Matrix([[0, 1], [0, a]]), sp.Matrix([0, r]), [-1, -2]),
    "cart_pendulum": (sp.Matrix([[0, 1, 0, 0], [0, 0, -m * g / J, 0], [0, 0, 0, 1],
                                 [0, 0, g / l, 0]]),
                      sp.Matrix([0, 1 / J, 0, -1 / (J * l)]), [-w, -w, -2 * w, -2 * w]),
}


def target_of(poles):
    return sp.expand(sp.Mul(*[s - p for p in poles]))


@pytest.mark.parametrize("name", sorted(CASES))
def test_coefficient_matching_equals_ackermann(name):
    A, B, poles = CASES[name]
    target = target_of(poles)
    K1 = place_single_input(A, B, target).gain
    K2 = ackermann(A, B, target)
    for e1, e2 in zip(K1, K2):
        assert_same(e1, e2)


@pytest.mark.parametrize("name", sorted(CASES))
def test_closed_loop_determinant_equals_target(name):
    A, B, poles = CASES[name]
    target = target_of(poles)
    K = place_single_input(A, B, target).gain
    assert_same(closed_loop_det(A, B, K), target)


@pytest.mark.parametrize("name", sorted(CASES))
def test_trail_is_consistent(name):
    """The stored closed-loop polynomial (gains as unknowns) is det(sI - A + B k) by sympy,
    and the stored coefficient equations hold for the solved gain."""
    A, B, poles = CASES[name]
    result = place_single_input(A, B, target_of(poles))
    ksyms = result.gain_symbols
    assert_same(result.closed_loop_polynomial, closed_loop_det(A, B, ksyms))
    solved = dict(zip(ksyms, result.gain))
    for eq in result.coefficient_equations:
        assert_same(eq.lhs.xreplace(solved), eq.rhs)


def test_controllability_determinant_matches_sympy():
    A, B, _ = CASES["motor_with_lag"]
    result = place_single_input(A, B, target_of([-1, -2, -3]))
    num, den = result.controllability_det
    ctrb = sp.Matrix.hstack(B, A * B, A**2 * B)
    # sign depends on the row order used; the magnitude must match sympy's determinant
    assert_same((num / den) ** 2, ctrb.det() ** 2)


def test_controllability_matrix_columns():
    A, B, _ = CASES["spring_mass_damper"]
    field = Field.for_exprs([*A, *B])
    cols = controllability_matrix(field.matrix(A), [row[0] for row in field.matrix(B)], field)
    got = sp.Matrix([[field.to_expr(x) for x in col] for col in cols]).T
    assert_same(got[0, 1], (A * B)[0])
    assert_same(got[1, 1], (A * B)[1])


def test_uncontrollable_plant_has_zero_determinant():
    # two identical decoupled integrators driven by the same input (common practice: uncontrollable)
    A, B = sp.zeros(2, 2), sp.Matrix([1 / m, 1 / m])
    result = place_single_input(A, B, target_of([-1, -2]))
    assert result.controllability_det[0] == 0


def test_gain_symbols_avoid_parameter_names():
    syms = gain_symbols("k", (1, 3), avoid={"k_1", "m"})
    assert [str(x) for x in syms] == ["kk_1", "kk_2", "kk_3"]


def test_numeric_plant_exact_rational_gain():
    # exact arithmetic: rational entries give rational gains, no floating point
    A = sp.Matrix([[0, 1], [sp.Rational(1, 3), sp.Rational(-2, 7)]])
    B = sp.Matrix([0, sp.Rational(5, 2)])
    K = place_single_input(A, B, target_of([-1, -sp.Rational(1, 2)])).gain
    assert all(e.is_Rational for e in K)
    assert sp.expand(closed_loop_det(A, B, K) - target_of([-1, -sp.Rational(1, 2)])) == 0
