"""Short sample periods: the emitted gains keep their digits (symgain.emit.stable_forms).

Reference: the symbolic gains evaluated by mpmath at 40 digits (tests/emit_helpers.reference),
and the Taylor remainders (exp(x) - sum_{j<k} x^j/j!)/x^k etc. evaluated by mpmath at 50 digits
(their definition; the phi functions of exponential integrators, common practice). The naive
evaluation of the same closed forms is measured too, to show what the rewrite repairs.
"""
import shutil
from pathlib import Path

import mpmath
import numpy as np
import pytest
import sympy as sp

from emit_helpers import all_values, normwise_error, reference, relative_error
from symgain.design import derive
from symgain.emit.common import design_functions
from symgain.emit.python import python_module
from symgain.emit.stable_forms import CosRemainder, ExpRemainder, SinRemainder, stable_form
from symgain.model import model_from_text

EXAMPLE = Path(__file__).resolve().parent.parent / "examples" / "sampled_stage.toml"


@pytest.fixture(scope="module")
def short_stage():
    """sampled_stage with the sample period allowed down to 10 us (T c/m down to 2e-6)."""
    text = EXAMPLE.read_text().replace("range = [0.001, 0.01]", "range = [1e-5, 0.01]")
    return derive(model_from_text(text))


def _points(design, T, n=40):
    values = all_values(design, design_functions(design)[0], n, seed=3)
    values["T"] = np.full(n, T)
    return values


@pytest.mark.parametrize("T", [1e-4, 1e-5, 1e-2])
def test_python_gains_at_short_periods(short_stage, T):
    namespace = {}
    exec(python_module(short_stage), namespace)
    values = _points(short_stage, T)
    worst_naive = 0.0
    for fn in design_functions(short_stage):
        ref = reference(fn, values)
        got = namespace[fn.name](**values)
        assert relative_error(got, ref) < 1e-12, fn.name
        f = sp.lambdify([p.symbol for p in short_stage.model.parameters], fn.matrix, "numpy")
        naive = np.array([f(*[values[p.name][i] for p in short_stage.model.parameters]) for i in range(40)],
                         dtype=float)
        worst_naive = max(worst_naive, relative_error(naive, ref))
    if T <= 1e-4:  # the closed forms as written lose most of their digits here
        assert worst_naive > 1e-6


CC = shutil.which("cc") or shutil.which("gcc")


@pytest.mark.skipif(CC is None, reason="no C compiler")
@pytest.mark.parametrize("precision,tolerance", [("double", 1e-12), ("single", 1e-6)])
def test_c_gains_at_short_period(short_stage, precision, tolerance, tmp_path):
    from test_emit_c import build_and_run

    values = _points(short_stage, 1e-4)
    for fn in design_functions(short_stage):
        folder = tmp_path / fn.name
        folder.mkdir()
        codes, got, _ = build_and_run(short_stage, fn, folder, "gains", precision, values)
        assert (codes == 0).all()
        ref = reference(fn, values)
        # single precision: entrywise relative error within about 8 float epsilons (1.2e-7 each)
        assert relative_error(got, ref) < tolerance, (fn.name, precision)


def test_emitted_source_holds_the_remainders(short_stage):
    from symgain.emit.c import c_files

    _, source = c_files(short_stage, precision="single")
    assert "static float exprem1_(float x)" in source and "expf(x)" in source
    text = python_module(short_stage)
    assert "def _exprem1(x):" in text


@pytest.mark.parametrize("kind,k", [(ExpRemainder, 1), (ExpRemainder, 2), (ExpRemainder, 4), (CosRemainder, 1),
                                    (CosRemainder, 2), (SinRemainder, 1)])
def test_remainder_helpers_against_mpmath(kind, k):
    from symgain.emit.python import PythonPrinter
    from symgain.emit.stable_forms import python_helpers

    namespace = {}
    exec("import numpy\n" + "\n".join(python_helpers([(kind, k)], PythonPrinter())), namespace)
    f = namespace[f"_{kind._c_name[:-1]}{k}"]
    xs = np.array([-3.5, -2.0, -1.999, -0.7, -1e-3, -1e-9, 0.0, 1e-12, 1e-4, 0.3, 1.5, 1.999, 2.0, 2.5, 3.0])
    got = f(xs)
    x = sp.Symbol("x")
    direct = kind(x, k).direct()
    with mpmath.workdps(50):
        ref = []
        for v in xs:
            if v == 0:  # the limit: first series coefficient
                ref.append(float(sp.limit(direct, x, 0)))
            else:
                ref.append(float(direct.evalf(50, subs={x: sp.Float(float(v), 50)})))
    ref = np.array(ref)
    assert np.max(np.abs(got - ref) / np.abs(ref)) < 1e-14


def test_rewrite_keeps_the_value():
    T, c, m, w = sp.symbols("T c m w", positive=True)
    expr = (T * c - m * (1 - sp.exp(-T * c / m))) / (T * (1 - sp.exp(-T * c / m))**2) + sp.cos(T * w)
    new = stable_form(expr, T)
    assert new.has(ExpRemainder) and new.has(CosRemainder)
    for point in ({T: sp.Rational(3, 10), c: 2, m: 3, w: 5}, {T: sp.Rational(1, 1000), c: 1, m: 4, w: 40}):
        assert abs(sp.N(new.subs(point), 30) - sp.N(expr.subs(point), 30)) < 1e-25


def test_check_passes_at_short_periods():
    """symgain check on a 1 kHz stage with integral action (T a parameter down to 0.5 ms): the gains
    are evaluated at 30 digits and the conditions in short-period form, so the check measures the
    formulas (against scipy.signal.place_poles and the target), not the round-off of evaluating them."""
    from symgain.analysis.check import check_design

    text = EXAMPLE.read_text()
    text = text.replace("range = [0.001, 0.01], nominal = 0.002", "range = [0.0005, 0.002], nominal = 0.001")
    text = text.replace('[feedback]\ndamping = "0.8"\nnatural_frequency = "w"\n',
                        '[integral]\npoles = ["-w", "-1.5*w", "-2*w"]\n').replace("[feedforward]\n", "")
    design = derive(model_from_text(text))
    assert design.integral is not None
    report = check_design(design, n_points=8)
    rows = report.points["integral"]
    assert report.passed and all(r.status == "ok" for r in rows), [r.reason for r in rows]
