"""Several inputs: structured gains (pattern) and the single-direction route u = f v.

References:
* The closed-loop characteristic polynomial is recomputed here with numpy (np.poly of the
  numeric A - B K) at sampled parameter points and random values of the free gains, and
  compared with the target's coefficients.
* Two decoupled double integrators with a diagonal pattern: the target's poles can be shared
  between the two loops in two ways, so coefficient matching has two branches (worked by hand:
  (s + k1)(s + k2) = (s + 1)(s + 2) gives {k1, k2} = {1, 2}).
"""
from pathlib import Path

import numpy as np
import pytest
import sympy as sp

from symgain.analysis.check import check_design
from symgain.cli import main
from symgain.design import derive
from symgain.errors import DesignError, ExpressionError, ModelError
from symgain.model import Model, Parameter, S, TargetSpec
from symgain.model.toml_file import load_model
from symgain.design.several_inputs import place_structured

ROOT = Path(__file__).resolve().parent.parent
BOAT = ROOT / "examples" / "twin_thruster_boat.toml"


def closed_loop_matches(model, part, n_points=6, seed=3):
    rng = np.random.default_rng(seed)
    for _ in range(n_points):
        vals = {p.symbol: rng.uniform(*p.range) for p in model.parameters}
        vals.update({g: rng.uniform(0.5, 1.5) for g in part.free_gains})
        A, B = (np.array(M.subs(vals), dtype=float) for M in (model.A, model.B))
        K = np.array(part.gain.subs(vals), dtype=complex)
        assert np.max(np.abs(K.imag)) < 1e-9
        target = np.array(sp.Poly(part.target.polynomial.subs(vals), S).all_coeffs(), dtype=float)
        got = np.poly(A - B @ K.real)
        assert np.max(np.abs(got - target) / (np.abs(target) + 1)) < 1e-8


def test_boat_pattern_is_a_family_with_a_named_free_gain():
    model = load_model(BOAT)
    part = derive(model).feedback
    assert part.extra["solution_kind"] == "family"
    assert [str(g) for g in part.free_gains] == ["k_21"]
    assert part.gain[1, 1] == 0 and part.gain[1, 2] == 0  # fixed entries of the pattern stay
    assert part.gain[1, 0] == part.free_gains[0]
    closed_loop_matches(model, part)
    assert check_design(derive(model), n_points=6).passed


def test_diagonal_pattern_has_two_branches():
    r = place_structured(sp.zeros(2, 2), sp.eye(2), [[None, 0], [0, None]], sp.expand((S + 1) * (S + 2)))
    assert r.kind == "branches"
    assert {(b[0, 0], b[1, 1]) for b in r.branches} == {(1, 2), (2, 1)}


def test_unique_structured_gain_with_parameters():
    a = Parameter.declare("a", sign="positive", range=(1, 2))
    w = Parameter.declare("w", sign="positive", range=(1, 3), role="design")
    A = sp.Matrix([[0, 1, 0], [0, -a.symbol, 1], [0, 0, -1]])
    B = sp.Matrix([[0, 0], [1, 0], [0, 1]])
    model = Model(name="u", parameters=(a, w), states=("x", "v", "f"), inputs=("u1", "u2"), A=A, B=B,
                  feedback=TargetSpec("poles", {"poles": (-w.symbol, -2 * w.symbol, -3 * w.symbol),
                                                "pattern": [["*", "0", "0"], ["0", "*", "*"]]}))
    part = derive(model).feedback
    assert part.extra["solution_kind"] == "unique"  # products k_11 k_22 appear: solved via Groebner
    assert not part.free_gains
    closed_loop_matches(model, part)


def test_inconsistent_pattern_reports_none_with_the_reason():
    A = sp.Matrix([[0, 1], [0, 0]])
    m = Parameter.declare("m", sign="positive", range=(1, 2))
    model = Model(name="n", parameters=(m,), states=("p", "v"), inputs=("a", "b"), A=A, B=sp.eye(2) / m.symbol,
                  feedback=TargetSpec("poles", {"poles": (-1, -2), "pattern": [["0", "*"], ["*", "0"]]}))
    with pytest.raises(DesignError, match="inconsistent"):
        derive(model)


def test_given_input_direction_places_through_one_combination():
    model = load_model(BOAT)
    spec = model.feedback
    values = {k: v for k, v in spec.values.items() if k != "pattern"} | {"input_direction": ["1", "1"]}
    from dataclasses import replace

    model2 = replace(model, feedback=TargetSpec(spec.kind, values, spec.where))
    with pytest.raises(DesignError):  # equal thrusts never turn the boat: not controllable
        derive(model2)
    values["input_direction"] = ["1", "0"]
    model3 = replace(model, feedback=TargetSpec(spec.kind, values, spec.where))
    part = derive(model3).feedback
    assert part.gain[1, :] == sp.zeros(1, 3)
    assert any("given in the model" in n for n in part.notes)
    closed_loop_matches(model3, part)


def test_direction_is_chosen_and_named_when_not_given():
    A = sp.Matrix([[0, 1], [0, 0]])
    m = Parameter.declare("m", sign="positive", range=(1, 2))
    model = Model(name="d", parameters=(m,), states=("p", "v"), inputs=("a", "b"), A=A,
                  B=sp.Matrix([[1, 0], [0, 0]]) / m.symbol, feedback=TargetSpec("poles", {"poles": (-1, -2)}))
    with pytest.raises(DesignError, match="no unit input direction"):
        derive(model)
    model = Model(name="d", parameters=(m,), states=("p", "v"), inputs=("a", "b"), A=A,
                  B=sp.Matrix([[0, 1], [1, 0]]) / m.symbol, feedback=TargetSpec("poles", {"poles": (-1, -2)}))
    part = derive(model).feedback
    assert any("chosen by symgain" in n for n in part.notes)
    closed_loop_matches(model, part)


BAD = '''name = "boat"
[parameters]
m = { sign = "positive", range = [1, 2] }
[plant]
states = ["p", "v"]
inputs = ["a", "b"]
A = [["0", "1"], ["0", "0"]]
B = [["1/m", "0"], ["0", "1/m"]]
[feedback]
poles = ["-1", "-2"]
pattern = %s
'''


@pytest.mark.parametrize("pattern, error, words", [
    ('[["*", "*"]]', ModelError, "pattern has 1 rows, expected 2"),
    ('[["*", "*"], ["*"]]', ModelError, "feedback.pattern[1]: row 1 has 1 entries"),
    ('[["*", "q"], ["*", "*"]]', ExpressionError, "feedback.pattern[0][1]: undeclared symbol 'q'"),
])
def test_bad_pattern_exits_2_naming_the_place(pattern, error, words, tmp_path, capsys):
    path = tmp_path / "boat.toml"
    path.write_text(BAD % pattern)
    with pytest.raises(error):
        derive(load_model(path))
    assert main(["derive", str(path)]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and words in err


def test_several_branches_are_reported_through_derive():
    w = Parameter.declare("w", sign="positive", range=(1, 2), role="design")
    model = Model(name="twins", parameters=(w,), states=("x1", "x2"), inputs=("u1", "u2"), A=sp.zeros(2, 2),
                  B=sp.eye(2), feedback=TargetSpec("poles", {"poles": (-w.symbol, -3 * w.symbol),
                                                             "pattern": [["*", "0"], ["0", "*"]]}))
    part = derive(model).feedback
    assert part.extra["solution_kind"] == "branches"
    branches = part.step("branches").value
    assert {(b[0, 0], b[1, 1]) for b in branches} == {(w.symbol, 3 * w.symbol), (3 * w.symbol, w.symbol)}
    assert any("2 branches" in n for n in part.notes)
    closed_loop_matches(model, part)


def test_check_catches_a_wrong_structured_gain():
    from dataclasses import replace

    design = derive(load_model(BOAT))
    K = sp.Matrix(design.feedback.gain)
    K[0, 1] = K[0, 1] * sp.Rational(21, 20)
    report = check_design(replace(design, feedback=replace(design.feedback, gain=sp.ImmutableMatrix(K))), n_points=3)
    assert not report.passed
