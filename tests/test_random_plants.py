"""Random controllable single-input plants (hypothesis): symgain's gains against numpy and scipy.

For plants of order 2 to 5 with small integer or rational entries and random stable targets
(distinct negative real poles, or conjugate pairs), the gain from coefficient matching must
  * equal Ackermann's formula exactly (symbolically),
  * give numpy eigenvalues of A - B K at the target roots,
  * equal scipy.signal.place_poles (unique for one input and distinct poles).
A second family multiplies one entry of A or B by a positive symbol ``a`` and checks the
symbolic gain at sampled values of ``a`` the same way.
"""
import numpy as np
import sympy as sp
from hypothesis import HealthCheck, assume, given, settings
from hypothesis import strategies as st
from scipy import signal

from symgain.design import derive
from symgain.model import Model, Parameter, TargetSpec
from symgain.design.placement import ackermann, place_single_input

s = sp.Symbol("s")
SETTINGS = dict(deadline=None, max_examples=30, suppress_health_check=[HealthCheck.too_slow])

entry = st.one_of(st.integers(-3, 3),
                  st.builds(sp.Rational, st.integers(-6, 6), st.integers(1, 4)))


@st.composite
def plants(draw, min_order=2, max_order=5):
    n = draw(st.integers(min_order, max_order))
    A = sp.Matrix(n, n, [sp.Rational(draw(entry)) for _ in range(n * n)])
    B = sp.Matrix(n, 1, [sp.Rational(draw(entry)) for _ in range(n)])
    return A, B


@st.composite
def stable_poles(draw, n):
    """Distinct stable poles: conjugate pairs -x +- j y and negative reals, all distinct."""
    pairs = draw(st.integers(0, n // 2))
    reals = draw(st.lists(st.integers(1, 12), min_size=n - 2 * pairs, max_size=n - 2 * pairs,
                          unique=True))
    centres = draw(st.lists(st.tuples(st.integers(1, 6), st.integers(1, 6)), min_size=pairs,
                            max_size=pairs, unique=True))
    poles = [sp.Integer(-r) for r in reals]
    for x, y in centres:
        poles += [-x + sp.I * y, -x - sp.I * y]
    return poles


def controllable(A, B):
    n = A.rows
    return sp.Matrix.hstack(*[A**i * B for i in range(n)]).rank() == n


def target_of(poles):
    return sp.expand(sp.Mul(*[s - p for p in poles]))


def assert_eigenvalues_at(A, B, K, poles):
    """numpy eigenvalues of A - B K against the target roots, matched nearest first."""
    closed = A - B @ K
    eig = list(np.linalg.eigvals(closed))
    scale = max(1.0, np.linalg.norm(closed), max(abs(p) for p in poles))
    for p in poles:
        i = int(np.argmin([abs(e - p) for e in eig]))
        assert abs(eig.pop(i) - p) <= 1e-6 * scale, (p, np.linalg.eigvals(closed))


def assert_scipy_gain(A, B, K, poles):
    ref = signal.place_poles(A, B, np.array(poles), rtol=1e-12, maxiter=100).gain_matrix
    np.testing.assert_allclose(K, ref, rtol=1e-6, atol=1e-8 * max(1.0, np.max(np.abs(ref))))


def well_conditioned(A, B):
    """Skip plants so close to uncontrollable that no numeric second opinion is reliable."""
    n = A.rows
    ctrb = np.array(sp.Matrix.hstack(*[A**i * B for i in range(n)]), dtype=float)
    return np.linalg.cond(ctrb) < 1e8


@settings(**SETTINGS)
@given(data=st.data())
def test_random_numeric_plants(data):
    A, B = data.draw(plants())
    assume(controllable(A, B))
    poles = data.draw(stable_poles(A.rows))
    target = target_of(poles)
    K = place_single_input(A, B, target).gain
    assert ackermann(A, B, target) == K  # exact rationals on both routes
    assume(well_conditioned(A, B))
    An, Bn, Kn = (np.array(M, dtype=float) for M in (A, B, K))
    numeric_poles = [complex(p) for p in poles]
    assert_eigenvalues_at(An, Bn, Kn, numeric_poles)
    assert_scipy_gain(An, Bn, Kn, numeric_poles)


@settings(**SETTINGS)
@given(data=st.data())
def test_random_plants_closed_loop_polynomial_exact(data):
    A, B = data.draw(plants(max_order=4))
    assume(controllable(A, B))
    poles = data.draw(stable_poles(A.rows))
    K = place_single_input(A, B, target_of(poles)).gain
    n = A.rows
    char = (s * sp.eye(n) - A + B * K).det(method="berkowitz")
    assert sp.expand(char - target_of(poles)) == 0


@st.composite
def parametric_plants(draw):
    """A random plant with one entry of A or B multiplied by the positive symbol a."""
    A, B = draw(plants(max_order=4))
    a = sp.Symbol("a", positive=True)
    n = A.rows
    if draw(st.booleans()):
        i, j = draw(st.integers(0, n - 1)), draw(st.integers(0, n - 1))
        A[i, j] = A[i, j] * a if A[i, j] != 0 else a
    else:
        i = draw(st.integers(0, n - 1))
        B[i, 0] = B[i, 0] * a if B[i, 0] != 0 else a
    return A, B, a


@settings(**SETTINGS)
@given(data=st.data())
def test_random_plants_with_one_parameter(data):
    A, B, a = data.draw(parametric_plants())
    n = A.rows
    ctrb_det = sp.Matrix.hstack(*[A**i * B for i in range(n)]).det()
    assume(sp.expand(ctrb_det) != 0)  # controllable for almost every a
    poles = data.draw(stable_poles(n))
    target = target_of(poles)
    K = place_single_input(A, B, target).gain
    for e1, e2 in zip(K, ackermann(A, B, target)):
        assert sp.cancel(e1 - e2) == 0
    values = data.draw(st.lists(st.fractions(min_value=sp.Rational(1, 4), max_value=4,
                                             max_denominator=8), min_size=2, max_size=3))
    numeric_poles = [complex(p) for p in poles]
    checked = 0
    for v in values:
        point = {a: sp.Rational(v.numerator, v.denominator)}
        if ctrb_det.xreplace(point) == 0:
            continue  # a sampled value where the plant loses controllability
        Ap, Bp = A.xreplace(point), B.xreplace(point)
        if not well_conditioned(Ap, Bp):
            continue
        Kp = K.xreplace(point)
        assert all(e.is_Rational for e in Kp)  # the formula is finite here
        An, Bn, Kn = (np.array(M, dtype=float) for M in (Ap, Bp, Kp))
        assert_eigenvalues_at(An, Bn, Kn, numeric_poles)
        assert_scipy_gain(An, Bn, Kn, numeric_poles)
        checked += 1
    assume(checked > 0)


@settings(deadline=None, max_examples=15)
@given(data=st.data())
def test_random_plants_through_model_and_derive(data):
    A, B, a = data.draw(parametric_plants())
    n = A.rows
    assume(sp.expand(sp.Matrix.hstack(*[A**i * B for i in range(n)]).det()) != 0)
    poles = data.draw(stable_poles(n))
    param = Parameter.declare("a", sign="positive", range=(0.5, 2))
    model = Model(name="random_plant", parameters=(param,), states=tuple(f"x{i}" for i in range(n)),
                  inputs=("u",), A=A, B=B, feedback=TargetSpec("poles", {"poles": tuple(poles)}))
    fb = derive(model).feedback
    K = place_single_input(A, B, target_of(poles)).gain
    for e1, e2 in zip(fb.gain, K):
        assert sp.cancel(e1 - e2) == 0
    point = {a: sp.Rational(3, 2)}
    failed = [c for c in fb.valid_when if not c.xreplace(point)]
    if failed or not well_conditioned(A.xreplace(point), B.xreplace(point)):
        return
    An, Bn, Kn = (np.array(M.xreplace(point), dtype=float) for M in (A, B, sp.Matrix(fb.gain)))
    assert_eigenvalues_at(An, Bn, Kn, [complex(p) for p in poles])
