"""Mismatch robustness: designs for m_hat applied to a plant with m, worked by hand."""
import numpy as np
import pytest
import sympy as sp

from symgain.cli import main
from symgain.design import derive
from symgain.errors import ModelError
from symgain.model import Model, Parameter, TargetSpec
from symgain.model.toml_file import load_model
from symgain.analysis.robust import (ClosedLoop, analyze_mismatch, cross_check, pole_migration, ratio_ranges)

DEMO = "symgain/data/demo_conveyor.toml"


def _chain_of_integrators(n, poles):
    m = Parameter.declare("m", sign="positive", range=(1, 4), nominal=2, unit="kg")
    A = sp.zeros(n, n)
    for i in range(n - 1):
        A[i, i + 1] = 1
    B = sp.zeros(n, 1)
    B[n - 1] = 1 / m.symbol
    states = tuple(f"x{i}" for i in range(n))
    return Model(name="chain", parameters=(m,), states=states, inputs=("u",), A=A, B=B,
                 feedback=TargetSpec("poles", {"poles": poles}))


def test_double_integrator_stable_for_every_positive_ratio():
    # Worked by hand: m x'' = u, K = m_hat [w^2, 2 w] for poles -w, -w (here w = 1).
    # With r = m / m_hat the closed loop is s^2 + (2/r) s + 1/r: both coefficients are
    # positive for every r > 0, so a second-order polynomial is stable for all r > 0.
    analysis = analyze_mismatch(derive(_chain_of_integrators(2, (-1, -1))), ["m"])
    ranges = ratio_ranges(analysis)
    assert ranges["m"].exact == sp.Interval.open(0, sp.oo)
    assert ranges["m"].intervals == [(0.0, np.inf)]
    assert ranges["m"].declared_stable


def test_triple_integrator_stable_below_nine():
    # Worked by hand: m x''' = u with K = m_hat [1, 3, 3] for (s + 1)^3. With r = m / m_hat:
    # s^3 + (3/r) s^2 + (3/r) s + 1/r. Coefficients are positive; the cubic condition
    # a2 a1 > a3 a0 reads 9 / r^2 > 1 / r, that is r < 9. Stable exactly for 0 < r < 9.
    design = derive(_chain_of_integrators(3, (-1, -1, -1)))
    analysis = analyze_mismatch(design, ["m"])
    ranges = ratio_ranges(analysis)
    assert ranges["m"].exact == sp.Interval.open(0, 9)
    lo, hi = ranges["m"].around_one
    assert lo == 0.0 and hi == pytest.approx(9.0, rel=1e-9)
    # the declared range 1..4 kg with m_hat = 2 kg gives ratios 0.5..2: inside
    assert ranges["m"].declared == (0.5, 2.0) and ranges["m"].declared_stable
    # eigenvalues on either side of the boundary (numpy, independent of the polynomial)
    loop = ClosedLoop(design)
    below = np.linalg.eigvals(loop({"m": 2 * 8.9}, {"m": 2.0}))
    above = np.linalg.eigvals(loop({"m": 2 * 9.1}, {"m": 2.0}))
    assert below.real.max() < 0 < above.real.max()


def test_cross_check_agrees_with_eigenvalues():
    design = derive(_chain_of_integrators(3, (-1, -1, -1)))
    analysis = analyze_mismatch(design, ["m"])
    counts = cross_check(analysis, n_points=200, seed=1)
    assert counts["disagree"] == 0
    assert counts["agree"] + counts["marginal"] == 200
    assert 0 < counts["stable"] < counts["agree"]  # both verdicts occur (ratios 0.05..20)


def test_demo_lag_mismatch_exact_equals_numeric():
    analysis = analyze_mismatch(derive(load_model(DEMO)), ["m", "tau"])
    ranges = ratio_ranges(analysis)
    exact = ranges["tau"].exact
    assert isinstance(exact, sp.Interval) and exact.left == 0
    assert float(exact.right) == pytest.approx(ranges["tau"].around_one[1], rel=1e-9)
    # just inside and outside the exact bound, eigenvalues agree
    loop = ClosedLoop(analysis.design)
    nominal = analysis.design.model.nominal_values()
    for factor, stable in ((0.999, True), (1.001, False)):
        true = dict(nominal, tau=nominal["tau"] * float(exact.right) * factor)
        assert (np.linalg.eigvals(loop(true, nominal)).real.max() < 0) == stable
    assert cross_check(analysis, n_points=100)["disagree"] == 0


def test_pole_migration_reaches_design_poles_at_nominal():
    design = derive(load_model(DEMO))
    values, poles = pole_migration(design, "m", count=8)
    assert poles.shape == (8, 3)
    nominal = design.model.nominal_values()
    target = [float(c) for c in sp.Poly(design.feedback.target.polynomial.subs(
        {p.symbol: nominal[p.name] for p in design.model.parameters}), sp.Symbol("s")).all_coeffs()]
    at = ClosedLoop(design)(nominal, nominal)
    assert np.allclose(np.poly(at), target, rtol=1e-9)
    # the migration passes through the design poles when the true m equals the estimate
    values, poles = pole_migration(design, "m", count=36)  # 5..40 kg in steps of 1: includes 12
    k = int(np.argmin(np.abs(values - nominal["m"])))
    assert np.allclose(np.poly(poles[k]).real, target, rtol=1e-9)


def test_mismatch_of_a_design_knob_is_refused():
    with pytest.raises(ModelError, match="design knob"):
        analyze_mismatch(derive(load_model(DEMO)), ["w"])


def test_robust_command(tmp_path, capsys):
    code = main(["robust", DEMO, "--mismatch", "tau", "--points", "50", "-o", str(tmp_path), "--quiet"])
    out = capsys.readouterr()
    assert code == 0
    assert "stable ratio r_tau = tau/tau_hat, exact: 0 < r_tau < " in out.out
    assert "loop analysed: state feedback u = -K x" in out.out
    assert (tmp_path / "sorting_conveyor-poles.png").stat().st_size > 10000
    assert out.err == ""


def test_free_gains_are_settled_with_a_note_and_refused_by_the_library(tmp_path):
    """A design with free gains (a family): the command settles them and says so; the API refuses."""
    import subprocess
    import sys
    from pathlib import Path

    from symgain.analysis.robust import analyze_mismatch
    from symgain.design import derive
    from symgain.errors import DesignError
    from symgain.model.toml_file import load_model

    model = Path(__file__).parent.parent / "examples" / "twin_thruster_boat.toml"
    done = subprocess.run([sys.executable, "-m", "symgain", "robust", str(model), "--mismatch", "m", "--quiet",
                           "-o", str(tmp_path)],
                          capture_output=True, text=True, cwd=Path(__file__).parent.parent)
    assert done.returncode == 0, done.stderr
    assert "note: free gain k_21 = 0 for this analysis" in done.stdout
    with pytest.raises(DesignError, match="k_21"):
        analyze_mismatch(derive(load_model(model)), ["m"])
