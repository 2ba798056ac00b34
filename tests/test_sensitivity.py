"""Partial derivatives of the gains: closed form against finite differences of the numeric gain."""
import json

import numpy as np
import pytest
import sympy as sp

from symgain.cli import main
from symgain.design import derive
from symgain.emit.json import design_to_json
from symgain.model.toml_file import load_model
from symgain.analysis.sensitivity import relative_sensitivities, sensitivity_table
from symgain.analysis.evaluate import GainEvaluator

DEMO = "symgain/data/demo_conveyor.toml"


@pytest.fixture(scope="module")
def demo():
    model = load_model(DEMO)
    return model, derive(model)


def test_derivatives_match_central_differences(demo):
    model, design = demo
    table = sensitivity_table(design)["feedback"]
    evaluator = GainEvaluator(design)
    rng = np.random.default_rng(2)
    points = [model.nominal_values()] + [{p.name: float(rng.uniform(*p.range)) for p in model.parameters}
                                         for _ in range(3)]
    for point in points:
        subs = {p.symbol: point[p.name] for p in model.parameters}
        for p in model.parameters:
            h = 1e-5 * max(abs(point[p.name]), 1e-3)
            up, _ = evaluator(dict(point, **{p.name: point[p.name] + h}))
            down, _ = evaluator(dict(point, **{p.name: point[p.name] - h}))
            numeric = (up - down) / (2 * h)
            for j in range(3):
                closed = float(table[(0, j, p.name)].evalf(subs=subs))
                assert closed == pytest.approx(float(numeric[j]), rel=1e-5, abs=1e-7 * max(1, abs(closed)))


def test_power_law_elasticity(demo):
    # K_x = m tau w^3: the relative sensitivity of a power law is its exponent (common practice)
    _, design = demo
    rel = relative_sensitivities(design)["feedback"]
    assert rel[(0, 0, "m")] == pytest.approx(1.0)
    assert rel[(0, 0, "tau")] == pytest.approx(1.0)
    assert rel[(0, 0, "w")] == pytest.approx(3.0)
    assert rel[(0, 0, "c")] == 0.0


def test_json_sensitivity_reads_back(demo):
    model, design = demo
    data = json.loads(design_to_json(design))
    sens = data["feedback"]["sensitivity"]
    assert set(sens) == {p.name for p in model.parameters}
    names = model.symbols
    for pname, matrix in sens.items():
        for j, text in enumerate(matrix[0]):
            read = sp.sympify(text, locals=names)
            assert sp.simplify(read - sp.diff(design.feedback.gain[0, j], names[pname])) == 0


def test_sensitivity_command(capsys):
    assert main(["sensitivity", DEMO, "--formulas"]) == 0
    out = capsys.readouterr().out
    assert "K[F_cmd,x]" in out and "+3.000" in out and "d K[F_cmd,x] / d w = 3*m*tau*w^2" in out
