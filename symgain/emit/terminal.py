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

import shutil
import textwrap

import sympy as sp

from typing import TYPE_CHECKING

if TYPE_CHECKING:  # scipy loads only for the commands that check
    from ..analysis.check import CheckReport
from ..design import EXTRA_SYMBOLS, Design, GainDesign, gain_labels
from ..errors import printable
from ..mathtext import condition_text, math_text, named_condition, number_text
from ..model import S

__all__ = ["format_design", "format_check", "format_polynomial", "terminal_width", "gain_line"]


def terminal_width() -> int:
    """Columns of the terminal (80 when the output is not a terminal)."""
    return max(60, shutil.get_terminal_size((80, 24)).columns)


def nominal_with_definitions(nominal: dict, definitions=()) -> dict:
    """The nominal values, extended by the compact form's named definitions evaluated in order."""
    values = dict(nominal)
    for symbol, expr in definitions:
        try:
            values[symbol] = sp.Float(complex(sp.sympify(expr).xreplace(values).evalf()).real)
        except (TypeError, ValueError):
            break  # later definitions stay symbolic: their gains are summarized without a value
    return values


def gain_line(label: str, expr: sp.Expr, nominal: dict, width: int) -> str:
    """``label = formula`` when it fits the width, else its size and value at nominal.

    >>> m = sp.Symbol("m", positive=True)
    >>> gain_line("K[F, p]", 2*m, {m: 3.0}, 80)
    '  K[F, p] = 2*m'
    >>> gain_line("K[F, p]", sum(m**k / (k + 1) for k in range(40)), {m: 1.0}, 80)
    '  K[F, p] = 4.27854 at nominal (formula of 116 operations; whole: --json or emit)'
    """
    whole = f"  {label} = {math_text(expr)}"
    if len(whole) <= width:
        return whole
    size = f"formula of {sp.count_ops(expr)} operations; whole: --json or emit"
    try:
        value = complex(sp.sympify(expr).xreplace({k: sp.Float(v) for k, v in nominal.items()}).evalf())
    except (TypeError, ValueError):  # free gains left in the formula, or no nominal value
        rest = sorted(map(str, sp.sympify(expr).free_symbols - set(nominal)))
        return f"  {label} = a {size.replace('; whole', ' in ' + ', '.join(rest) + '; whole')}"
    shown = number_text(value.real) if abs(value.imag) <= 1e-9 * max(1.0, abs(value.real)) else str(value)
    return f"  {label} = {shown} at nominal ({size})"


def _wrap(line: str, width: int) -> list[str]:
    """A line cut at spaces to the width, continuation lines indented under the text."""
    if len(line) <= width:
        return [line]
    indent = " " * (len(line) - len(line.lstrip()) + 2)
    return textwrap.wrap(line, width, subsequent_indent=indent, break_long_words=False,
                         break_on_hyphens=False)


def format_polynomial(poly: sp.Expr, s: sp.Symbol = S) -> str:
    """A polynomial in s, highest power first, each coefficient collected.

    >>> w = sp.Symbol("w")
    >>> format_polynomial(sp.expand((S + w)**2 + S))
    's^2 + (2*w + 1)*s + w^2'
    """
    terms = []
    for (k,), c in sp.Poly(poly, s).terms():
        c = sp.factor_terms(c)
        if k == 0:
            terms.append(math_text(c))
            continue
        power = "s" if k == 1 else f"s^{k}"
        if c == 1:
            terms.append(power)
        elif c.is_Add or sp.fraction(c)[1] != 1:
            terms.append(f"({math_text(c)})*{power}")
        else:
            terms.append(f"{math_text(c)}*{power}")
    return " + ".join(terms).replace("+ -", "- ")


def _format_part(design: Design, part: GainDesign, width: int) -> list[str]:
    nominal = {p.symbol: p.nominal for p in design.model.parameters if p.nominal is not None}
    lines = [f"{part.part} gain {part.symbol}"]
    if part.target is not None:
        lines.append(f"  target: {part.target.description}")
        poly = f"  target polynomial: {format_polynomial(part.target.polynomial)}"
        lines.append(poly if len(poly) <= width else "  target polynomial: "
                     f"degree {sp.degree(part.target.polynomial, S)} (whole: --json or emit)")
    for note in part.notes:
        lines.append(f"  note: {note}")
    if part.definitions:
        lines.append(f"  definitions, evaluated in order ({len(part.definitions)}):")
        lines.extend(gain_line(f"  {math_text(sym)}", expr, nominal, width) for sym, expr in part.definitions)
        lines.append("  gains in these definitions:")
        nominal = nominal_with_definitions(nominal, part.definitions)
    matrices = [(part.part, part.symbol, part.gain)]
    matrices += [(key, EXTRA_SYMBOLS.get(key, key), value) for key, value in part.extra.items()
                 if isinstance(value, sp.MatrixBase) and key != "gain_symbols"]
    for key, symbol, value in matrices:
        rl, cl = gain_labels(design.model, key, value.rows, value.cols)
        for i in range(value.rows):
            for j in range(value.cols):
                lines.append(gain_line(f"{symbol}[{rl[i]}, {cl[j]}]", value[i, j], nominal, width))
    for b in part.branches:
        shown = " (shown above)" if b.index == (part.selected_branch or 1) else ""
        real = ("real when " + "; ".join(condition_text(c) for c in b.real_when)) if b.real_when \
            else "real wherever it holds"
        lines.append(f"  branch {b.index}{shown}: {real}" + (f"; {b.note}" if b.note else ""))
        rows = [(part.part, part.symbol, b.gain)] + [(key, EXTRA_SYMBOLS.get(key, key), value)
                                                     for key, value in b.extra.items()]
        for key, symbol, value in rows:
            rl, cl = gain_labels(design.model, key, value.rows, value.cols)
            for i in range(value.rows):
                for j in range(value.cols):
                    lines.append("  " + gain_line(f"{symbol}[{rl[i]}, {cl[j]}]", value[i, j], nominal, width - 2))
    if part.definitions:
        for step in part.steps:
            if step.name.endswith("_determinant"):
                lines.append(f"  {step.title} (factored; the product of the pivots up to sign): "
                             f"{math_text(step.value)}")
    if part.free_gains:
        lines.append("  free gains (not fixed by the target): " + ", ".join(map(str, part.free_gains)))
    if part.valid_when:
        lines.append("  valid when:")
        lines.extend(f"    {named_condition(c, width - 6)[0]}" for c in part.valid_when)
    else:
        lines.append("  valid when: always (the declared signs rule out every singular case)")
    return lines


def format_design(design: Design, width: int | None = None) -> str:
    """The gains, targets and conditions, one formula per line (long ones summarized)."""
    width = width or terminal_width()
    model = design.model
    head = f"{model.name}" + (f": {printable(model.title, 200)}" if model.title else "")
    lines = [head, f"states {', '.join(model.states)}; inputs {', '.join(model.inputs)}"
             + (f"; outputs {', '.join(model.outputs)}" if model.outputs else "")]
    lines.extend(f"plant: {note}" for note in model.notes)
    lines.append("")
    for part in design.parts():
        lines.extend(_format_part(design, part, width))
        lines.append("")
    lines = [piece for line in lines for piece in (_wrap(line, width) if line else [""])]
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
    table_end = len(lines)
    if "sampled_plant" in report.points:
        lines.append("sampled_plant: relative difference of Phi, Gamma from scipy.signal.cont2discrete "
                     "(in the gain column); gains are compared on scipy's sampled plant, polynomials in z")
    lines.append("gain err: max |K - K_scipy| / max |K_scipy| (scipy.signal.place_poles; '-' where the"
                 " poles repeat, the gain is not unique or the placement is too ill-conditioned to compare)")
    lines.append("closed-loop err: max difference of the characteristic-polynomial coefficients of the"
                 " numeric closed loop from the target's, with s scaled by the size of the target roots")
    width = terminal_width()  # the explanations wrap; the table rows stay whole
    lines = lines[:table_end] + [piece for line in lines[table_end:] for piece in _wrap(line, width)]
    return "\n".join(lines) + "\n"
