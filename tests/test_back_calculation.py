"""Back-calculation anti-windup with several inputs, in the emitted Python and C controllers.

Law (common practice; Astrom and Hagglund's tracking anti-windup, from memory, written per input
channel): q[k+1] = q[k] + T (e[k] - pinv(Ki) (u[k] - u_wanted[k]) / Tt). The reference is the
independent recursion of tests/controller_reference.py (numpy.linalg.pinv for the pseudo-inverse);
the C controller computes (Ki^T Ki)^-1 Ki^T itself at init. Both must agree with it to 1e-9.
"""
import importlib.util

import numpy as np
import pytest

from controller_reference import simulate
from symgain.design import derive
from symgain.emit import emit
from symgain.model import model_from_text

TWIN = """
name = "twin_drive"
[parameters]
g = { sign = "positive", range = [0.5, 2], nominal = 1 }
[plant]
states  = ["x", "v"]
inputs  = ["F1", "F2"]
outputs = ["x"]
A = [["0", "1"], ["0", "-1"]]
B = [["0.2", "0"], ["g", "2"]]
[discrete]
sample_time = "0.01"
[integral]
z_poles = ["0.9", "0.92", "0.94"]
input_direction = ["1", "1"]
anti_windup = "back_calculation"
tracking_time = "0.05"
[input_limits]
F1 = { min = "-2", max = "2" }
F2 = { min = "-3", max = "3", rate = "200" }
"""


@pytest.fixture(scope="module")
def twin():
    return derive(model_from_text(TWIN))


def test_python_back_calculation_two_inputs(twin, tmp_path):
    emit(twin, ["python"], tmp_path)
    spec = importlib.util.spec_from_file_location("emitted_twin", tmp_path / "twin_drive.py")
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    for g in (1.0, 1.7):
        ctl = module.Controller(g=g)
        assert ctl.Ki.shape == (2, 1) and ctl.ANTI_WINDUP == "back_calculation"
        us, ys, uc = simulate(twin, {"g": g}, 0.01, 600, [0.0, 0.0], np.array([0.5]), ctl)
        assert np.max(np.abs(uc - us)) < 1e-9 * np.max(np.abs(us))
        assert np.sum(np.abs(us[:, 0]) >= 2 - 1e-12) >= 3  # channel F1 saturates on this step
        assert abs(ys[-1, 0] - 0.5) < 1e-6  # integral action: no offset once settled


def test_c_back_calculation_two_inputs(twin, tmp_path):
    from test_controller_c import CC, _Recorder, _build, _run
    if CC is None:
        pytest.skip("no C compiler")
    for g in (1.0, 1.7):
        recorder = _Recorder(2)
        us, _, _ = simulate(twin, {"g": g}, 0.01, 600, [0.0, 0.0], np.array([0.5]), recorder)
        folder = tmp_path / f"g{g}"
        folder.mkdir()
        uc = _run(_build(twin, folder, {"g": g}, 0.01), recorder.fed)
        assert uc.shape == us.shape
        assert np.max(np.abs(uc - us)) < 1e-9 * np.max(np.abs(us))
        assert np.sum(np.abs(us[:, 0]) >= 2 - 1e-12) >= 3
