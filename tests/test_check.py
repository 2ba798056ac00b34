"""Validity conditions and the numeric check (symgain.design.validity, symgain.analysis.check).

Outside references: scipy.signal.place_poles and numpy eigenvalues (inside check_design),
and the controllability rule (common practice: single-input pole placement exists exactly
when det [B, AB, ..., A^(n-1)B] != 0).
"""
import dataclasses

import numpy as np
import pytest
import sympy as sp

from symgain.analysis.check import check_design, sample_points
from symgain.design import derive
from symgain.errors import ModelError
from symgain.model import Model, Parameter, TargetSpec
from symgain.design.validity import holds_at, nonzero_conditions


def gain_model(sign, low=-1.0, high=1.0, nominal=None, poles=(-2, -3)):
    """x1' = x2, x2' = a u: controllable exactly when a != 0 (common practice)."""
    a = Parameter.declare("a", sign=sign, range=(low, high), nominal=nominal)
    return Model(name="scaled_input", parameters=(a,), states=("x1", "x2"), inputs=("u",),
                 A=sp.Matrix([[0, 1], [0, 0]]), B=sp.Matrix([0, a.symbol]),
                 feedback=TargetSpec("poles", {"poles": poles}))


# --- validity ---------------------------------------------------------------------------------------
def test_real_sign_keeps_the_controllability_condition():
    model = gain_model("real", nominal=0.5)
    a = model.symbols["a"]
    assert sp.Ne(a, 0) in derive(model).feedback.valid_when


@pytest.mark.parametrize("sign,low", [("positive", 0.5), ("nonzero", 0.5)])
def test_sign_that_rules_out_zero_drops_the_condition(sign, low):
    model = gain_model(sign, low=low, high=2.0)
    assert derive(model).feedback.valid_when == ()


def test_condition_on_a_difference_of_parameters():
    # B = [0, a - b]: controllable exactly when a != b, whatever the (positive) signs
    a = Parameter.declare("a", sign="positive", range=(1, 2))
    b = Parameter.declare("b", sign="positive", range=(1, 2))
    model = Model(name="difference", parameters=(a, b), states=("x1", "x2"), inputs=("u",),
                  A=sp.Matrix([[0, 1], [0, 0]]), B=sp.Matrix([0, a.symbol - b.symbol]),
                  feedback=TargetSpec("poles", {"poles": (-1, -2)}))
    conds = derive(model).feedback.valid_when
    assert len(conds) == 1
    expr = conds[0].lhs - conds[0].rhs
    assert sp.expand(expr - (a.symbol - b.symbol)) == 0 or sp.expand(expr + (a.symbol - b.symbol)) == 0


def test_nonzero_conditions_and_holds_at():
    x = sp.Symbol("x", real=True)
    y = sp.Symbol("y", positive=True)
    conds = nonzero_conditions([x * y, y + 1, x - 2])
    assert set(conds) == {sp.Ne(x, 0), sp.Ne(x - 2, 0)}
    assert holds_at(conds, {x: 1.0, y: 1.0}) == []
    assert holds_at(conds, {x: 2.0, y: 1.0}) == ["x - 2 != 0"]  # plain mathematics, not sympy syntax
    assert holds_at(conds, {x: 1e-15, y: 1.0}) == ["x != 0"]  # round-off zero counts as zero


# --- the check ----------------------------------------------------------------------------------------
def test_points_violating_valid_when_are_skipped():
    model = gain_model("real", low=-1.0, high=1.0, nominal=0.0)
    report = check_design(derive(model), n_points=6, seed=0)
    points = report.points["feedback"]
    assert points[0].values == {"a": 0.0}  # the nominal point comes first
    assert points[0].status == "skipped" and "a != 0" in points[0].reason
    assert all(p.status == "ok" for p in points[1:])
    assert report.counts("feedback") == {"ok": 5, "fail": 0, "skipped": 1}
    assert report.passed


def test_correct_design_passes_with_scipy_comparison():
    model = gain_model("positive", low=0.5, high=4.0)
    report = check_design(derive(model), n_points=10, seed=3)
    assert report.passed
    for p in report.points["feedback"]:
        assert p.gain_error is not None and p.gain_error < 1e-9  # distinct poles: scipy compared
        assert p.closed_loop_error < 1e-9


def test_repeated_poles_skip_scipy_but_check_polynomial():
    model = gain_model("positive", low=0.5, high=4.0, poles=(-2, -2))
    report = check_design(derive(model), n_points=4)
    assert report.passed
    assert all(p.gain_error is None and p.closed_loop_error < 1e-9 for p in report.points["feedback"])


def test_wrong_gain_fails_the_check():
    design = derive(gain_model("positive", low=0.5, high=4.0))
    fb = design.feedback
    wrong = dataclasses.replace(fb, gain=sp.ImmutableMatrix(fb.gain * sp.Rational(11, 10)))
    report = check_design(dataclasses.replace(design, feedback=wrong), n_points=5)
    assert not report.passed
    assert report.counts("feedback")["fail"] == 5


def test_swapped_gain_entries_fail_the_check():
    design = derive(gain_model("positive", low=0.5, high=4.0))
    fb = design.feedback
    swapped = sp.ImmutableMatrix([[fb.gain[1], fb.gain[0]]])
    report = check_design(dataclasses.replace(design, feedback=dataclasses.replace(fb, gain=swapped)),
                          n_points=3)
    assert not report.passed


def test_tiny_tolerance_fails():
    report = check_design(derive(gain_model("positive", low=0.5, high=4.0, poles=(-1, -7))),
                          n_points=10, tolerance=1e-30)
    # round-off alone exceeds 1e-30 at some point
    assert not report.passed


def test_sample_points_in_range_and_reproducible():
    model = gain_model("positive", low=0.5, high=4.0)
    pts = sample_points(model, 20, seed=5)
    assert pts[0] == {"a": 2.25}
    assert all(0.5 <= p["a"] <= 4.0 for p in pts)
    assert pts == sample_points(model, 20, seed=5)
    assert pts != sample_points(model, 20, seed=6)


def test_sample_points_need_range_or_nominal():
    a = Parameter.declare("a", sign="positive")
    model = Model(name="bare", parameters=(a,), states=("x1", "x2"), inputs=("u",),
                  A=sp.Matrix([[0, 1], [0, 0]]), B=sp.Matrix([0, a.symbol]),
                  feedback=TargetSpec("poles", {"poles": (-1, -2)}))
    with pytest.raises(ModelError, match="parameters.a"):
        sample_points(model)


def test_check_agrees_with_direct_eigenvalues():
    """check_design's verdict is backed by numpy eigenvalues computed here."""
    model = gain_model("positive", low=0.5, high=4.0, poles=(-1, -5))
    design = derive(model)
    a = model.symbols["a"]
    for p in check_design(design, n_points=5).points["feedback"]:
        K = np.array(design.feedback.gain.subs(a, p.values["a"]), dtype=float)
        A = np.array([[0.0, 1.0], [0.0, 0.0]])
        B = np.array([[0.0], [p.values["a"]]])
        np.testing.assert_allclose(np.sort(np.linalg.eigvals(A - B @ K).real), [-5.0, -1.0], rtol=1e-9)
