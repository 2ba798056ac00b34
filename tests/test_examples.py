"""Every model in examples/ (and the built-in demo) derived and checked by independent routes.

* coefficient matching and Ackermann's formula agree symbolically (single-input feedback);
* det(sI - A + B K) by sympy's Matrix.det equals the target polynomial (small models);
* symgain.analysis.check.check_design passes (scipy.signal.place_poles inside);
* and, written out here without symgain.analysis.check: at a few parameter points the gain evaluated
  by sympy equals scipy.signal.place_poles for the target's numeric roots (when distinct), and
  numpy's eigenvalues of A - B K are the target roots.
"""
from importlib import resources
from pathlib import Path

import numpy as np
import pytest
import sympy as sp
from scipy import signal

from symgain.analysis.check import check_design
from symgain.design import derive
from symgain.model import S
from symgain.model.toml_file import load_model, model_from_text
from symgain.design.placement import ackermann

EXAMPLES = sorted((Path(__file__).resolve().parent.parent / "examples").glob("*.toml"))
IDS = [p.stem for p in EXAMPLES]
_designs = {}


def design_of(path):
    """Derive each example once per test session."""
    key = str(path)
    if key not in _designs:
        if path == "demo":
            text = resources.files("symgain.data").joinpath("demo_conveyor.toml").read_text()
            model = model_from_text(text, "demo_conveyor.toml")
        else:
            model = load_model(path)
        _designs[key] = derive(model)
    return _designs[key]


ALL = [*EXAMPLES, "demo"]
ALL_IDS = [*IDS, "demo"]


def test_there_are_examples():
    assert len(EXAMPLES) >= 3


def single_input_feedback(design):
    fb = design.feedback
    return fb is not None and design.model.B.cols == 1


@pytest.mark.parametrize("path", ALL, ids=ALL_IDS)
def test_coefficient_matching_equals_ackermann(path):
    design = design_of(path)
    if not single_input_feedback(design):
        pytest.skip("feedback is not single-input")
    model, fb = design.model, design.feedback
    K2 = ackermann(model.A, model.B, fb.target.polynomial)
    for e1, e2 in zip(fb.gain, K2):
        assert sp.cancel(sp.together(e1 - e2)) == 0


@pytest.mark.parametrize("path", ALL, ids=ALL_IDS)
def test_closed_loop_determinant_equals_target(path):
    design = design_of(path)
    model, fb = design.model, design.feedback
    if fb is None or model.n_states > 4:
        pytest.skip("symbolic determinant kept to models of at most 4 states")
    n = model.n_states
    char = (S * sp.eye(n) - model.A + model.B * sp.Matrix(fb.gain)).det(method="berkowitz")
    assert sp.cancel(sp.together(char - fb.target.polynomial)) == 0


@pytest.mark.parametrize("path", ALL, ids=ALL_IDS)
def test_check_design_passes(path):
    report = check_design(design_of(path), n_points=8, seed=1)
    assert report.passed
    for part, points in report.points.items():
        assert report.counts(part)["ok"] >= 1, part


def sample(model, rng):
    point = {}
    for p in model.parameters:
        value = rng.uniform(*p.range) if p.range else p.nominal
        point[p.symbol] = sp.Rational(str(round(value, 6)))
    return point


@pytest.mark.parametrize("path", ALL, ids=ALL_IDS)
def test_gain_against_scipy_place_poles_directly(path):
    design = design_of(path)
    model, fb = design.model, design.feedback
    if fb is None:
        pytest.skip("no feedback part")
    rng = np.random.default_rng(7)
    unique = model.B.cols == 1  # scipy's gain equals ours only when the gain is unique
    checked = 0
    for _ in range(4):
        point = sample(model, rng)
        point.update({g: sp.Rational(3) for g in fb.free_gains})  # any value of a free gain
        if not all(bool(c.xreplace(point)) for c in fb.valid_when):
            continue
        A = np.array(model.A.xreplace(point).evalf(30), dtype=float)
        B = np.array(model.B.xreplace(point).evalf(30), dtype=float)
        K = np.array(sp.Matrix(fb.gain).xreplace(point).evalf(30), dtype=float)
        coeffs = [complex(c.xreplace(point).evalf(30))
                  for c in sp.Poly(fb.target.polynomial, S).all_coeffs()]
        assert max(abs(c.imag) for c in coeffs) < 1e-12
        roots = np.roots([c.real for c in coeffs])
        scale = max(1.0, np.max(np.abs(roots)))
        gaps = [abs(x - y) for i, x in enumerate(roots) for y in roots[i + 1:]]
        if min(gaps) > 1e-3 * scale:
            if unique:
                ref = signal.place_poles(A, B, roots, rtol=1e-12, maxiter=100).gain_matrix
                np.testing.assert_allclose(K, ref, rtol=1e-6, atol=1e-9 * np.max(np.abs(ref)))
            eig = np.linalg.eigvals(A - B @ K)
            np.testing.assert_allclose(np.sort_complex(eig), np.sort_complex(roots),
                                       rtol=1e-6, atol=1e-8 * scale)
        else:
            # repeated roots move by about eps^(1/multiplicity): compare the polynomial instead
            powers = scale ** np.arange(len(roots) + 1)
            np.testing.assert_allclose(np.poly(A - B @ K) / powers, np.poly(roots).real / powers,
                                       rtol=1e-6, atol=1e-7)
        checked += 1
    assert checked >= 2
