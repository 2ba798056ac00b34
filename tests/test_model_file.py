"""Reading model files (symgain.model.toml_file) against the contract in the model-file reference.

Good files must give the matrices and targets written in them; bad files must raise one
SymgainError whose one-line message names the file, the key (and row/column of a matrix
entry) and what was found.
"""
import pytest
import sympy as sp

from symgain.errors import ExpressionError, ModelError, SymgainError
from symgain.model import S
from symgain.model.toml_file import load_model, model_from_text

BASE = '''name = "cart"
title = "a test cart"
[parameters]
m = { sign = "positive", range = [1, 2] }
c = { sign = "nonnegative", range = [0, 1], nominal = 0.25 }
w = { sign = "positive", range = [1, 3], role = "design" }
[plant]
states = ["p", "v"]
inputs = ["F"]
outputs = ["p"]
A = [["0", "1"], ["0", "-c/m"]]
B = [["0"], ["1/m"]]
[feedback]
poles = ["-w", "-2*w"]
'''


def load(text, name="cart.toml"):
    return model_from_text(text, name)


def error_of(text, name="cart.toml"):
    with pytest.raises(SymgainError) as err:
        load(text, name)
    msg = str(err.value)
    assert "\n" not in msg
    return err.value, msg


# --- good input -----------------------------------------------------------------------------------
def test_contract_example_reads_as_written():
    model = load(BASE)
    m, c, w = (model.symbols[k] for k in ("m", "c", "w"))
    assert model.name == "cart" and model.title == "a test cart"
    assert model.A == sp.Matrix([[0, 1], [0, -c / m]])
    assert model.B == sp.Matrix([[0], [1 / m]])
    assert model.C == sp.Matrix([[1, 0]])  # outputs named by state pick C (contract)
    assert model.feedback.kind == "poles"
    assert model.feedback.values["poles"] == (-w, -2 * w)


def test_signs_become_assumptions_and_defaults():
    model = load(BASE)
    assert model.symbols["m"].is_positive
    assert model.symbols["c"].is_nonnegative
    assert model.parameter("m").nominal == 1.5  # midpoint of range by default (contract)
    assert model.parameter("c").nominal == 0.25
    assert model.parameter("w").role == "design"
    assert model.parameter("m").role == "plant"


def test_numbers_are_exact():
    model = load(BASE.replace('"-c/m"', '"-0.1*c/m"').replace('["0"], ["1/m"]', '[0], [0.5]'))
    m, c = model.symbols["m"], model.symbols["c"]
    assert model.A[1, 1] == -sp.Rational(1, 10) * c / m
    assert model.B[1, 0] == sp.Rational(1, 2)


def test_power_with_caret():
    model = load(BASE.replace('"-c/m"', '"-c/m^2"'))
    assert model.A[1, 1] == -model.symbols["c"] / model.symbols["m"] ** 2


def test_polynomial_and_prototype_targets():
    model = load(BASE.replace('poles = ["-w", "-2*w"]', 'polynomial = "s^2 + 3*w*s + 2*w^2"'))
    w = model.symbols["w"]
    assert sp.expand(model.feedback.values["polynomial"] - (S**2 + 3 * w * S + 2 * w**2)) == 0
    model = load(BASE.replace('poles = ["-w", "-2*w"]', 'prototype = "Bessel"\nbandwidth = "w"'))
    assert model.feedback.values["prototype"] == "bessel"


def test_settling_target_with_extra_poles():
    text = BASE.replace('poles = ["-w", "-2*w"]', 'settling_time = "2"\novershoot = "0.1"')
    model = load(text)
    assert model.feedback.kind == "settling"
    assert model.feedback.values["overshoot"] == sp.Rational(1, 10)


def test_load_model_from_disk(tmp_path):
    path = tmp_path / "cart.toml"
    path.write_text(BASE)
    assert load_model(path).source == str(path)


# --- bad input: each message names file and key ---------------------------------------------------
def test_undeclared_symbol_names_row_and_column():
    err, msg = error_of(BASE.replace('"-c/m"', '"-c/q"'))
    assert isinstance(err, ExpressionError)
    assert msg.startswith("cart.toml: plant.A[1][1]:")
    assert "'q'" in msg


def test_undeclared_symbol_in_poles():
    _, msg = error_of(BASE.replace('"-2*w"', '"-2*omega"'))
    assert msg.startswith("cart.toml: feedback.poles[1]:") and "omega" in msg


def test_non_square_a():
    _, msg = error_of(BASE.replace('A = [["0", "1"], ["0", "-c/m"]]',
                                   'A = [["0", "1", "0"], ["0", "-c/m", "1"]]'))
    assert msg.startswith("cart.toml: plant.A:") and "square" in msg and "2x3" in msg


def test_ragged_matrix_row():
    _, msg = error_of(BASE.replace('["0", "-c/m"]]', '["0"]]'))
    assert msg.startswith("cart.toml: plant.A[1]:")


def test_b_with_wrong_number_of_rows():
    _, msg = error_of(BASE.replace('B = [["0"], ["1/m"]]', 'B = [["0"], ["1/m"], ["1"]]'))
    assert msg.startswith("cart.toml: plant.B:") and "2 rows" in msg and "found 3" in msg


def test_code_injection_is_refused_and_not_run(tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    _, msg = error_of(BASE.replace('"1/m"', '''"__import__('os').system('touch PWNED')"'''))
    assert msg.startswith("cart.toml: plant.B[1][0]:") and "refused" in msg
    assert not (tmp_path / "PWNED").exists()


@pytest.mark.parametrize("text", ["m.__class__", "m.__class__.__mro__", "(lambda: 1)()", "[m][0]",
                                  "m if m else c", "getattr(m, 'x')"])
def test_non_math_syntax_is_refused(text):
    _, msg = error_of(BASE.replace('"-c/m"', f'"{text}"'))  # none of the texts holds a '"'
    assert msg.startswith("cart.toml: plant.A[1][1]: refused")


def test_power_tower_is_refused():
    _, msg = error_of(BASE.replace('"-c/m"', '"9**9**9**9"'))
    assert msg.startswith("cart.toml: plant.A[1][1]:")


def test_toml_syntax_error_names_the_line():
    text = BASE.replace("[plant]", "[plant")  # line 7 of BASE
    err, msg = error_of(text)
    assert msg.startswith("cart.toml:")
    assert "line 7" in msg


def test_missing_file(tmp_path):
    with pytest.raises(ModelError) as err:
        load_model(tmp_path / "absent.toml")
    assert "absent.toml" in str(err.value) and "no such" in str(err.value)


def test_unknown_prototype_names_key():
    _, msg = error_of(BASE.replace('poles = ["-w", "-2*w"]', 'prototype = "elliptic"\nbandwidth = "w"'))
    assert msg.startswith("cart.toml: feedback.prototype:") and "elliptic" in msg


def test_two_targets_at_once():
    _, msg = error_of(BASE.replace('poles = ["-w", "-2*w"]', 'poles = ["-w", "-2*w"]\npolynomial = "s^2+1"'))
    assert msg.startswith("cart.toml: feedback:") and "exactly one" in msg


def test_unknown_top_level_key():
    _, msg = error_of(BASE + '[feedbak]\npoles = ["-1", "-2"]\n')
    assert "feedbak" in msg


def test_reserved_parameter_name():
    _, msg = error_of(BASE.replace("w = {", "s = {").replace('"-w", "-2*w"', '"-1", "-2"'))
    assert msg.startswith("cart.toml: parameters.s:") and "reserved" in msg


def test_nominal_outside_range():
    _, msg = error_of(BASE.replace("nominal = 0.25", "nominal = 5"))
    assert msg.startswith("cart.toml: parameters.c:") and "outside" in msg


def test_sign_contradicted_by_range():
    _, msg = error_of(BASE.replace('m = { sign = "positive", range = [1, 2] }',
                                   'm = { sign = "positive", range = [-1, 2] }'))
    assert msg.startswith("cart.toml: parameters.m:")


def test_state_name_clashing_with_parameter():
    _, msg = error_of(BASE.replace('states = ["p", "v"]', 'states = ["p", "m"]'))
    assert "clashes" in msg and "'m'" in msg
