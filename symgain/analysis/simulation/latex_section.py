r"""The simulation section of the LaTeX report: how the loop was run, the figures, a pass/fail table.

The LaTeX emitter prints what it is given: :func:`simulation_section` turns a
finished campaign into lines of LaTeX (``\includegraphics`` of the figures
written beside the report), which ``latex_report(design, extra_sections=...)``
places before the safety caution.

>>> from symgain.analysis.simulation.latex_section import _cell
>>> _cell(0.163, "overshoot"), _cell(float("inf"), "settling_time")
('16.3\\,\\%', 'not settled')
"""
from __future__ import annotations

import numpy as np

from ...emit.latex_layout import text
from .tables import metric_title

__all__ = ["simulation_section", "simulation_for_report", "MAX_ROWS"]

MAX_ROWS = 40


def _cell(value: float, name: str) -> str:
    if not np.isfinite(value):
        return "not settled" if name in ("settling_time", "settles") else "unbounded"
    if name == "overshoot":
        return f"{100 * value:.1f}" + r"\,\%"
    return f"{value:.3g}"


def _requirements(setup) -> list[str]:
    rows = []
    words = {"settling_time": "settling time (2 %)", "overshoot": "overshoot",
             "steady_state_error": "steady-state error"}
    for key, word in words.items():
        value = setup.limits.get(key)
        if value is not None:
            rows.append(f"{word} at most " + (f"{100 * value:g} %" if key == "overshoot" else
                                              f"{value:g}" + (" s" if key == "settling_time" else "")))
    rows += [f"peak input {name} at most {value:g}" for name, value in setup.peak_limits.items()]
    return rows


def simulation_section(campaign, figures: list[str]) -> list[str]:
    """LaTeX lines: method, requirements, one figure and one table per scenario."""
    setup = campaign.setup
    plant = ("the nonlinear equations of motion (states, outputs and inputs shown as deviations from "
             "the equilibrium)" if setup.plant.nonlinear else "the linear plant")
    required = _requirements(setup)
    out = [r"\section{Closed-loop simulation}",
           text(f"The controller of the emitted Python module (its Controller class, the code that runs) "
                f"was simulated in closed loop on {plant}, with the actuator limits, "
                f"at the nominal values, {sum(p.kind == 'corner' for p in setup.points)} corners of the declared "
                f"ranges and {sum(p.kind == 'sampled' for p in setup.points)} seeded Latin-hypercube points "
                f"(seed {setup.seed}); controller gains: {setup.gains}. Between samples the input is held. "
                "A loop that does not settle within the run always fails. ")
           + text("Requirements: " + "; ".join(required) + "." if required else "No requirements were declared."),
           text(f"Result: {'every run meets the requirements' if campaign.passed else 'a requirement fails'}; "
                f"worst point: {setup.points[campaign.worst.point].label} "
                f"in scenario '{setup.cases[campaign.worst.case].name}'.")]
    for k, case in enumerate(setup.cases):
        runs = campaign.runs_of(k)
        out += [r"\subsection{Scenario: " + text(case.name) + "}",
                text(f"Run of {case.duration:.4g} s, controller sampled every {case.T:.3g} s."),
                r"\begin{center}", r"\includegraphics[width=0.9\textwidth]{" + figures[k] + "}", r"\end{center}"]
        keys = []
        for run in runs:
            for r in run.rows:
                if r.limit is not None and r.name != "settles" and (r.name, r.signal) not in keys:
                    keys.append((r.name, r.signal))
        shown = runs if len(runs) <= MAX_ROWS else [r for r in runs if r.point == 0 or not r.passed][:MAX_ROWS]
        cols = "l" + "r" * (len(keys) + 1) + "l"
        head = " & ".join(["point", "settles", *[text(metric_title(_Row(*key))) for key in keys], "result"])
        out += [r"{\footnotesize", r"\begin{center}", r"\begin{tabular}{" + cols + "}", r"\hline",
                head + r" \\ \hline"]
        for run in shown:
            point = setup.points[run.point]
            values = {(r.name, r.signal): r for r in run.rows}
            settles = all(r.passed for r in run.rows if r.name == "settles") and run.error is None
            cells = [text(point.label if point.kind != "nominal" else "nominal"), "yes" if settles else "no"]
            for key in keys:
                row = values.get(key)
                cells.append("--" if row is None else _cell(row.value, row.name) + ("" if row.passed else r"$^{*}$"))
            cells.append("pass" if run.passed else r"\textbf{FAIL}")
            out.append(" & ".join(cells) + r" \\")
        out += [r"\hline", r"\end{tabular}", r"\end{center}", "}",
                text("* fails its limit." + ("" if len(shown) == len(runs) else
                                             f" Shown: the nominal and the failing points ({len(shown)} of {len(runs)}).")
                     )]
    return out


class _Row:
    """A stand-in row for a column title."""

    def __init__(self, name, signal):
        self.name, self.signal = name, signal


def simulation_for_report(design, name: str, *, jobs=None) -> tuple[list[str], dict[str, bytes]]:
    """Run the model's simulation (its [simulation] table or the defaults); the report lines and
    the figures as ``<name>-simulation-<k>.png`` -> PNG bytes, to be written with the report
    (one set: nothing is written here)."""
    import tempfile

    from ...emit.plots import png_bytes
    from .campaign import prepare, run_campaign
    from .figures import scenario_figure

    with tempfile.TemporaryDirectory(prefix="symgain-controller-") as module_folder:
        campaign = run_campaign(prepare(design, module_folder), jobs=jobs)
    title = design.model.title or design.model.name
    figures = {f"{name}-simulation-{k + 1}.png": png_bytes(scenario_figure(campaign, k, title))
               for k in range(len(campaign.setup.cases))}
    return simulation_section(campaign, list(figures)), figures
