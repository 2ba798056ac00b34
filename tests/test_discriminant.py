"""A discriminant that changes sign inside the declared ranges: the emitted code refuses clearly.

The exact hold of a mass-spring-damper (common practice) writes its eigenvalues with
sqrt(c^2 - 4 k m); with c in [1, 6], k in [2, 4], m in [1, 2] the modes are real for some
points and oscillatory for others. Where c^2 - 4 k m < 0 the formulas as written are NaN in
real arithmetic, so the emitted Python raises ValueError naming the condition c**2 - 4*k*m >= 0
and the C function returns its code and leaves the matrix untouched. Where c^2 - 4 k m > 0 the
values are checked against scipy.signal.cont2discrete and scipy.signal.place_poles.
"""
import shutil

import numpy as np
import pytest
import scipy.signal

from symgain.design import derive
from symgain.emit.common import design_functions
from symgain.emit.python import python_module
from symgain.model import model_from_text

MSD = """
name = "msd"
[parameters]
m = { sign = "positive", range = [1, 2], nominal = 1.5 }
c = { sign = "positive", range = [1, 6], nominal = 5 }
k = { sign = "positive", range = [2, 4], nominal = 3 }
[plant]
states = ["x", "v"]
inputs = ["F"]
A = [["0", "1"], ["-k/m", "-c/m"]]
B = [["0"], ["1/m"]]
[discrete]
sample_time = "0.01"
[feedback]
z_poles = ["0.9", "0.95"]
"""


@pytest.fixture(scope="module")
def msd():
    return derive(model_from_text(MSD))


def _scipy(m, c, k):
    A, B = np.array([[0, 1], [-k / m, -c / m]]), np.array([[0], [1 / m]])
    ad, bd, *_ = scipy.signal.cont2discrete((A, B, np.eye(2), np.zeros((2, 1))), 0.01, method="zoh")
    return ad, bd, scipy.signal.place_poles(ad, bd, [0.9, 0.95]).gain_matrix


def test_python_refuses_where_the_discriminant_is_negative(msd):
    namespace = {}
    exec(python_module(msd), namespace)
    ad, bd, K = _scipy(1.5, 5.0, 3.0)  # c^2 - 4 k m = 7 > 0: real eigenvalues
    np.testing.assert_allclose(namespace["plant_Phi"](m=1.5, c=5.0, k=3.0), ad, rtol=1e-12)
    np.testing.assert_allclose(namespace["feedback_gain"](m=1.5, c=5.0, k=3.0), K, rtol=1e-8)
    with pytest.raises(ValueError, match=r"c\*\*2 - 4\*k\*m >= 0"):
        namespace["feedback_gain"](m=1.5, c=1.0, k=3.0)  # c^2 - 4 k m = -17 < 0
    out = namespace["plant_Gamma"](m=np.array([1.5, 1.5]), c=np.array([5.0, 1.0]), k=3.0, on_invalid="nan")
    assert np.isfinite(out[0]).all() and np.isnan(out[1]).all()
    with pytest.raises(ValueError, match=r"c\*\*2 - 4\*k\*m >= 0"):
        namespace["Controller"](c=1.0)


@pytest.mark.skipif((shutil.which("cc") or shutil.which("gcc")) is None, reason="no C compiler")
def test_c_returns_the_condition_code(msd, tmp_path):
    from test_emit_c import SENTINEL, build_and_run

    fn = next(f for f in design_functions(msd) if f.name == "feedback_gain")
    assert any(str(d) == "c**2 - 4*k*m" for d in fn.nonnegative)
    values = {"m": np.array([1.5, 1.5]), "c": np.array([5.0, 1.0]), "k": np.array([3.0, 3.0])}
    codes, got, paths = build_and_run(msd, fn, tmp_path, "msd", "double", values)
    expected = len(fn.conditions) + 1 + [str(d) for d in fn.nonnegative].index("c**2 - 4*k*m")
    assert codes[0] == 0 and codes[1] == expected
    np.testing.assert_allclose(got[0], _scipy(1.5, 5.0, 3.0)[2], rtol=1e-8)
    assert (got[1] == SENTINEL).all()
    assert "c**2 - 4*k*m < 0" in paths[0].read_text()
