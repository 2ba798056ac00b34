"""Plain-text rendering of designs and check reports for the terminal.

>>> import sympy as sp
>>> from symgain.model import Model, Parameter, TargetSpec
>>> from symgain.design import derive
>>> m = Parameter.declare("m", sign="positive", range=(1, 2))
>>> model = Model(name="cart", parameters=(m,), states=("p", "v"), inputs=("F",),
...               A=sp.Matrix([[0, 1], [0, 0]]), B=sp.Matrix([[0], [1 / m.symbol]]),
...               feedback=TargetSpec("poles", {"poles": (-1, -1)}))
>>> print(format_design(derive(model)).splitlines()[6])
  K[F, p] = m
"""
from __future__ import annotations

import sympy as sp

from typing import TYPE_CHECKING

if TYPE_CHECKING:  # scipy loads only for the commands that check
    from ..analysis.check import CheckReport
from ..design import Design, GainDesign, gain_labels
from ..errors import printable
from ..model import S

__all__ = ["format_design", "format_check", "format_polynomial"]





def format_polynomial(poly: sp.Expr, s: sp.Symbol = S) -> str:
    """A polynomial in s, highest power first, each coefficient collected.

    >>> w = sp.Symbol("w")
    >>> format_polynomial(sp.expand((S + w)**2 + S))
    's**2 + (2*w + 1)*s + w**2'
    """
    terms = []
    for (k,), c in sp.Poly(poly, s).terms():
        c = sp.factor_terms(c)
        if k == 0:
            terms.append(sp.sstr(c))
            continue
        power = "s" if k == 1 else f"s**{k}"
        if c == 1:
            terms.append(power)
        elif c.is_Add or sp.fraction(c)[1] != 1:
            terms.append(f"({sp.sstr(c)})*{power}")
        else:
            terms.append(f"{sp.sstr(c)}*{power}")
    return " + ".join(terms).replace("+ -", "- ")


def _format_part(design: Design, part: GainDesign) -> list[str]:
    lines = [f"{part.part} gain {part.symbol}"]
    if part.target is not None:
        lines.append(f"  target: {part.target.description}")
        lines.append(f"  target polynomial: {format_polynomial(part.target.polynomial)}")
    for note in part.notes:
        lines.append(f"  note: {note}")
    if part.definitions:
        lines.append(f"  definitions, evaluated in order ({len(part.definitions)}):")
        lines.extend(f"    {sp.sstr(sym)} = {sp.sstr(expr)}" for sym, expr in part.definitions)
        lines.append("  gains in these definitions:")
    rl, cl = gain_labels(design.model, part.part, part.gain.rows, part.gain.cols)
    for i in range(part.gain.rows):
        for j in range(part.gain.cols):
            lines.append(f"  {part.symbol}[{rl[i]}, {cl[j]}] = {sp.sstr(part.gain[i, j])}")
    for key, value in part.extra.items():
        if isinstance(value, sp.MatrixBase) and key != "gain_symbols":
            rl, cl = gain_labels(design.model, key, value.rows, value.cols)
            for i in range(value.rows):
                for j in range(value.cols):
                    lines.append(f"  {key}[{rl[i]}, {cl[j]}] = {sp.sstr(value[i, j])}")
    for b in part.branches:
        shown = " (shown above)" if b.index == (part.selected_branch or 1) else ""
        real = ("real when " + "; ".join(sp.sstr(c) for c in b.real_when)) if b.real_when else "real wherever it holds"
        lines.append(f"  branch {b.index}{shown}: {real}" + (f"; {b.note}" if b.note else ""))
        rl, cl = gain_labels(design.model, part.part, b.gain.rows, b.gain.cols)
        for i in range(b.gain.rows):
            lines.append(f"    {part.symbol}[{rl[i]}, :] = [" + ", ".join(sp.sstr(e) for e in b.gain.row(i)) + "]")
        for key, value in b.extra.items():
            rl, cl = gain_labels(design.model, key, value.rows, value.cols)
            for i in range(value.rows):
                lines.append(f"    {key}[{rl[i]}, :] = [" + ", ".join(sp.sstr(e) for e in value.row(i)) + "]")
    if part.definitions:
        for step in part.steps:
            if step.name.endswith("_determinant"):
                lines.append(f"  {step.title} (factored; the product of the pivots up to sign): "
                             f"{sp.sstr(step.value)}")
    if part.free_gains:
        lines.append("  free gains (not fixed by the target): " + ", ".join(map(str, part.free_gains)))
    if part.valid_when:
        lines.append("  valid when: " + "; ".join(sp.sstr(c) for c in part.valid_when))
    else:
        lines.append("  valid when: always (the declared signs rule out every singular case)")
    return lines


def format_design(design: Design) -> str:
    """The gains, targets and conditions, one formula per line."""
    model = design.model
    head = f"{model.name}" + (f": {printable(model.title, 200)}" if model.title else "")
    lines = [head, f"states {', '.join(model.states)}; inputs {', '.join(model.inputs)}"
             + (f"; outputs {', '.join(model.outputs)}" if model.outputs else "")]
    lines.extend(f"plant: {note}" for note in model.notes)
    lines.append("")
    for part in design.parts():
        lines.extend(_format_part(design, part))
        lines.append("")
    return "\n".join(lines).rstrip() + "\n"


def _fmt(x) -> str:
    return "-" if x is None else f"{x:.1e}"


def format_check(report: CheckReport, names: list[str]) -> str:
    """A table per part: point, parameter values, gain error vs scipy, closed-loop error, verdict."""
    lines = []
    for part, points in report.points.items():
        lines.append(f"{part}: {len(points)} points (seed {report.seed}), tolerance {report.tolerance:g}")
        header = ["point", *names, "gain err vs scipy", "closed-loop err", "result"]
        rows = []
        for p in points:
            label = "nominal" if p.index == 0 else str(p.index)
            values = [f"{p.values[n]:.4g}" for n in names]
            verdict = p.status + (f" ({p.reason})" if p.reason else "")
            rows.append([label, *values, _fmt(p.gain_error), _fmt(p.closed_loop_error), verdict])
        widths = [max(len(r[i]) for r in [header, *rows]) for i in range(len(header) - 1)]
        for r in [header, *rows]:
            lines.append("  " + "  ".join(c.rjust(w) for c, w in zip(r, widths)) + "  " + r[-1])
        c = report.counts(part)
        lines.append(f"  {c['ok']} ok, {c['fail']} failed, {c['skipped']} skipped")
        lines.append("")
    if "sampled_plant" in report.points:
        lines.append("sampled_plant: relative difference of Phi, Gamma from scipy.signal.cont2discrete "
                     "(in the gain column); gains are compared on scipy's sampled plant, polynomials in z")
    lines.append("gain err: max |K - K_scipy| / max |K_scipy| (scipy.signal.place_poles; '-' where the"
                 " poles repeat, the gain is not unique or the placement is too ill-conditioned to compare)")
    lines.append("closed-loop err: max difference of the characteristic-polynomial coefficients of the"
                 " numeric closed loop from the target's, with s scaled by the size of the target roots")
    return "\n".join(lines) + "\n"
