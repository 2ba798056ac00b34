"""The Python API: models from matrices or equations, no file; Jupyter display."""
import pytest
import sympy as sp

import symgain
from symgain import check_design, derive, design_to_json, model_from_equations, model_from_matrices
from symgain.errors import ModelError
from symgain.model import Parameter

RANGES = {"m": {"sign": "positive", "range": [1, 3]}, "c": {"sign": "nonnegative", "range": [0, 2]},
          "w": {"sign": "positive", "range": [1, 4], "role": "design"}}


def test_exported():
    for name in ("model_from_matrices", "model_from_equations"):
        assert name in symgain.__all__


def test_from_sympy_matrices_maps_symbols_by_name():
    m, c, w = sp.symbols("m c w")  # no assumptions: mapped to the declared, signed parameters
    model = model_from_matrices("shuttle", sp.Matrix([[0, 1], [0, -c / m]]), sp.Matrix([0, 1 / m]),
                                states=["p", "v"], inputs=["F"], parameters=RANGES,
                                feedback={"poles": [-w, -w]})
    assert model.symbols["m"].is_positive
    gain = derive(model).feedback.gain
    mm, cc, ww = (model.symbols[n] for n in "mcw")
    # closed loop s^2 + (c + K2)/m s + K1/m = (s + w)^2 (coefficient matching by hand)
    assert sp.simplify(gain[0] - mm * ww**2) == 0 and sp.simplify(gain[1] - (2 * mm * ww - cc)) == 0
    assert check_design(derive(model), n_points=4).passed
    assert '"gain"' in design_to_json(derive(model))


def test_from_text_rows_and_latex_with_default_names():
    model = model_from_matrices("coil", r"\begin{bmatrix} 0 & 1 \\ 0 & -\frac{c}{m} \end{bmatrix}",
                                [["0"], ["1/m"]], C=[[1, 0]], parameters=RANGES)
    assert model.states == ("x1", "x2") and model.inputs == ("u1",) and model.outputs == ("y1",)


def test_parameters_inferred_from_symbol_assumptions():
    k = sp.Symbol("k", positive=True)
    model = model_from_matrices("spring", sp.Matrix([[0, 1], [-k, 0]]), sp.Matrix([0, 1]))
    assert model.parameter("k").sign == "positive"


def test_parameter_objects_accepted():
    params = [Parameter.declare("m", sign="positive", range=(1, 2))]
    model = model_from_matrices("mass", [[0, 1], [0, 0]], [[0], ["1/m"]], parameters=params)
    assert model.parameter("m").range == (1.0, 2.0)


def test_from_equations_with_solve():
    x, v, F = sp.symbols("x v F")
    m, c, k = sp.symbols("m c k", positive=True)
    params = {**RANGES, "k": {"sign": "positive", "range": [1, 2]}}
    model = model_from_equations("sprung", {x: v, v: (F - k * x - c * v) / m},
                                 {x: "1", v: 0, F: "solve"}, outputs=["x"], parameters=params,
                                 feedback={"damping": "0.7", "natural_frequency": "w"})
    kk = model.symbols["k"]
    assert model.extra["equilibrium"]["F"] == kk  # F holds the spring at x = 1: F = k
    assert model.C == sp.Matrix([[1, 0]])
    assert check_design(derive(model), n_points=4).passed


def test_api_errors_are_model_errors():
    with pytest.raises(ModelError, match="undeclared symbol 'q'"):
        model_from_matrices("bad", [["q"]], [[1]], parameters=RANGES)
    with pytest.raises(ModelError, match="state 'v' has no equation"):
        model_from_equations("bad", {"x": "v"}, {"x": 0, "v": 0, "F": 0}, states=["x", "v"],
                             parameters=RANGES)


def test_jupyter_display_shows_gains_and_conditions():
    k, w = sp.symbols("k w", real=True)
    model = model_from_matrices("spring", sp.Matrix([[0, 1], [-k, 0]]), sp.Matrix([0, k]),
                                parameters={"k": {"range": [-1, 1]}, "w": {"sign": "positive"}},
                                feedback={"poles": ["-w", "-2*w"]})
    shown_model = model._repr_markdown_()
    assert "| $k$ | real | [-1, 1]" in shown_model and "A = " in shown_model
    design = derive(model)
    shown = design._repr_markdown_()
    assert sp.latex(design.feedback.gain) in shown
    assert "valid when:" in shown and sp.latex(design.feedback.valid_when[0]) in shown
