"""The emitted C controller, compiled with gcc -std=c99 -Wall -Wextra -Werror -pedantic and run
in closed loop: it is fed the measurements of the independent reference loop
(tests/controller_reference.py: JSON gains, scipy.signal.cont2discrete) and must return the
same inputs to 1e-9 (double precision).
"""
import shutil
import subprocess

import numpy as np
import pytest

from controller_reference import simulate
from emit_helpers import EXAMPLES, design_of
from symgain.emit import emit

CC = shutil.which("gcc") or shutil.which("cc")
pytestmark = pytest.mark.skipif(CC is None, reason="no C compiler")


class _Recorder:
    """Stands in for the controller inside the reference loop: records what it is fed."""

    def __init__(self, m):
        self.fed, self.m = [], m

    def step(self, y, r):
        self.fed.append((np.array(y, dtype=float), np.array(r, dtype=float)))
        return np.zeros(self.m)


def _driver(design, values, T):
    model, name = design.model, design.model.name
    period = design.sampled.period if design.sampled is not None else None
    pname = str(period) if period is not None and not period.is_number else None
    args = ", ".join(repr(float(values[p.name])) for p in model.parameters if p.name != pname)
    width = model.n_outputs if design.estimator is not None else model.n_states
    p, m = model.n_outputs, model.n_inputs
    return f"""#include <stdio.h>
#include "{name}.h"
int main(void)
{{
    {name}_controller_t ctl;
    double y[{width}], r[{max(p, 1)}], u[{m}];
    int k, i, steps, rc = {name}_controller_init(&ctl, {T!r}{', ' + args if args else ''});
    if (rc != 0) {{ printf("init %d\\n", rc); return 1; }}
    if (scanf("%d", &steps) != 1) return 2;
    for (k = 0; k < steps; ++k) {{
        for (i = 0; i < {width}; ++i) if (scanf("%lf", &y[i]) != 1) return 2;
        for (i = 0; i < {p}; ++i) if (scanf("%lf", &r[i]) != 1) return 2;
        {name}_controller_step(&ctl, y, r, u);
        for (i = 0; i < {m}; ++i) printf("%.17g ", u[i]);
        printf("%d\\n", ctl.saturated[0]);
    }}
    return 0;
}}
"""


def _build(design, tmp_path, values, T):
    emit(design, ["c"], tmp_path)
    name = design.model.name
    (tmp_path / "driver.c").write_text(_driver(design, values, T))
    flags = ["-std=c99", "-Wall", "-Wextra", "-Werror", "-pedantic", "-O2"]
    subprocess.run([CC, *flags, "-o", str(tmp_path / "run"), str(tmp_path / "driver.c"),
                    str(tmp_path / f"{name}.c"), "-lm"], check=True, capture_output=True, text=True)
    return tmp_path / "run"


def _run(exe, fed):
    lines = [str(len(fed))] + [" ".join(repr(float(v)) for v in (*y, *r)) for y, r in fed]
    out = subprocess.run([str(exe)], input="\n".join(lines) + "\n", capture_output=True, text=True, check=True)
    rows = [line.split() for line in out.stdout.splitlines()]
    return np.array([[float(v) for v in row[:-1]] for row in rows])


CASES = [("sampled_stage", None, 400, [0.01]), ("sampled_stage", {"m": 5.5, "c": 1.5}, 400, [0.2]),
         ("sampled_mirror", None, 300, [0.012]), ("linear_stage", None, 1000, [0.01])]


@pytest.mark.parametrize("name,change,steps,ref", CASES, ids=[f"{c[0]}-{i}" for i, c in enumerate(CASES)])
def test_c_controller_in_closed_loop(name, change, steps, ref, tmp_path):
    design = design_of(next(p for p in EXAMPLES if p.endswith(f"{name}.toml")))
    values = design.model.nominal_values() | (change or {})
    T = values.get("T", 0.001 if name == "sampled_mirror" else 2e-4)
    recorder = _Recorder(design.model.n_inputs)
    # the reference loop runs on its own inputs; the recorder keeps the measurements it produced
    us, ys, _ = simulate(design, values, T, steps, [0.0, 0.0], np.array(ref), recorder)
    uc = _run(_build(design, tmp_path, values, T), recorder.fed)
    # the gains are printed in short-period stable forms (symgain.emit.stable_forms) and the
    # reference rounds 40-digit values: they agree to 1e-9 also on the large saturating step
    tol = 1e-9
    assert uc.shape == us.shape
    assert np.max(np.abs(uc - us)) < tol * max(1.0, np.max(np.abs(us)))


def test_c_init_refuses_bad_period_and_range(tmp_path):
    design = design_of(next(p for p in EXAMPLES if p.endswith("sampled_mirror.toml")))
    emit(design, ["c"], tmp_path)
    (tmp_path / "t.c").write_text("""#include <stdio.h>
#include "sampled_mirror.h"
int main(void)
{
    sampled_mirror_controller_t ctl;
    printf("%d %d %d\\n", sampled_mirror_controller_init(&ctl, 0.002, 3e-5, 1.2),
           sampled_mirror_controller_init(&ctl, 0.001, 9e-5, 1.2),
           sampled_mirror_controller_init(&ctl, 0.001, 3e-5, 1.2));
    return 0;
}
""")
    subprocess.run([CC, "-std=c99", "-Wall", "-Wextra", "-Werror", "-pedantic", "-o", str(tmp_path / "t"),
                    str(tmp_path / "t.c"), str(tmp_path / "sampled_mirror.c"), "-lm"], check=True)
    out = subprocess.run([str(tmp_path / "t")], capture_output=True, text=True, check=True).stdout.split()
    assert out == ["-1", "-2", "0"]


def test_c_current_form_estimator_in_closed_loop(tmp_path):
    """Current form in C: x_hat = x_bar + L (y - C x_bar), x_bar[k+1] = Phi x_hat + Gamma u (error matrix
    Phi - L C Phi); the same inputs as the independent recursion to 1e-9."""
    from pathlib import Path

    from symgain.design import derive
    from symgain.model import model_from_text

    text = (Path(__file__).resolve().parent.parent / "examples" / "sampled_stage.toml").read_text()
    text = text.replace('method = "zoh"', 'method = "zoh"\nestimator_form = "current"').replace(
        'name  = "sampled_stage"', 'name  = "stage_current"')
    design = derive(model_from_text(text))
    for change, r in ((None, 0.01), ({"m": 5.5, "c": 1.5, "T": 0.004}, 0.2)):
        values = design.model.nominal_values() | (change or {})
        recorder = _Recorder(1)
        us, ys, _ = simulate(design, values, values["T"], 400, [0.0, 0.0], np.array([r]), recorder)
        folder = tmp_path / ("nominal" if change is None else "changed")
        folder.mkdir()
        uc = _run(_build(design, folder, values, values["T"]), recorder.fed)
        assert uc.shape == us.shape
        assert np.max(np.abs(uc - us)) < 1e-9 * max(1.0, np.max(np.abs(us)))
        if change is None:
            assert abs(ys[-1, 0] - r) < 2e-4
        else:
            assert np.max(np.abs(us)) == pytest.approx(60.0)  # the large step saturates
