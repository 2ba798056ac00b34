"""Figures are written, non-empty, of the expected pixel size, and not blank."""
import io

import numpy as np
import pytest
from matplotlib.image import imread

from symgain.design import derive
from symgain.model.toml_file import load_model
from symgain.emit.plots import (DPI, png_bytes, png_size, pole_migration_figure, schedule_figure,
                           schedule_figure_size, step_figure)
from symgain.analysis.robust import ClosedLoop, pole_migration
from symgain.emit.files import write_atomic
from symgain.analysis.schedule import compute_schedule, parse_axis
from symgain.analysis.step_response import step_responses

DEMO = "symgain/data/demo_conveyor.toml"


@pytest.fixture(scope="module")
def demo():
    model = load_model(DEMO)
    return model, derive(model)


def _check_png(path, size):
    data = path.read_bytes()
    assert len(data) > 20000
    assert png_size(data) == (round(size[0] * DPI), round(size[1] * DPI))
    pixels = imread(io.BytesIO(data))
    assert pixels[..., :3].std() > 0.05  # something was drawn on the white page


@pytest.mark.parametrize("over", [["m=5:40:8"], ["m=5:40:8", "c=0.5:8:4"]])
def test_schedule_plot(tmp_path, demo, over):
    model, design = demo
    sched = compute_schedule(design, [parse_axis(o, model) for o in over])
    path = write_atomic(tmp_path / "s.png", png_bytes(schedule_figure(sched)))
    _check_png(path, schedule_figure_size(3))


def test_pole_migration_plot(tmp_path, demo):
    model, design = demo
    nominal = model.nominal_values()
    sweeps = {n: pole_migration(design, n, count=30) for n in ("m", "tau")}
    poles = np.linalg.eigvals(ClosedLoop(design)(nominal, nominal))
    path = write_atomic(tmp_path / "p.png", png_bytes(pole_migration_figure(model, sweeps, poles)))
    _check_png(path, (14.0, 6.0))


def test_step_plot(tmp_path, demo):
    model, design = demo
    runs = step_responses(design)
    assert len(runs) == 1 + 2**3  # nominal and the corners of m, c, tau (w is a design knob)
    assert abs(runs[0].output[-1] - 1.0) < 1e-3  # unit steady state at nominal
    path = write_atomic(tmp_path / "step.png", png_bytes(step_figure(model, runs, "x")))
    _check_png(path, (9.0, 5.5))


def test_plot_command(tmp_path, capsys):
    from symgain.cli import main

    assert main(["plot", DEMO, "--step", "-o", str(tmp_path), "--quiet"]) == 0
    _check_png(tmp_path / "sorting_conveyor-step.png", (9.0, 5.5))
    assert main(["plot", DEMO, "-o", str(tmp_path), "--quiet"]) == 2  # no figure chosen
