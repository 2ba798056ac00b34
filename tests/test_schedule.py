"""Gain schedules: grid parsing, values against independent evaluations, invalid marks, files."""
import csv
import io
import warnings

import numpy as np
import pytest
import scipy.signal
import sympy as sp

from symgain.cli import main
from symgain.design import derive
from symgain.errors import ModelError
from symgain.model import Model, Parameter, TargetSpec
from symgain.model.toml_file import load_model
from symgain.analysis.evaluate import GainEvaluator, gain_functions
from symgain.analysis.schedule import compute_schedule, parse_axis, schedule_csv

DEMO = "symgain/data/demo_conveyor.toml"


@pytest.fixture(scope="module")
def demo():
    model = load_model(DEMO)
    return model, derive(model)


def test_parse_axis_forms(demo):
    model, _ = demo
    assert parse_axis("m=20:120:11", model).values.tolist() == list(np.linspace(20, 120, 11))
    assert parse_axis("m", model).values[[0, -1]].tolist() == [5.0, 40.0]
    assert parse_axis("c=0:15", model).values.size == 11
    for bad, msg in (("q=1:2:3", "unknown parameter"), ("m=5:1:3", "LOW must be below"),
                     ("m=1:2:1", "at least 2"), ("m=a:2:3", "expected a number"), ("m=1:2:3:4", "expected")):
        with pytest.raises(ModelError, match=msg):
            parse_axis(bad, model)


def test_schedule_equals_scipy_place_poles(demo):
    # outside reference: scipy.signal.place_poles at every grid point (poles distinct for Bessel)
    model, design = demo
    axes = [parse_axis("m=5:40:5", model), parse_axis("c=0.5:8:3", model)]
    sched = compute_schedule(design, axes)
    nominal = model.nominal_values()
    s = sp.Symbol("s")
    for i, m in enumerate(axes[0].values):
        for j, c in enumerate(axes[1].values):
            values = dict(nominal, m=m, c=c)
            subs = {p.symbol: values[p.name] for p in model.parameters}
            A = np.array(model.A.subs(subs), dtype=float)
            B = np.array(model.B.subs(subs), dtype=float)
            poles = np.roots([float(k) for k in sp.Poly(design.feedback.target.polynomial.subs(subs), s).all_coeffs()])
            with warnings.catch_warnings():
                warnings.simplefilter("ignore")
                ref = scipy.signal.place_poles(A, B, poles).gain_matrix.ravel()
            assert np.allclose(sched.gains[:, i, j], ref, rtol=1e-8), (m, c)
    assert sched.valid.all()


def test_gain_functions_broadcast_and_nominal(demo):
    model, design = demo
    funcs = gain_functions(design)
    m = np.linspace(5, 40, 7)
    out = funcs["K[F_cmd,x]"](m=m)
    nominal = model.nominal_values()
    assert np.allclose(out, m * nominal["tau"] * nominal["w"] ** 3)  # K_x = m tau w^3 read off the formula
    assert np.shape(funcs["K[F_cmd,F]"](m=m[:, None], c=np.array([1.0, 2.0]))) == (7, 2)


def _model_with_condition():
    b = Parameter.declare("b", sign="real", range=(-1, 1), nominal=0.5, unit="N/kg")
    return Model(name="signed_input", parameters=(b,), states=("p", "v"), inputs=("u",),
                 A=sp.Matrix([[0, 1], [0, 0]]), B=sp.Matrix([[0], [b.symbol]]),
                 feedback=TargetSpec("poles", {"poles": (-1, -2)}))


def test_invalid_points_are_marked_not_filled():
    model = _model_with_condition()
    design = derive(model)
    assert design.feedback.valid_when  # b = 0 makes the plant uncontrollable
    sched = compute_schedule(design, [parse_axis("b=-1:1:5", model)])
    assert sched.valid.tolist() == [True, True, False, True, True]
    rows = list(csv.DictReader(io.StringIO(schedule_csv(sched))))
    bad = rows[2]
    assert bad["valid"] == "no" and "b" in bad["failed_conditions"]
    assert bad["K_u_p"] == "" and bad["K_u_v"] == ""
    assert rows[0]["valid"] == "yes" and float(rows[0]["K_u_p"]) == pytest.approx(-2.0)  # K = [2/b, 3/b]


def test_evaluator_matches_sympy_evalf(demo):
    # the lambdified path against sympy's own arbitrary-precision evaluation of each formula
    model, design = demo
    evaluator = GainEvaluator(design)
    rng = np.random.default_rng(4)
    for _ in range(5):
        values = {p.name: float(rng.uniform(*p.range)) for p in model.parameters}
        gains, ok = evaluator(values)
        subs = {p.symbol: values[p.name] for p in model.parameters}
        exact = [float(e.expr.evalf(30, subs=subs)) for e in evaluator.entries]
        assert bool(ok) and np.allclose(gains, exact, rtol=1e-12)


def test_schedule_command_writes_three_files(tmp_path, capsys):
    code = main(["schedule", DEMO, "--over", "m=5:40:8", "--over", "c=0.5:8:4", "-o", str(tmp_path), "--quiet"])
    out = capsys.readouterr()
    assert code == 0 and out.err == ""
    names = sorted(p.name for p in tmp_path.iterdir())
    assert names == ["sorting_conveyor-schedule.csv", "sorting_conveyor-schedule.png",
                     "sorting_conveyor_schedule.c"]
    rows = list(csv.reader((tmp_path / "sorting_conveyor-schedule.csv").open()))
    assert len(rows) == 1 + 8 * 4


def test_unwritable_output_folder_exits_2(tmp_path, capsys):
    blocker = tmp_path / "file.txt"
    blocker.write_text("x")
    code = main(["schedule", DEMO, "--over", "m", "-o", str(blocker / "sub"), "--quiet"])
    assert code == 2
    assert "output folder" in capsys.readouterr().err


def test_three_axes_refused(capsys):
    code = main(["schedule", DEMO, "--over", "m", "--over", "c", "--over", "tau", "--quiet"])
    assert code == 2
