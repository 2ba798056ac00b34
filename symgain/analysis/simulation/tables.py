"""Terminal text and CSV of a simulation campaign: one table per scenario and point, the worst point.

>>> from symgain.analysis.simulation.metrics import Metric
>>> print(format_rows([Metric("settling_time", "p", 2.5, 2.0, "s"), Metric("overshoot", "p", 0.04, 0.1)], 5.0))
    metric                value    limit   verdict
    settling time of p    2.5 s    2 s     FAIL
    overshoot of p        4.0 %    10.0 %  pass
"""
from __future__ import annotations

import csv
import io

import numpy as np

__all__ = ["format_rows", "format_campaign", "campaign_csv", "metric_title", "value_text", "worst_text"]

TITLES = {
    "settles": "settles, {s}",
    "settling_time": "settling time of {s}",
    "overshoot": "overshoot of {s}",
    "steady_state_error": "steady-state error of {s}",
    "peak_input": "peak input {s}",
    "time_saturated": "time at a limit, {s}",
}


def metric_title(row) -> str:
    return TITLES[row.name].format(s=row.signal)


def value_text(row, value: float, duration: float) -> str:
    """A value in engineering form: percent for overshoot, seconds with their unit."""
    if row.name == "settles":
        if row.passed:
            return "yes"
        return "no (diverged)" if not np.isfinite(value) else f"no (swings {value:.3g} x the 2 % band at the end)"
    if not np.isfinite(value):
        return "not settled" if row.name == "settling_time" else "unbounded"
    if row.name == "overshoot":
        return f"{100 * value:.1f} %"
    text = f"{value:.4g}"
    return f"{text} {row.unit}" if row.unit else text


def _limit_text(row, duration: float) -> str:
    if row.limit is None:
        return "-"
    if row.name == "settles":
        return f"within {duration:.3g} s"
    return value_text(row, row.limit, duration)


def _verdict(row) -> str:
    return {None: "-", True: "pass", False: "FAIL"}[row.passed]


def format_rows(rows, duration: float, indent: str = "    ") -> str:
    """The table of one run: metric, value, limit, verdict."""
    table = [("metric", "value", "limit", "verdict")]
    table += [(metric_title(r), value_text(r, r.value, duration), _limit_text(r, duration), _verdict(r)) for r in rows]
    widths = [max(len(t[i]) for t in table) for i in range(4)]
    lines = [indent + "  ".join(c.ljust(w + 2) for c, w in zip(t[:3], widths[:3])) + t[3] for t in table]
    return "\n".join(line.rstrip() for line in lines)


def _point_text(point) -> str:
    return "nominal plant" if point.kind == "nominal" else f"{point.label} ({point.kind})"


def worst_text(campaign) -> str:
    """One line naming the worst point and its worst metric."""
    setup = campaign.setup
    run = campaign.worst
    point = setup.points[run.point]
    where = f"{_point_text(point)} in scenario '{setup.cases[run.case].name}'"
    if run.error:
        return f"worst point: {where}: {run.error}"
    duration = setup.cases[run.case].duration
    unsettled = [r.signal for r in run.rows if r.name == "settles" and not r.passed]
    if unsettled:
        return f"worst point: {where}: {', '.join(unsettled)} did not settle within {duration:.3g} s"
    limited = [r for r in run.rows if r.limit is not None and r.name != "settles"]
    if not limited:
        slow = max((r for r in run.rows if r.name == "settling_time"), key=lambda r: r.value, default=None)
        return f"worst point: {where}" + (f": slowest settling, {metric_title(slow)} "
                                          f"{value_text(slow, slow.value, duration)} (no requirement declared)"
                                          if slow else "")
    bad = max(limited, key=lambda r: r.ratio)
    how = (f"{metric_title(bad)} {value_text(bad, bad.value, duration)} against {_limit_text(bad, duration)}")
    if np.isfinite(bad.ratio) and bad.limit:
        how += f" ({bad.ratio:.2f} times the limit)"
    return f"worst point: {where}: {how}"


def format_campaign(campaign, *, every_point: bool = True) -> str:
    """Every scenario's tables (every point, or nominal, the worst and failing points), then the summary."""
    setup = campaign.setup
    worst = campaign.worst
    out = []
    for k, case in enumerate(setup.cases):
        out.append(f"scenario '{case.name}': {case.duration:.4g} s, controller sampled every {case.T:.3g} s")
        for run in campaign.runs_of(k):
            point = setup.points[run.point]
            if not every_point and not (run.point == 0 or run is worst or not run.passed):
                continue
            mark = "  <- worst" if run is worst else ""
            out.append(f"  point {run.point}: {_point_text(point)}{mark}")
            out.append(f"    {run.error}" if run.error else format_rows(run.rows, case.duration))
    failed = sum(not r.passed for r in campaign.runs)
    total = len(campaign.runs)
    out.append(f"{total} runs ({len(setup.cases)} scenario{'s' if len(setup.cases) > 1 else ''} x "
               f"{len(setup.points)} points), {failed} failing a requirement; controller gains: {setup.gains}")
    out.append(worst_text(campaign))
    return "\n".join(out) + "\n"


def campaign_csv(campaign) -> str:
    """One line per scenario, point and metric."""
    setup = campaign.setup
    buf = io.StringIO()
    names = list(setup.nominal)
    writer = csv.writer(buf, lineterminator="\n")
    writer.writerow(["scenario", "point", "kind", *names, "metric", "signal", "value", "limit", "verdict"])
    for run in campaign.runs:
        point = setup.points[run.point]
        head = [setup.cases[run.case].name, run.point, point.kind, *[point.values[n] for n in names]]
        if run.error:
            writer.writerow([*head, "controller", "", "", "", run.error])
        for r in run.rows:
            writer.writerow([*head, r.name, r.signal, repr(r.value), "" if r.limit is None else repr(r.limit),
                             _verdict(r)])
    return buf.getvalue()
