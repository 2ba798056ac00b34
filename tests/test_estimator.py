"""Estimator gain L: duality, published worked examples, scipy, separation property, errors.

References:
* Franklin, Powell and Emami-Naeini, "Feedback Control of Dynamic Systems", estimator design
  for the simple pendulum (A = [[0, 1], [-w0^2, 0]], C = [1, 0], both estimator poles at
  -10 w0): L = [20 w0, 99 w0^2]^T (from memory).
* Ogata, "Modern Control Engineering", observer-gain example with A = [[0, 20.6], [1, 0]],
  C = [0, 1] and both observer poles at -10: Ke = [120.6, 20]^T (from memory).
* scipy.signal.place_poles on (A^T, C^T) as the numeric reference for L.
* Separation property (common practice): the plant-regulator-estimator loop has the poles of
  A - B K and of A - L C; checked here with numpy's characteristic polynomial.
"""
from pathlib import Path

import numpy as np
import pytest
import sympy as sp
from scipy import signal

from symgain.cli import main
from symgain.analysis.check import check_design
from symgain.design import derive
from symgain.errors import DesignError, NotControllableError
from symgain.model import Model, Parameter, S, TargetSpec
from symgain.model.toml_file import load_model, model_from_text

ROOT = Path(__file__).resolve().parent.parent


def poles(*values):
    return TargetSpec("poles", {"poles": tuple(values)})


def test_pendulum_estimator_franklin_powell_emami_naeini():
    w0 = Parameter.declare("w0", sign="positive", range=(1, 3))
    model = Model(name="pendulum", parameters=(w0,), states=("theta", "omega"), inputs=("u",),
                  outputs=("theta",), A=sp.Matrix([[0, 1], [-w0.symbol**2, 0]]), B=sp.Matrix([[0], [1]]),
                  C=sp.Matrix([[1, 0]]), estimator=poles(-10 * w0.symbol, -10 * w0.symbol))
    L = derive(model).estimator.gain
    assert sp.simplify(L - sp.Matrix([[20 * w0.symbol], [99 * w0.symbol**2]])) == sp.zeros(2, 1)


def test_observer_gain_ogata():
    a = Parameter.declare("a", sign="positive", range=(20, 21), nominal=20.6)
    model = Model(name="ogata", parameters=(a,), states=("x1", "x2"), inputs=("u",), outputs=("y",),
                  A=sp.Matrix([[0, a.symbol], [1, 0]]), B=sp.Matrix([[0], [1]]), C=sp.Matrix([[0, 1]]),
                  estimator=poles(-10, -10))
    L = derive(model).estimator.gain.subs(a.symbol, sp.Rational(206, 10))
    assert L == sp.Matrix([[sp.Rational(1206, 10)], [20]])


STAGE = ROOT / "examples" / "linear_stage.toml"


def test_estimator_gain_matches_scipy_place_poles_on_the_dual():
    model = load_model(STAGE)
    design = derive(model)
    L = design.estimator.gain
    syms = [p.symbol for p in model.parameters]
    rng = np.random.default_rng(4)
    for _ in range(5):
        vals = {p.symbol: rng.uniform(*p.range) for p in model.parameters}
        A = np.array(model.A.subs(vals), dtype=float)
        C = np.array(model.C.subs(vals), dtype=float)
        roots = np.roots(np.array(sp.Poly(design.estimator.target.polynomial.subs(vals), S).all_coeffs(),
                                  dtype=float))
        ref = signal.place_poles(A.T, C.T, roots).gain_matrix.T
        got = np.array(L.subs(vals), dtype=float)
        assert np.allclose(got, ref, rtol=1e-9, atol=0)
    assert syms  # the model has parameters to sample


def test_estimator_steps_mirror_feedback_and_state_separation():
    design = derive(load_model(STAGE))
    names = [st.name for st in design.estimator.steps]
    for name in ("closed_loop_matrix", "characteristic_polynomial", "target_polynomial",
                 "coefficient_equations", "solution", "valid_when", "separation"):
        assert name in names
    assert any("separation" in note for note in design.estimator.notes)
    lsym = design.estimator.extra["gain_symbols"]
    closed = design.estimator.step("closed_loop_matrix").value
    model = design.model
    assert sp.simplify(closed - (model.A - lsym * model.C)) == sp.zeros(2, 2)


def test_separation_property_at_sampled_points():
    """The 2n loop [[A, -B K], [L C, A - B K - L C]] has the union of both pole sets (numpy)."""
    model = load_model(STAGE)
    design = derive(model)
    rng = np.random.default_rng(7)
    for _ in range(6):
        vals = {p.symbol: rng.uniform(*p.range) for p in model.parameters}
        A, B, C = (np.array(M.subs(vals), dtype=float) for M in (model.A, model.B, model.C))
        K = np.array(design.feedback.gain.subs(vals), dtype=float)
        L = np.array(design.estimator.gain.subs(vals), dtype=float)
        loop = np.block([[A, -B @ K], [L @ C, A - B @ K - L @ C]])
        want = np.polymul(np.poly(A - B @ K), np.poly(A - L @ C))
        target = np.polymul(*(np.array(sp.Poly(t.subs(vals), S).all_coeffs(), dtype=float)
                              for t in (design.feedback.target.polynomial, design.estimator.target.polynomial)))
        got = np.poly(loop)
        scale = np.abs(target) + 1
        assert np.max(np.abs(got - target) / scale) < 1e-6
        assert np.max(np.abs(want - target) / scale) < 1e-6


def test_separation_step_is_the_product_of_both_targets():
    design = derive(load_model(STAGE))
    product = design.estimator.step("separation").value
    assert sp.expand(product - design.feedback.target.polynomial * design.estimator.target.polynomial) == 0


def test_check_passes_for_the_stage():
    assert check_design(derive(load_model(STAGE)), n_points=8).passed


def test_two_output_estimator_with_output_direction():
    k, m = Parameter.declare("k", sign="positive", range=(1, 4)), Parameter.declare("m", sign="positive", range=(1, 2))
    A = sp.Matrix([[0, 1, 0], [-k.symbol / m.symbol, 0, 1 / m.symbol], [0, 0, -1]])
    model = Model(name="two", parameters=(k, m), states=("x", "v", "f"), inputs=("u",), outputs=("x", "f"),
                  A=A, B=sp.Matrix([[0], [0], [1]]), C=sp.Matrix([[1, 0, 0], [0, 0, 1]]),
                  estimator=TargetSpec("poles", {"poles": (-2, -3, -4), "output_direction": ["1", "0"]}))
    part = derive(model).estimator
    assert part.gain.shape == (3, 2)
    assert part.gain[:, 1] == sp.zeros(3, 1)  # only the first output is used
    report = check_design(derive(model), n_points=6)
    assert report.passed and report.counts("estimator")["ok"] == 6


def test_estimator_without_outputs_is_a_design_error(tmp_path, capsys):
    text = '''name = "blind"
[parameters]
m = { sign = "positive", range = [1, 2] }
[plant]
states = ["p", "v"]
inputs = ["F"]
A = [["0", "1"], ["0", "0"]]
B = [["0"], ["1/m"]]
[estimator]
poles = ["-2", "-3"]
'''
    with pytest.raises(DesignError, match="no outputs"):
        derive(model_from_text(text, "blind.toml"))
    path = tmp_path / "blind.toml"
    path.write_text(text)
    assert main(["derive", str(path)]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "estimator" in err and "no outputs" in err


def test_unobservable_plant_is_refused():
    m = Parameter.declare("m", sign="positive", range=(1, 2))
    model = Model(name="cart", parameters=(m,), states=("p", "v"), inputs=("F",), outputs=("v",),
                  A=sp.Matrix([[0, 1], [0, 0]]), B=sp.Matrix([[0], [1 / m.symbol]]), C=sp.Matrix([[0, 1]]),
                  estimator=poles(-2, -3))
    with pytest.raises(NotControllableError, match="observable"):
        derive(model)


def test_separation_property_symbolically():
    """det(sI - M) of the plant-regulator-estimator loop equals the product of both targets."""
    from symgain.design.estimator import separation_polynomial

    model = load_model(STAGE)
    design = derive(model)
    char = separation_polynomial(sp.Matrix(model.A), sp.Matrix(model.B), sp.Matrix(model.C),
                                 sp.Matrix(design.feedback.gain), sp.Matrix(design.estimator.gain))
    product = design.feedback.target.polynomial * design.estimator.target.polynomial
    assert sp.simplify(char - sp.expand(product)) == 0


def two_output_model(values):
    k, m = Parameter.declare("k", sign="positive", range=(1, 4)), Parameter.declare("m", sign="positive", range=(1, 2))
    A = sp.Matrix([[0, 1, 0], [-k.symbol / m.symbol, 0, 1 / m.symbol], [0, 0, -1]])
    return Model(name="two", parameters=(k, m), states=("x", "v", "f"), inputs=("u",), outputs=("x", "f"),
                 A=A, B=sp.Matrix([[0], [0], [1]]), C=sp.Matrix([[1, 0, 0], [0, 0, 1]]),
                 estimator=TargetSpec("poles", {"poles": (-4, -5, -6), **values}))


def test_two_output_estimator_with_a_pattern_of_L():
    """The pattern has the shape of L (states x outputs); symbols l_ij sit at L[i, j]."""
    model = two_output_model({"pattern": [["*", "0"], ["*", "0"], ["*", "0"]]})
    part = derive(model).estimator
    names = [[str(e) for e in part.extra["gain_symbols"].row(i)] for i in range(3)]
    assert names == [["l_11", "0"], ["l_21", "0"], ["l_31", "0"]]
    assert part.extra["solution_kind"] == "unique"
    assert check_design(derive(model), n_points=5).passed


def test_estimator_pattern_of_the_wrong_shape():
    model = two_output_model({"pattern": [["*", "0"], ["*", "0"]]})
    with pytest.raises(Exception, match=r"pattern has 2 rows, expected 3 \(one per state\)"):
        derive(model)
