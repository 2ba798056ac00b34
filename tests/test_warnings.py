"""Warnings a design's user must see: each one triggered by one model and absent from another.

Facts of the trade behind them (common practice): a formula with a vanishing
denominator inside the operating range does not hold there; a gain far above
what the plant's own matrices and target poles call for means a nearly
uncontrollable direction (an ill-conditioned design).
"""
from __future__ import annotations

import json

import pytest

from symgain.design import derive
from symgain.design.diagnostics import condition_can_fail, design_warnings
from symgain.errors import DesignError
from symgain.model.toml_file import model_from_text

from test_all_commands import run

CONDITION = '''
name = "lever"
[parameters]
k = { sign = "positive", range = [KLOW, KHIGH] }
m = { sign = "positive", range = [2, 4] }
[plant]
states = ["p", "v"]
inputs = ["F"]
A = [["0", "1"], ["0", "0"]]
B = [["0"], ["k - m"]]
[feedback]
poles = ["-1", "-2"]
'''


def _model(text):
    return model_from_text(text, "test.toml")


def test_condition_that_can_fail_inside_the_ranges_is_reported():
    design = derive(_model(CONDITION.replace("KLOW", "1").replace("KHIGH", "3")))
    warnings = design_warnings(design)
    assert any("k - m != 0 can fail inside the declared ranges" in w for w in warnings), warnings
    assert any("found by sampling" in w or "found by sign analysis" in w for w in warnings)


def test_condition_that_holds_on_the_ranges_is_not_reported():
    design = derive(_model(CONDITION.replace("KLOW", "5").replace("KHIGH", "6")))
    assert design.valid_when  # the condition exists ...
    assert not design_warnings(design)  # ... but cannot fail for k in [5, 6], m in [2, 4]


def test_sign_analysis_decides_a_definite_condition():
    import sympy as sp

    model = _model(CONDITION.replace("KLOW", "5").replace("KHIGH", "6"))
    k, m = model.symbols["k"], model.symbols["m"]
    assert condition_can_fail(sp.Ne(k - m, 0), model) == (False, "sign analysis")  # 5..6 against 2..4
    assert condition_can_fail(sp.Ne(k - 2 * m, 0), model)[0]  # 5..6 against 4..8: can vanish


NAMED = CONDITION.replace("KLOW", "5").replace("KHIGH", "6")


@pytest.mark.parametrize("name,warned", [("K", True), ("Ki", True), ("L", True), ("kappa", False)])
def test_parameter_named_like_a_gain(name, warned):
    design = derive(_model(NAMED.replace("k =", f"{name} =").replace('"k - m"', f'"{name} - m"')))
    assert any(f"parameter '{name}' has the name of a gain" in w for w in design_warnings(design)) == warned


WEAK = '''
name = "two_valves"
[parameters]
e = { sign = "positive", range = [RANGE] }
[plant]
states = ["h1", "h2"]
inputs = ["q1", "q2"]
A = [["-1", "0"], ["0", "-2"]]
B = [["1", "1"], ["e", "1"]]
[feedback]
poles = ["-3", "-4"]
DIRECTION
'''


def test_ill_conditioned_gains_are_reported():
    text = WEAK.replace("RANGE", "1e-8, 2e-8").replace("DIRECTION", 'input_direction = ["1", "0"]')
    warnings = design_warnings(derive(_model(text)))
    assert any("ill-conditioned" in w for w in warnings), warnings


def test_well_conditioned_gains_are_not_reported():
    text = WEAK.replace("RANGE", "1e-8, 2e-8").replace("DIRECTION", 'input_direction = ["0", "1"]')
    assert not [w for w in design_warnings(derive(_model(text))) if "ill-conditioned" in w]


def test_no_pattern_chooses_the_best_conditioned_direction():
    # q1 alone reaches h2 only through e (tiny): the old rule (first unit vector) took it and gave
    # gains of order 1/e. q2 moves both levels well.
    design = derive(_model(WEAK.replace("RANGE", "1e-8, 2e-8").replace("DIRECTION", "")))
    assert list(design.feedback.extra["direction"]) != [1, 0]
    gains = design.feedback.gain.xreplace({design.model.symbols["e"]: 1.5e-8})
    assert max(abs(float(g)) for g in gains) < 100  # with f = [1, 0]: of order 1/e = 1e8
    assert not [w for w in design_warnings(design) if "ill-conditioned" in w]


def test_no_pattern_refuses_when_every_direction_is_ill_conditioned():
    text = WEAK.replace('"-2"', '"-1 - e"').replace('["e", "1"]', '["1", "1"]')
    text = text.replace("RANGE", "1e-9, 2e-9").replace("DIRECTION", "")
    with pytest.raises(DesignError, match="give a pattern or input_direction"):
        derive(_model(text))


def test_warnings_reach_stderr_and_json(tmp_path):
    path = tmp_path / "lever.toml"
    path.write_text(CONDITION.replace("KLOW", "1").replace("KHIGH", "3"))
    code, out, err = run(["derive", path, "--json"])
    assert code == 0
    assert any("can fail" in w for w in json.loads(out)["warnings"])
    assert err.startswith("symgain: warning: ") and len(err.splitlines()) == len(json.loads(out)["warnings"])
    code, out, err = run(["emit", path, "--to", "latex", "-o", tmp_path])
    assert "can fail inside the declared ranges" in (tmp_path / "lever.tex").read_text()
    path.write_text(CONDITION.replace("KLOW", "5").replace("KHIGH", "6"))
    code, out, err = run(["derive", path])
    assert code == 0 and err == ""
