"""Figures of a simulation campaign: outputs and inputs against time, one PNG per scenario.

Each panel shows the envelope (lowest to highest value at each time) over
every sampled plant whose loop settles, the plants that do not settle as
thin dotted lines (the axes follow the settled ones), the nominal plant in
black, the worst point in red, the reference dashed, the actuator limits as
red dashed lines, the steady-state error limit as green dashed lines and the
settling-time requirement as a dotted vertical line.
"""
from __future__ import annotations

import numpy as np

from ...emit.plots import new_figure

__all__ = ["scenario_figure"]


def _envelope(series):
    stack = np.vstack(series)
    with np.errstate(all="ignore"):
        return np.nanmin(stack, axis=0), np.nanmax(stack, axis=0)


def _limits_of(values, extra=()):
    finite = np.concatenate([v[np.isfinite(v)] for v in values] + [np.asarray(extra, dtype=float)])
    if finite.size == 0:
        return None
    low, high = float(finite.min()), float(finite.max())
    pad = 0.08 * (high - low or max(abs(high), 1.0))
    return low - pad, high + pad


def scenario_figure(campaign, case_index: int, title: str):
    """Outputs (top panels) and inputs (bottom panels) of one scenario over every point."""
    setup = campaign.setup
    runs = [r for r in campaign.runs_of(case_index) if r.trace is not None]
    case = setup.cases[case_index]
    worst = max(campaign.runs_of(case_index), key=lambda r: (*r.score, -r.point))
    outputs, inputs = list(setup.outputs), list(setup.inputs)
    panels = len(outputs) + len(inputs)
    fig = new_figure(9.0, 1.2 + 2.3 * panels)
    axes = fig.subplots(panels, 1, sharex=True, squeeze=False)[:, 0]
    def settles(run):
        return not run.trace.diverged and all(m.passed for m in run.rows if m.name == "settles")

    kept = [r for r in runs if settles(r)]
    unsettled = [r for r in runs if not settles(r)]
    nominal = next((r for r in runs if r.point == 0), None)
    for j, name in enumerate(outputs):
        ax = axes[j]
        t = runs[0].trace.t if runs else np.zeros(1)
        if kept:
            low, high = _envelope([r.trace.y[:, j] for r in kept])
            ax.fill_between(t, low, high, color="tab:blue", alpha=0.25, lw=0,
                            label=f"envelope over the {len(kept)} plants that settle")
        others = [r for r in unsettled if r is not worst]
        for n, run in enumerate(others):
            ax.plot(t, run.trace.y[:, j], color="tab:purple", lw=0.6, ls=":", alpha=0.5,
                    label=f"{len(unsettled)} plants that do not settle" if n == 0 else None)
        ref = runs[0].trace.r[:, j] if runs else None
        if ref is not None and np.any(ref):
            ax.plot(t, ref, color="0.35", ls="--", lw=1.2, label="reference")
        if nominal is not None:
            ax.plot(t, nominal.trace.y[:, j], color="black", lw=1.8, label="nominal plant")
        if worst.trace is not None and worst is not nominal:
            ax.plot(t, worst.trace.y[:, j], color="tab:red", lw=1.6,
                    label=f"worst: {setup.points[worst.point].label}"
                    + (" (does not settle; clipped)" if worst in unsettled else ""))
        shown = kept + [r for r in (nominal,) if r is not None]
        lim = _limits_of([r.trace.y[:, j] for r in shown] + ([ref] if ref is not None else []), [0.0])
        if lim:
            ax.set_ylim(*lim)
        sse = setup.limits.get("steady_state_error")
        if sse is not None and runs:
            target = float(runs[0].trace.r[-1, j])
            for k, edge in enumerate((target - sse, target + sse)):
                ax.axhline(edge, color="tab:green", ls="--", lw=1.0,
                           label="steady-state error limit" if k == 0 else None)
        if setup.limits.get("settling_time") is not None:
            event = case.reference_time if case.reference is not None and np.any(case.reference) else 0.0
            ax.axvline(event + setup.limits["settling_time"], color="tab:green", ls=":", lw=1.5,
                       label="settling-time requirement")
        ax.set_ylabel(f"output {name}" + (" (deviation)" if setup.plant.nonlinear else ""))
        ax.grid(True, alpha=0.3)
        if j == 0:
            ax.legend(loc="best", fontsize=8)
    for i, name in enumerate(inputs):
        ax = axes[len(outputs) + i]
        if runs:
            tu = runs[0].trace.t[:-1]
            if kept:
                low, high = _envelope([r.trace.u[:, i] for r in kept])
                ax.fill_between(tu, low, high, color="tab:orange", alpha=0.3, lw=0, step="post",
                                label="envelope (plants that settle)")
            others = [r for r in unsettled if r is not worst]
            for n, run in enumerate(others):
                ax.step(tu, run.trace.u[:, i], where="post", color="tab:purple", lw=0.6, ls=":", alpha=0.5,
                        label="plants that do not settle" if n == 0 else None)
            if nominal is not None:
                ax.step(tu, nominal.trace.u[:, i], where="post", color="black", lw=1.5, label="nominal plant")
            if worst.trace is not None and worst is not nominal:
                ax.step(tu, worst.trace.u[:, i], where="post", color="tab:red", lw=1.3, label="worst point")
        extra = []
        low_lim, high_lim = setup.input_range.get(name, (None, None))
        for value, word in ((low_lim, "min"), (high_lim, "max")):
            if value is not None and np.isfinite(value):
                ax.axhline(value, color="tab:red", ls="--", lw=1.2, label=f"actuator {word} {value:g}")
                extra.append(value)
        shown = kept + [r for r in (nominal,) if r is not None]
        lim = _limits_of([r.trace.u[:, i] for r in shown] or [np.zeros(1)], extra)
        if lim:
            ax.set_ylim(*lim)
        ax.set_ylabel(f"input {name}" + (" (deviation)" if setup.plant.nonlinear else ""))
        ax.grid(True, alpha=0.3)
        ax.legend(loc="best", fontsize=8)
    axes[-1].set_xlabel("time [s]")
    how = "controller at nominal values" if setup.gains == "nominal" else "controller scheduled on the true values"
    fig.suptitle(f"{title}\nscenario '{case.name}': {how}, sampled every {case.T:.3g} s", fontsize=12)
    fig.tight_layout()
    return fig
