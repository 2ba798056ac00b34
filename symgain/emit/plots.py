"""Figures for reports: gain schedules, closed-loop pole migration, step responses.

Built on matplotlib's object interface with the Agg canvas (no display, no
global pyplot state). Every figure has a fixed size in inches at ``DPI``, so
a PNG is ``width * DPI`` by ``height * DPI`` pixels.

>>> import io
>>> fig = new_figure(4, 3)
>>> ax = fig.add_subplot()
>>> _ = ax.plot([0, 1], [0, 1])
>>> buf = io.BytesIO(); fig.savefig(buf, format="png")
>>> png_size(buf.getvalue())
(600, 450)
"""
from __future__ import annotations

import io
import struct

import numpy as np
from matplotlib import colormaps
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.colors import Normalize
from matplotlib.figure import Figure
from matplotlib.cm import ScalarMappable

from .escape import plot_text

__all__ = ["DPI", "new_figure", "png_bytes", "png_size", "schedule_figure", "pole_migration_figure",
           "step_figure", "schedule_figure_size"]

DPI = 150
_STYLE = {"font.size": 11, "axes.titlesize": 12, "axes.labelsize": 11, "legend.fontsize": 9,
          "xtick.labelsize": 10, "ytick.labelsize": 10}


def new_figure(width: float, height: float) -> Figure:
    """A figure on an Agg canvas with the report style."""
    import matplotlib
    matplotlib.rcParams.update(_STYLE)
    fig = Figure(figsize=(width, height), dpi=DPI)
    FigureCanvasAgg(fig)
    return fig


def png_bytes(fig: Figure) -> bytes:
    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=DPI)
    return buf.getvalue()


def png_size(data: bytes) -> tuple[int, int]:
    """Width and height from a PNG's IHDR chunk."""
    if data[:8] != b"\x89PNG\r\n\x1a\n":
        raise ValueError("not a PNG")
    return struct.unpack(">II", data[16:24])


def _unit(model, name: str) -> str:
    unit = plot_text(model.parameter(name).unit)
    return f"{name} [{unit}]" if unit else name


def _title(model) -> str:
    return plot_text(model.title or model.name)


def _fixed_text(model, fixed: dict) -> str:
    parts = []
    for k, v in fixed.items():
        unit = plot_text(model.parameter(k).unit)
        parts.append(f"{k} = {v:g}" + (f" {unit}" if unit else ""))
    return ", ".join(parts)


def schedule_figure_size(n_gains: int) -> tuple[float, float]:
    return (8.0, 1.4 + 2.0 * n_gains)


def schedule_figure(schedule) -> Figure:
    """One panel per gain against the first scheduled parameter (shared x axis).

    With two scheduled parameters, each panel has one line per value of the
    second (at most seven, evenly picked). Invalid grid points are marked in red.
    """
    model = schedule.design.model
    entries, axes = schedule.entries, schedule.axes
    fig = new_figure(*schedule_figure_size(len(entries)))
    panels = fig.subplots(len(entries), 1, sharex=True, squeeze=False)[:, 0]
    x = axes[0].values
    if len(axes) == 2:
        second = axes[1]
        picks = np.unique(np.linspace(0, second.values.size - 1, min(7, second.values.size)).round().astype(int))
        cmap = colormaps["viridis"]
    for k, (ax, entry) in enumerate(zip(panels, entries)):
        if len(axes) == 1:
            y = np.where(schedule.valid, schedule.gains[k], np.nan)
            ax.plot(x, y, "o-", color="tab:blue", markersize=3.5, lw=1.6, label=entry.label)
            bad = ~schedule.valid
        else:
            for n, j in enumerate(picks):
                y = np.where(schedule.valid[:, j], schedule.gains[k][:, j], np.nan)
                unit = plot_text(model.parameter(second.name).unit)
                ax.plot(x, y, "o-", markersize=3, lw=1.4, color=cmap(n / max(1, len(picks) - 1)),
                        label=f"{second.name} = {second.values[j]:g}" + (f" {unit}" if unit else ""))
            bad = ~schedule.valid.all(axis=1)
        for xi in x[bad]:
            ax.axvline(xi, color="tab:red", alpha=0.35, lw=3)
        if bad.any():
            ax.plot([], [], color="tab:red", alpha=0.35, lw=3, label="invalid (a condition fails)")
        ax.set_ylabel(entry.label)
        ax.grid(True, alpha=0.3)
        if k == 0 and (len(axes) == 2 or bad.any()):
            ax.legend(loc="best", ncol=2 if len(axes) == 2 else 1)
    panels[-1].set_xlabel(_unit(model, axes[0].name))
    title = f"{_title(model)}: gains against {axes[0].name}"
    fixed = _fixed_text(model, schedule.fixed)
    fig.suptitle(title + (f"\nheld at nominal: {fixed}" if fixed else ""), fontsize=12)
    fig.tight_layout()
    return fig


def pole_migration_figure(model, sweeps: dict, nominal_poles: np.ndarray, discrete: bool = False) -> Figure:
    """Closed-loop poles as the true value of each parameter sweeps its range (estimate at nominal).

    ``sweeps``: name -> (true values, poles array of shape (count, n)). ``discrete``: poles in z
    (a sampled-data loop), drawn with the unit circle as the stability boundary.
    """
    fig = new_figure(7.0 * len(sweeps), 6.0)
    panels = fig.subplots(1, len(sweeps), squeeze=False)[0]
    for ax, (name, (values, poles)) in zip(panels, sweeps.items()):
        norm = Normalize(values.min(), values.max())
        cmap = colormaps["plasma"]
        for col in range(poles.shape[1]):
            ax.scatter(poles[:, col].real, poles[:, col].imag, c=values, cmap=cmap, norm=norm, s=9)
        ax.plot(nominal_poles.real, nominal_poles.imag, "kx", markersize=10, mew=2,
                label="design poles (true = estimate)")
        if discrete:
            angle = np.linspace(0.0, 2 * np.pi, 361)
            ax.plot(np.cos(angle), np.sin(angle), color="0.3", lw=1, ls="--")
            ax.set_aspect("equal", adjustable="datalim")
            unstable = np.abs(poles).max() >= 1
        else:
            ax.axvline(0.0, color="0.3", lw=1, ls="--")
            unstable = poles.real.max() >= 0
        ax.axhline(0.0, color="0.7", lw=0.8)
        nominal, unit = model.parameter(name).nominal, plot_text(model.parameter(name).unit)
        ax.set_title(f"true {name} over its range, controller assumes {name} = {nominal:g}"
                     + (f" {unit}" if unit else "")
                     + ("\n(some true values give an unstable loop)" if unstable else ""), fontsize=11)
        ax.set_xlabel("real part of z" if discrete else "real part [1/s]")
        ax.set_ylabel("imaginary part of z" if discrete else "imaginary part [rad/s]")
        ax.grid(True, alpha=0.3)
        ax.legend(loc="best")
        fig.colorbar(ScalarMappable(norm=norm, cmap=cmap), ax=ax, label=f"true {_unit(model, name)}")
    fig.suptitle(f"{_title(model)}\nclosed-loop pole migration under mismatch", fontsize=12)
    fig.tight_layout()
    return fig


def step_figure(model, runs, output_name: str, gains: str = "fixed") -> Figure:
    """Step responses: nominal in black, the corners of the ranges in colour."""
    fig = new_figure(9.0, 5.5)
    ax = fig.add_subplot()
    cmap = colormaps["tab10"]
    stable_peaks = []
    many = len(runs) > 9  # too many corners to name one by one: group them by verdict
    counts = {True: sum(r.stable for r in runs[1:]), False: sum(not r.stable for r in runs[1:])}
    for n, run in enumerate(runs):
        if run.label == "nominal":
            ax.plot(run.time, run.output, color="black", lw=2.4, label="nominal", zorder=5)
        elif many:
            first = run is next(r for r in runs[1:] if r.stable == run.stable)
            label = f"corners, {'stable' if run.stable else 'unstable'} ({counts[run.stable]})" if first else None
            ax.plot(run.time, run.output, color="tab:blue" if run.stable else "tab:red", lw=1.0,
                    alpha=0.6, ls="-" if run.stable else ":", label=label)
        else:
            label = plot_text(run.label) + ("" if run.stable else " (unstable)")
            ax.plot(run.time, run.output, color=cmap(n % 10), lw=1.3, label=label,
                    ls="-" if run.stable else ":")
        if run.stable:
            stable_peaks.append(np.max(np.abs(run.output)))
    top = 1.15 * max(stable_peaks + [1.0])
    ax.set_ylim(min(-0.05, -0.1 * top), top)
    ax.axhline(1.0, color="0.5", lw=0.8, ls="--")
    ax.set_xlabel("time [s]")
    ax.set_ylabel(f"output {plot_text(output_name)} (unit step in the reference)")
    ax.grid(True, alpha=0.3)
    ax.legend(loc="center left", bbox_to_anchor=(1.01, 0.5), fontsize=8, title="plant values")
    how = ("controller fixed at nominal values, plant at the corners of its ranges" if gains == "fixed"
           else "gains from the formulas at each corner")
    ax.set_title(f"{_title(model)}: closed-loop step response\n{how}", fontsize=12)
    fig.tight_layout()
    return fig
