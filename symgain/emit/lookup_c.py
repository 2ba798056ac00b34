"""A C lookup table of a gain schedule, with linear (1-D) or bilinear (2-D) interpolation.

The generated C99 has no dependencies beyond ``<math.h>`` (for ``NAN``). Its
header comment states the grid, the parameters held at nominal, and the worst
interpolation error against the exact formulas, measured on a grid
``REFINE`` times finer than the table. :func:`interpolate` is the same
interpolation in numpy; the tests compile the C and compare.

>>> import sympy as sp
>>> from symgain.model import Model, Parameter, TargetSpec
>>> from symgain.design import derive
>>> from symgain.analysis.schedule import compute_schedule, parse_axis
>>> m = Parameter.declare("m", sign="positive", range=(1, 3))
>>> model = Model(name="cart", parameters=(m,), states=("p", "v"), inputs=("F",),
...               A=sp.Matrix([[0, 1], [0, 0]]), B=sp.Matrix([[0], [1 / m.symbol]]),
...               feedback=TargetSpec("poles", {"poles": (-1, -2)}))
>>> sched = compute_schedule(derive(model), [parse_axis("m=1:3:5", model)])
>>> errors = interpolation_errors(sched)
>>> errors["K_F_p"].absolute < 1e-12   # K is linear in m: interpolation is exact
True
>>> "int cart_schedule(double m, double gains[CART_N_GAINS])" in lookup_table_c(sched)
True
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import sympy as sp

from ..analysis.evaluate import GainEvaluator
from ..analysis.schedule import GridAxis, Schedule
from ..model.identifiers import C_RESERVED
from .common import mangle, range_macro, range_test
from .escape import c_comment

__all__ = ["InterpolationError", "interpolate", "interpolation_errors", "lookup_table_c", "REFINE"]

REFINE = 8  # the error is measured on a grid this many times finer than the table


@dataclass(frozen=True)
class InterpolationError:
    """Worst interpolation error of one gain over the finer grid."""

    absolute: float
    relative: float  # absolute / largest |gain| on the table
    where: dict  # the parameter values where it occurs


def _cell(axis: GridAxis, x: np.ndarray):
    """Left node index and fraction in the cell (clamped to the grid)."""
    n = axis.values.size
    low, step = axis.values[0], (axis.values[-1] - axis.values[0]) / (n - 1)
    t = np.clip((np.asarray(x, dtype=float) - low) / step, 0.0, n - 1.0)
    i = np.minimum(t.astype(int), n - 2)
    return i, t - i


def interpolate(schedule: Schedule, points: dict) -> tuple[np.ndarray, np.ndarray]:
    """Interpolated gains ``(n_gains, *shape)`` and a mask of points whose cell touches no invalid node."""
    idx = [_cell(a, points[a.name]) for a in schedule.axes]
    table, valid = schedule.gains, schedule.valid
    if len(idx) == 1:
        (i, f), = idx
        corners = [((i,), 1 - f), ((i + 1,), f)]
    else:
        (i, f), (j, g) = idx
        corners = [((i, j), (1 - f) * (1 - g)), ((i + 1, j), f * (1 - g)),
                   ((i, j + 1), (1 - f) * g), ((i + 1, j + 1), f * g)]
    out = 0.0
    ok = True
    for node, weight in corners:
        out = out + weight * np.where(valid[node], table[(slice(None), *node)], 0.0)
        ok = ok & (valid[node] | (weight == 0))
    return np.asarray(out), np.asarray(ok)


def interpolation_errors(schedule: Schedule, refine: int = REFINE,
                         evaluator: GainEvaluator | None = None) -> dict[str, InterpolationError]:
    """Worst |interpolated - exact| per gain on a grid ``refine`` times finer (valid points only)."""
    evaluator = evaluator or GainEvaluator(schedule.design)
    fine_axes = [np.linspace(a.values[0], a.values[-1], (a.values.size - 1) * refine + 1)
                 for a in schedule.axes]
    mesh = np.meshgrid(*fine_axes, indexing="ij")
    points = {a.name: m for a, m in zip(schedule.axes, mesh)}
    exact, exact_ok = evaluator(points)
    approx, approx_ok = interpolate(schedule, points)
    ok = exact_ok & approx_ok
    out = {}
    for k, entry in enumerate(schedule.entries):
        diff = np.where(ok, np.abs(exact[k] - approx[k]), -1.0)
        flat = int(np.argmax(diff))
        worst = float(diff.ravel()[flat]) if ok.any() else float("nan")
        where = {a.name: float(m.ravel()[flat]) for a, m in zip(schedule.axes, mesh)}
        table = schedule.gains[k][schedule.valid]
        scale = float(np.max(np.abs(table))) if table.size else float("nan")
        out[entry.identifier] = InterpolationError(worst, worst / scale if scale else float("nan"), where)
    return out


def _c_number(x: float) -> str:
    return "NAN" if not np.isfinite(x) else repr(float(x))


def _comment(text: str) -> str:
    return c_comment(text)


def lookup_table_c(schedule: Schedule, errors: dict[str, InterpolationError] | None = None,
                   refine: int = REFINE, progress=None) -> str:
    """The C source: table, axes, and ``int <name>_schedule(<params>, double gains[])``."""
    model = schedule.design.model
    errors = errors if errors is not None else interpolation_errors(schedule, refine)
    name, up = model.name, model.name.upper()
    axes, entries = schedule.axes, schedule.entries
    kind = "linear" if len(axes) == 1 else "bilinear"
    units = {p.name: p.unit for p in model.parameters}
    lines = ["/*", f" * Gain schedule of '{name}'" + (f" ({c_comment(model.title)})" if model.title else "")
             + ", generated by symgain.", " *", " * Gains (exact formulas):"]
    for k, e in enumerate(entries):
        lines.append(_comment(f" *   gains[{k}] = {e.identifier} = {sp.sstr(e.expr)}"))
    lines.append(" * Grid:")
    for a in axes:
        step = (a.values[-1] - a.values[0]) / (a.values.size - 1)
        lines.append(f" *   {a.name} from {a.values[0]:g} to {a.values[-1]:g} {c_comment(units[a.name])}, "
                     f"{a.values.size} points, step {step:g}")
    for pname, value in schedule.fixed.items():
        lines.append(f" *   {pname} = {value:g} {c_comment(units[pname])} (nominal, fixed)")
    lines += [f" * Interpolation: {kind}. Outside the grid the nearest edge is used and the",
              " * function returns 1. Grid points where a validity condition fails hold NAN;",
              " * a query that needs one of them returns -1 and NAN gains. A query outside a",
              " * parameter's declared range returns -2 and NAN gains (the design envelope;",
              f" * compile with -D{range_macro(name)} to leave that test out).",
              f" * Worst interpolation error against the exact formulas, measured on a grid",
              f" * {refine} times finer than this table (absolute; relative to the largest |gain|):"]
    for e in entries:
        err = errors[e.identifier]
        at = ", ".join(f"{k} = {v:.6g}" for k, v in err.where.items())
        lines.append(f" *   {e.identifier}: {err.absolute:.3e} ({err.relative:.3e}) at {at}")
    invalid = int((~schedule.valid).sum())
    lines.append(f" * Invalid grid points: {invalid} of {schedule.valid.size}.")
    lines += [" */", "#include <math.h>", "", f"#define {up}_N_GAINS {len(entries)}"]
    for a in axes:
        lines.append(f"#define {up}_N_{a.name.upper()} {a.values.size}")
    lines.append("")
    for a in axes:
        step = (a.values[-1] - a.values[0]) / (a.values.size - 1)
        lines.append(f"static const double {name}_{a.name}_low = {_c_number(a.values[0])};")
        lines.append(f"static const double {name}_{a.name}_step = {_c_number(step)};")
    dims = "".join(f"[{up}_N_{a.name.upper()}]" for a in axes)
    lines.append(f"static const double {name}_table{dims}[{up}_N_GAINS] = {{")
    lines.extend(_table_rows(schedule, progress))
    lines.append("};")
    lines.append(f"static const unsigned char {name}_valid{dims} = {{")
    lines.extend(_valid_rows(schedule))
    lines.append("};")
    lines.append("")
    lines.extend(_function(schedule, name, up))
    return "\n".join(lines) + "\n"


def _table_rows(schedule: Schedule, progress=None) -> list[str]:
    g, v = schedule.gains, schedule.valid
    def node(index):
        return "{" + ", ".join(_c_number(g[(k, *index)] if v[index] else np.nan)
                               for k in range(g.shape[0])) + "}"
    if v.ndim == 1:
        return ["    " + node((i,)) + ("," if i < v.size - 1 else "") for i in range(v.size)]
    rows = []
    for i in range(v.shape[0]):
        if progress is not None:
            progress(v.shape[1])
        inner = ",\n      ".join(node((i, j)) for j in range(v.shape[1]))
        rows.append("    {" + inner + "}" + ("," if i < v.shape[0] - 1 else ""))
    return rows


def _valid_rows(schedule: Schedule) -> list[str]:
    v = schedule.valid.astype(int)
    if v.ndim == 1:
        return ["    " + ", ".join(map(str, v))]
    return ["    {" + ", ".join(map(str, row)) + "}" + ("," if i < v.shape[0] - 1 else "")
            for i, row in enumerate(v)]


_LOCALS = set(C_RESERVED) | {"status", "k", "i", "j", "ti", "tj", "fi", "fj", "gains"}


def _function(schedule: Schedule, name: str, up: str) -> list[str]:
    axes = schedule.axes
    arg = {a.name: mangle(a.name, _LOCALS) for a in axes}
    params = ", ".join(f"double {arg[a.name]}" for a in axes)
    ranges = {p.name: p.range for p in schedule.design.model.parameters}
    tests = [(arg[a.name], ranges.get(a.name), range_test(arg[a.name], ranges.get(a.name), "double"))
             for a in axes]
    tests = [(n, r, t) for n, r, t in tests if t is not None]
    envelope = "".join(f"; -2 when {n} lies outside its declared range [{r[0]:g}, {r[1]:g}]" for n, r, _ in tests)
    if tests:
        envelope += f" (unless compiled with -D{range_macro(name)})"
    out = [f"/* Interpolated gains at ({', '.join(arg[a.name] for a in axes)}); returns 0, 1 (clamped) or -1 "
           f"(invalid, or an argument is not finite){envelope}; NAN gains on a negative return. */",
           f"int {name}_schedule({params}, double gains[{up}_N_GAINS])", "{",
           "    int status = 0, k;"]
    finite = " || ".join(f"!isfinite({arg[a.name]})" for a in axes)
    out += [f"    if ({finite}) {{", f"        for (k = 0; k < {up}_N_GAINS; k++) gains[k] = NAN;",
            "        return -1;", "    }"]
    if tests:  # the design envelope, removable at compile time
        out.append(f"#ifndef {range_macro(name)}")
        out += [f"    if ({' || '.join(t for _, _, t in tests)}) {{",
                f"        for (k = 0; k < {up}_N_GAINS; k++) gains[k] = NAN;", "        return -2;", "    }"]
        out.append("#endif")
    letters = "ij"
    for a, ix in zip(axes, letters):
        n = f"{up}_N_{a.name.upper()}"
        out += [f"    double t{ix} = ({arg[a.name]} - {name}_{a.name}_low) / {name}_{a.name}_step;",
                f"    int {ix};", f"    double f{ix};",
                f"    if (t{ix} < 0.0) {{ t{ix} = 0.0; status = 1; }}",
                f"    if (t{ix} > {n} - 1.0) {{ t{ix} = {n} - 1.0; status = 1; }}",
                f"    {ix} = (int)t{ix};", f"    if ({ix} > {n} - 2) {ix} = {n} - 2;",
                f"    f{ix} = t{ix} - {ix};"]
    if len(axes) == 1:
        nodes = [("[i]", "(1.0 - fi)"), ("[i + 1]", "fi")]
    else:
        nodes = [("[i][j]", "(1.0 - fi) * (1.0 - fj)"), ("[i + 1][j]", "fi * (1.0 - fj)"),
                 ("[i][j + 1]", "(1.0 - fi) * fj"), ("[i + 1][j + 1]", "fi * fj")]
    needs = " || ".join(f"(!{name}_valid{idx} && {w} > 0.0)" for idx, w in nodes)
    out += [f"    if ({needs}) {{",
            f"        for (k = 0; k < {up}_N_GAINS; k++) gains[k] = NAN;", "        return -1;", "    }",
            f"    for (k = 0; k < {up}_N_GAINS; k++) {{", "        gains[k] = 0.0;"]
    for idx, w in nodes:
        out.append(f"        if ({w} > 0.0) gains[k] += {w} * {name}_table{idx}[k];")
    out += ["    }", "    return status;", "}"]
    return out
