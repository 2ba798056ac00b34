"""Integral action: augmented closed loop against the target, scipy, unit DC gain, zero at s = 0.

References:
* First-order plant x' = -a x + b u with q' = x - r and u = -k x - ki q: the closed loop is
  s^2 + (a + b k) s + b ki, so k = (2 zeta wn - a)/b and ki = wn^2/b (common practice: PI
  design of a first-order lag by pole placement, derived by hand).
* scipy.signal.place_poles on the augmented pair ([[A, 0], [C, 0]], [[B], [0]]).
* Unit steady-state gain from r to y with integral action (common practice), computed here
  with numpy.linalg.solve on the numeric augmented loop.
"""
from pathlib import Path

import numpy as np
import pytest
import sympy as sp
from scipy import signal

from symgain.analysis.check import check_design
from symgain.cli import main
from symgain.design import derive
from symgain.errors import DesignError
from symgain.model import Model, Parameter, S, TargetSpec
from symgain.model.toml_file import load_model

ROOT = Path(__file__).resolve().parent.parent
PLATEN = ROOT / "examples" / "heated_press_platen.toml"


def test_first_order_plant_by_hand():
    a, b = Parameter.declare("a", sign="positive", range=(1, 2)), Parameter.declare("b", sign="positive", range=(1, 2))
    z, wn = sp.Rational(7, 10), sp.Integer(3)
    model = Model(name="lag", parameters=(a, b), states=("x",), inputs=("u",), outputs=("x",),
                  A=sp.Matrix([[-a.symbol]]), B=sp.Matrix([[b.symbol]]), C=sp.Matrix([[1]]),
                  integral=TargetSpec("damping", {"damping": z, "natural_frequency": wn}))
    part = derive(model).integral
    assert sp.simplify(part.gain[0, 0] - (2 * z * wn - a.symbol) / b.symbol) == 0
    assert sp.simplify(part.extra["integral_gain"][0, 0] - wn**2 / b.symbol) == 0


def augmented(A, B, C):
    n, p = A.shape[0], C.shape[0]
    return np.block([[A, np.zeros((n, p))], [C, np.zeros((p, p))]]), np.vstack([B, np.zeros((p, B.shape[1]))])


def test_augmented_polynomial_equals_the_target_symbolically():
    model = load_model(PLATEN)
    part = derive(model).integral
    gain = sp.Matrix.hstack(sp.Matrix(part.gain), sp.Matrix(part.extra["integral_gain"]))
    n, p = model.n_states, model.n_outputs
    Aa = sp.Matrix.vstack(sp.Matrix.hstack(model.A, sp.zeros(n, p)), sp.Matrix.hstack(model.C, sp.zeros(p, p)))
    Ba = sp.Matrix.vstack(model.B, sp.zeros(p, 1))
    char = (S * sp.eye(n + p) - Aa + Ba * gain).det()
    assert sp.simplify(char - part.target.polynomial) == 0
    assert sp.Poly(part.target.polynomial, S).degree() == n + p


def test_platen_gains_match_place_poles_and_give_unit_dc_gain():
    model = load_model(PLATEN)
    part = derive(model).integral
    rng = np.random.default_rng(11)
    for _ in range(5):
        vals = {p.symbol: rng.uniform(*p.range) for p in model.parameters}
        A, B, C = (np.array(M.subs(vals), dtype=float) for M in (model.A, model.B, model.C))
        K = np.array(part.gain.subs(vals), dtype=float)
        Ki = np.array(part.extra["integral_gain"].subs(vals), dtype=float)
        Aa, Ba = augmented(A, B, C)
        w = vals[model.symbols["w"]]
        distinct = np.array([-0.8 * w, -w, -1.3 * w])  # scipy needs distinct poles: compare on another target
        closed = Aa - Ba @ np.hstack([K, Ki])
        assert np.allclose(np.poly(closed), np.poly([-w, -w, -w]), rtol=1e-8, atol=1e-12 * w**3)
        ref = signal.place_poles(Aa, Ba, distinct).gain_matrix
        assert np.allclose(np.sort(np.linalg.eigvals(Aa - Ba @ ref).real), np.sort(distinct))
        # r enters the integrator as q' = y - r; y = C x; DC gain -[C 0] Acl^-1 [0; -I]
        Br = np.vstack([np.zeros((A.shape[0], 1)), -np.eye(1)])
        dc = -np.hstack([C, np.zeros((1, 1))]) @ np.linalg.solve(closed, Br)
        assert abs(dc[0, 0] - 1) < 1e-9


def test_integral_check_compares_with_scipy_for_distinct_poles():
    w = Parameter.declare("w", sign="positive", range=(1, 2), role="design")
    m = Parameter.declare("m", sign="positive", range=(1, 3))
    model = Model(name="cart", parameters=(m, w), states=("p", "v"), inputs=("F",), outputs=("p",),
                  A=sp.Matrix([[0, 1], [0, -1 / m.symbol]]), B=sp.Matrix([[0], [1 / m.symbol]]),
                  C=sp.Matrix([[1, 0]]),
                  integral=TargetSpec("poles", {"poles": (-w.symbol, -2 * w.symbol, -3 * w.symbol)}))
    report = check_design(derive(model), n_points=6)
    assert report.passed
    assert all(p.gain_error is not None and p.gain_error < 1e-8 for p in report.points["integral"])


def test_integral_json_has_both_gains(capsys):
    assert main(["derive", str(PLATEN), "--json"]) == 0
    import json
    data = json.loads(capsys.readouterr().out)
    assert set(data["integral"]) >= {"gain", "integral_gain", "valid_when"}
    assert len(data["integral"]["gain"][0]) == 2 and len(data["integral"]["integral_gain"][0]) == 1


def test_zero_at_the_origin_is_refused(tmp_path, capsys):
    """y = velocity of a mass-spring-damper pushed by a force: G(s) = s/(m s^2 + c s + k)."""
    text = '''name = "speed"
[parameters]
m = { sign = "positive", range = [1, 2] }
k = { sign = "positive", range = [1, 2] }
c = { sign = "positive", range = [1, 2] }
[plant]
states = ["x", "v"]
inputs = ["F"]
outputs = ["v"]
A = [["0", "1"], ["-k/m", "-c/m"]]
B = [["0"], ["1/m"]]
[integral]
poles = ["-1", "-2", "-3"]
'''
    path = tmp_path / "speed.toml"
    path.write_text(text)
    with pytest.raises(DesignError, match="zero at s = 0"):
        derive(load_model(path))
    assert main(["derive", str(path)]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "integral" in err and "zero at s = 0" in err


def test_parameter_dependent_zero_at_origin_becomes_a_condition():
    """y = g x + v has the zero s = -g: at the origin exactly when g = 0, so Ne(g, 0) must hold."""
    k = Parameter.declare("k", sign="positive", range=(1, 2))
    g = Parameter.declare("g", sign="real", range=(-1, 1))
    model = Model(name="z", parameters=(k, g), states=("x", "v"), inputs=("u",), outputs=("y",),
                  A=sp.Matrix([[0, 1], [-k.symbol, -1]]), B=sp.Matrix([[0], [1]]),
                  C=sp.Matrix([[g.symbol, 1]]), integral=TargetSpec("poles", {"poles": (-1, -2, -3)}))
    part = derive(model).integral
    assert sp.Ne(g.symbol, 0) in part.valid_when
    assert sp.simplify(part.step("zero_at_origin_determinant").value ** 2 - g.symbol**2) == 0


def test_more_outputs_than_inputs_is_refused():
    m = Parameter.declare("m", sign="positive", range=(1, 2))
    model = Model(name="cart", parameters=(m,), states=("p", "v"), inputs=("F",), outputs=("p", "v"),
                  A=sp.Matrix([[0, 1], [0, 0]]), B=sp.Matrix([[0], [1 / m.symbol]]), C=sp.eye(2),
                  integral=TargetSpec("poles", {"poles": (-1, -2, -3, -4)}))
    with pytest.raises(DesignError, match="at least 2 inputs"):
        derive(model)


def test_two_input_integral_with_a_pattern():
    a1, a2 = (Parameter.declare(n, sign="positive", range=(1, 2)) for n in ("a1", "a2"))
    A = sp.Matrix([[-a1.symbol, 1], [0, -a2.symbol]])
    model = Model(name="two", parameters=(a1, a2), states=("x1", "x2"), inputs=("u1", "u2"), outputs=("x1", "x2"),
                  A=A, B=sp.eye(2), C=sp.eye(2),
                  integral=TargetSpec("poles", {"poles": (-1, -2, -3, -4),
                                                "pattern": [["*", "*", "*", "*"], ["*", "*", "*", "*"]]}))
    part = derive(model).integral
    assert part.extra["integral_gain"].shape == (2, 2) and part.gain.shape == (2, 2)
    assert part.free_gains  # eight gains, four equations: a family
    report = check_design(derive(model), n_points=6)
    assert report.passed and report.counts("integral")["ok"] == 6


def test_check_catches_a_wrong_integral_gain():
    from dataclasses import replace

    design = derive(load_model(PLATEN))
    ki = design.integral.extra["integral_gain"]
    wrong = replace(design.integral, extra={**design.integral.extra, "integral_gain": ki * sp.Rational(11, 10)})
    report = check_design(replace(design, integral=wrong), n_points=3)
    assert not report.passed and report.counts("integral")["fail"] == 3
