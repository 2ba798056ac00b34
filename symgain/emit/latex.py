r"""LaTeX emitter: a standalone report that a reviewer can read and sign.

Sections: the plant with its parameter table, then for each designed part
the target and where it comes from and the derivation step by step (read
generically from ``part.steps``; the coefficient equations are set with the
power of ``s`` they match), the validity conditions, the numeric cross-check
table (:func:`symgain.analysis.check.check_design`), the safety caution and a sign-off
block. Needs only amsmath and amssymb, and geometry (all in
Debian's texlive-latex-base).

Every formula sits on one source line that ends with a comment ``%@ KEY``
naming what it shows (``plant.A``, ``feedback.solution[0][1]``,
``feedback.coefficient_equations[2]``, ``feedback.valid_when[0]``), so tools
and tests can read each one back.

>>> import sympy as sp
>>> from symgain.model import Model, Parameter, TargetSpec
>>> from symgain.design import derive
>>> m = Parameter.declare("m_c", sign="positive", range=(1, 2), unit="kg", meaning="cart mass")
>>> model = Model(name="cart", parameters=(m,), states=("p", "v"), inputs=("F",),
...               A=sp.Matrix([[0, 1], [0, 0]]), B=sp.Matrix([[0], [1 / m.symbol]]),
...               feedback=TargetSpec("poles", {"poles": (-1, -1)}))
>>> report = latex_report(derive(model))
>>> [line for line in report.splitlines() if line.endswith("%@ feedback.solution[0][1]")]
['k_{2} &= 2 m_{c} %@ feedback.solution[0][1]']
"""
from __future__ import annotations

from dataclasses import replace

import sympy as sp

from ..analysis.check import check_design
from ..design import GAIN_AXES, Design, GainDesign, Step
from ..analysis.sensitivity import sensitivity_table, small_expression
from ..model import Z
from .latex_layout import equation_lines, formula_lines, matrix_tex, prose, sentence, tex, text, unit_tex

__all__ = ["latex_report", "CAUTION"]

CAUTION = ("These gains come from a linear model and hold only under the conditions listed above. "
           "Before use on a machine, validate them in simulation (including actuator limits, delays "
           "and the nonlinear plant) and commission them on the machine with safe limits, reduced "
           "power and an emergency stop at hand. The numeric cross-check confirms the algebra, not "
           "the model. Local codes, safety standards and licensed engineering practice take precedence "
           "over this report.")

_LHS = {  # left-hand sides of well-known steps
    "closed_loop_matrix": r"A_{\mathrm{cl}}",
    "open_loop_polynomial": r"\det(sI - A)",
    "characteristic_polynomial": r"p_{\mathrm{cl}}(s)",
    "target_polynomial": r"p_{\mathrm{t}}(s)",
    "controllability_determinant": r"\Delta",
    "observability_determinant": r"\Delta",
    "closed_loop_determinant": r"\det A_{\mathrm{cl}}",
    "steady_state_gain": r"G(0)",
    "zero_at_origin_determinant": r"\Delta_{0}",
    "input_direction": "f",
    "separation": r"p_{\mathrm{all}}(s)",
}
_TUPLE_LABELS = {"augmented_plant": ("A_{a}", "B_{a}"), "sampled_plant": (r"\Phi", r"\Gamma")}  # names of matrices given as a tuple
_SIGN = {"positive": "$> 0$", "nonnegative": r"$\geq 0$", "nonzero": r"$\neq 0$", "real": "any real"}
_PART_TITLES = {"feedback": "State feedback", "estimator": "State estimator",
                "integral": "Integral action", "feedforward": "Reference feedforward"}

PREAMBLE = r"""\documentclass[10pt,a4paper]{article}
\usepackage[margin=2cm]{geometry}
\usepackage{amsmath,amssymb}
\allowdisplaybreaks
\setlength{\parindent}{0pt}
\setlength{\emergencystretch}{3em}
\setlength{\parskip}{0.5em}
"""


def _display(rows: list[tuple[str, list[str]]]) -> list[str]:
    """An ``align*`` block: each formula (its lines) on one source line with its key."""
    out = [r"\begin{align*}"]
    for k, (key, lines) in enumerate(rows):
        end = r" \\" if k < len(rows) - 1 else ""
        out.append(r" \\ ".join(lines) + end + f" %@ {key}")
    return out + [r"\end{align*}"]


def _matrix_block(name: str, mat, key: str, entry_names=None) -> list[str]:
    """A matrix as one ``bmatrix``, or entry by entry when it would be too wide."""
    shown = matrix_tex(mat)
    if shown is not None:
        return _display([(key, [f"{name} &= {shown}"])])
    rows = []
    for i in range(mat.rows):
        for j in range(mat.cols):
            if mat[i, j] == 0:
                continue
            lhs = entry_names[i][j] if entry_names else f"{{{name}}}_{{{i + 1},{j + 1}}}"  # braces: A_{cl} has one
            rows.append((f"{key}[{i}][{j}]", formula_lines(lhs, mat[i, j])))
    zeros = "" if all(e != 0 for e in mat) else " (entries not listed are zero)"
    head = [f"${name}$ is {mat.rows}$\\times${mat.cols}; its entries{zeros}:"]
    return head + (_display(rows) if rows else [])


def _parameter_table(design: Design) -> list[str]:
    out = [r"\begin{center}", r"\begin{tabular}{lllll}", r"\hline",
           r"symbol & meaning & unit & sign & range (nominal) \\ \hline"]
    for p in design.model.parameters:
        rng = f"[{p.range[0]:g}, {p.range[1]:g}]" if p.range else "none"
        nominal = f" ({p.nominal:g})" if p.nominal is not None else ""
        role = " (design knob)" if p.role == "design" else ""
        out.append(f"${tex(p.symbol)}$ & {text(p.meaning) or '--'}{role} & {unit_tex(p.unit) or '--'} & "
                   f"{_SIGN.get(p.sign, text(p.sign))} & {rng}{nominal} \\\\")
    return out + [r"\hline", r"\end{tabular}", r"\end{center}"]


def _plant(design: Design) -> list[str]:
    model = design.model
    out = [r"\section{Plant}", text(model.title) + ("." if model.title else ""),
           f"States ${', '.join(tex(sp.Symbol(s)) for s in model.states)}$; "
           f"inputs ${', '.join(tex(sp.Symbol(u)) for u in model.inputs)}$"
           + (f"; outputs ${', '.join(tex(sp.Symbol(y)) for y in model.outputs)}$" if model.outputs else "")
           + r". The plant is $\dot x = A x + B u$" + (", $y = C x$" if model.C is not None else "")
           + ", with the parameters below." + (" Source: \\texttt{" + text(model.source).replace("/", "/\\allowbreak{}") + "}."
              if model.source else "")]
    out += _parameter_table(design)
    mats = [(n, getattr(model, n)) for n in ("A", "B", "C", "D") if getattr(model, n) is not None]
    shown = [(n, matrix_tex(m)) for n, m in mats]
    if all(code is not None for _, code in shown):  # all fit: one display
        out += _display([(f"plant.{n}", [f"{n} &= {code}"]) for n, code in shown])
    else:
        for name, mat in mats:
            out += _matrix_block(name, mat, f"plant.{name}")
    equilibrium = model.extra.get("equilibrium") or {}
    for note in model.notes:
        if equilibrium and note.lower().startswith("linearized at the equilibrium"):
            out += _equilibrium(equilibrium)
            continue
        out.append(sentence(note))
    return out + _sampled(design)


def _sampled(design: Design) -> list[str]:
    """The discretization step of a sampled-data design: period, hold, Phi and Gamma."""
    sampled = design.sampled
    if sampled is None:
        return []
    out = [r"\subsection{Sampled plant}",
           f"The controller runs at the sample period $T = {tex(sampled.period)}$ s; the plant seen at the "
           r"sampling instants is $x[k+1] = \Phi x[k] + \Gamma u[k]$ (" + text(sampled.method) + ")."]
    out += [sentence(note) for note in sampled.notes]
    for name, mat in ((r"\Phi", sampled.Phi), (r"\Gamma", sampled.Gamma)):
        out += _matrix_block(name, mat, f"sampled.{name.strip(chr(92))}")
    if sampled.valid_when:
        rows = [(f"sampled.valid_when[{k}]", formula_lines(tex(c.lhs), c.rhs, r"\neq"))
                for k, c in enumerate(sampled.valid_when)]
        out += ["These formulas hold when:"] + _display(rows)
    return out


def _equilibrium(equilibrium: dict) -> list[str]:
    """The operating point as mathematics, a few entries per line so that it keeps within the margins."""
    entries = [f"{{{tex(sp.Symbol(str(k)))}}}_{{0}} = {tex(v)}" for k, v in equilibrium.items()]
    lines = [r",\quad ".join(entries[k:k + 4]) for k in range(0, len(entries), 4)]
    return (["Linearized at the equilibrium"] + [r"\begin{gather*}", " \\\\\n".join(lines), r"\end{gather*}"]
            + ["States, inputs and outputs are deviations from it."])


_PROTOTYPE_NAMES = {"bessel": "Bessel", "butterworth": "Butterworth", "itae": "ITAE"}


def target_sentence(description: str, symbols: dict) -> str:
    r"""The target's description with the model's symbols and the z mapping set as mathematics.

    >>> target_sentence("butterworth prototype, bandwidth omega_c", {"omega_c": sp.Symbol("omega_c")})
    'Butterworth prototype, bandwidth $\\omega_{c}$'
    >>> target_sentence("explicit poles, mapped by z = exp(s T)", {"T": sp.Symbol("T")})
    'explicit poles, mapped by $z = e^{sT}$'
    """
    import re

    pieces = []
    for token in re.split(r"(z = exp\(s T\)|[A-Za-z_][A-Za-z_0-9]*)", description):
        if token == "z = exp(s T)":
            pieces.append("$z = e^{sT}$")
        elif token in _PROTOTYPE_NAMES:
            pieces.append(_PROTOTYPE_NAMES[token])
        elif token in symbols:
            pieces.append(f"${tex(symbols[token])}$")
        elif token == "z":
            pieces.append("$z$")
        else:
            pieces.append(text(token))
    return "".join(pieces)


def _target(part: GainDesign, symbols: dict) -> list[str]:
    if part.target is None:
        return []
    out = [r"\subsection{Target}", f"Target: {target_sentence(part.target.description, symbols)}."]
    for note in part.notes:
        out.append(sentence(note))
    if part.target.poles:
        var = "z" if _in_z(part) else "s"
        rows = [(f"{part.part}.target_poles[{k}]", [f"{var}_{{{k + 1}}} &= {tex(p)}"])
                for k, p in enumerate(part.target.poles)]
        out += ["Target poles:"] + _display(rows)
    return out


def _gain_names(part: GainDesign, mat):
    symbols = part.extra.get("gain_symbols")
    if isinstance(symbols, sp.MatrixBase) and symbols.shape == mat.shape:
        return [[tex(symbols[i, j]) for j in range(mat.cols)] for i in range(mat.rows)]
    return [[f"{part.symbol}_{{{i + 1},{j + 1}}}" for j in range(mat.cols)] for i in range(mat.rows)]


def _in_z(part: GainDesign) -> bool:
    """True for the parts of a sampled-data design (polynomials in z)."""
    return part.target is not None and Z in part.target.polynomial.free_symbols


def _trivially_equal(lhs, rhs) -> bool:
    """Both sides the same expression (expanded when small; large ones are compared as written)."""
    difference = sp.sympify(lhs - rhs)
    if difference == 0:
        return True
    return sp.count_ops(difference) <= 200 and sp.expand(difference) == 0


def _step(part: GainDesign, step: Step) -> list[str]:
    key = f"{part.part}.{step.name}"
    var = "z" if _in_z(part) else "s"
    title = step.title if step.title.startswith("det(") else step.title[:1].upper() + step.title[1:]
    out = [r"\subsection{" + prose(title) + "}"]
    value = step.value
    if step.name == "solution" and isinstance(value, sp.MatrixBase):
        names = _gain_names(part, value)
        symbols = part.extra.get("gain_symbols")
        fixed = [] if not isinstance(symbols, sp.MatrixBase) or symbols.shape != value.shape else \
            [(i, j) for i in range(value.rows) for j in range(value.cols)
             if not isinstance(symbols[i, j], sp.Symbol) or symbols[i, j] == value[i, j]]
        rows = [(f"{key}[{i}][{j}]", formula_lines(names[i][j], value[i, j]))
                for i in range(value.rows) for j in range(value.cols) if (i, j) not in fixed]
        if fixed:
            out.append("Entries fixed by the pattern or left free are not repeated here.")
        return out + (_display(rows) if rows else [])
    if isinstance(value, sp.MatrixBase):
        default = part.symbol if step.name == "direction_gain" else r"\mathrm{value}"
        return out + _matrix_block(_LHS.get(step.name, default), value, key)
    if isinstance(value, tuple):
        if not value:
            return out + ["None: the declared signs of the parameters rule out every singular case."]
        rows = []
        for k, item in enumerate(value):
            if item is sp.true or (isinstance(item, sp.Eq) and _trivially_equal(item.lhs, item.rhs)):
                continue  # 0 = 0: a power of s the pattern leaves unconstrained
            if isinstance(item, sp.Eq):
                label = f"{var}^{{{len(value) - 1 - k}}}" if step.name == "coefficient_equations" else ""
                rows.append((f"{key}[{k}]", equation_lines(item.lhs, item.rhs, label)))
            elif isinstance(item, sp.MatrixBase):
                name = (_TUPLE_LABELS.get(step.name, ()) + (None,) * len(value))[k] \
                    or f"{part.symbol}^{{({k + 1})}}"
                shown = matrix_tex(item)
                if shown is not None:
                    rows.append((f"{key}[{k}]", [f"{name} &= {shown}"]))
                else:
                    rows += [(f"{key}[{k}][{i}][{j}]", formula_lines(f"{name}_{{{i + 1},{j + 1}}}", item[i, j]))
                             for i in range(item.rows) for j in range(item.cols) if item[i, j] != 0]
            elif isinstance(item, sp.Ne):
                rows.append((f"{key}[{k}]", formula_lines(tex(item.lhs), item.rhs, r"\neq")))
            else:
                rows.append((f"{key}[{k}]", formula_lines("", item, "")))
        intro = {"coefficient_equations": "Closed-loop coefficient (left) against target coefficient "
                 f"(right), power by power of ${var}$:",
                 "valid_when": "The formulas hold when:"}.get(step.name, "")
        return out + ([intro] if intro else []) + _display(rows)
    if isinstance(value, sp.Eq):
        return out + _display([(key, formula_lines(tex(value.lhs), value.rhs))])
    if isinstance(value, sp.Basic):
        lhs = _LHS.get(step.name, r"\mathrm{value}")
        if var == "z":
            lhs = lhs.replace("(s)", "(z)").replace("sI - A", r"zI - \Phi")
        return out + _display([(key, formula_lines(lhs, value))])
    return out + [text(value)]


def _extras(part: GainDesign) -> list[str]:
    out = []
    for name, value in part.extra.items():
        if name == "gain_symbols" or not isinstance(value, sp.MatrixBase):
            continue
        symbol = {"integral_gain": "K_{i}"}.get(name)
        heading = f"Integral gain ${symbol}$" if symbol else text(name.replace("_", " ").capitalize())
        out += [r"\subsection{" + heading + "}"]
        out += _matrix_block(symbol or r"\mathrm{" + name.replace("_", r"\_") + "}", value,
                             f"{part.part}.extra.{name}")
    return out


def _branches(part: GainDesign) -> list[str]:
    """Every real solution branch with the conditions for it to be real (several-input designs)."""
    if not part.branches:
        return []
    shown = part.selected_branch or 1
    which = (f"The model selects branch {shown}; only it is emitted as code." if part.selected_branch
             else f"Branch {shown} is the gain shown above; every branch is emitted as code.")
    out = [r"\subsection{Where each branch is real}",
           f"The coefficient equations have {len(part.branches)} real solution branches "
           f"${part.symbol}^{{(1)}}, \\ldots, {part.symbol}^{{({len(part.branches)})}}$ (listed above). {which}"]
    for b in part.branches:
        real = ("real when " + ", ".join(f"${tex(c)}$" for c in b.real_when) + "."
                if b.real_when else "real wherever the formulas hold.")
        out.append(f"Branch {b.index}: {real}" + (f" {text(b.note)}." if b.note else ""))
    return out


def _sensitivity(design: Design, part: GainDesign, table) -> list[str]:
    """Partial derivatives of each gain entry with respect to each parameter (closed form)."""
    rows, omitted = [], 0
    for (i, j, name), deriv in table.items():
        if deriv == 0:
            continue
        if not small_expression(deriv):
            omitted += 1
            continue
        sym = tex(design.model.parameter(name).symbol)
        lhs = rf"\frac{{\partial {part.symbol}_{{{i + 1},{j + 1}}}}}{{\partial {sym}}}"
        rows.append((f"{part.part}.sensitivity.{name}[{i}][{j}]", formula_lines(lhs, deriv)))
    out = [r"\subsection{Sensitivity of the gains}",
           "Partial derivatives of the gain entries with respect to the parameters "
           "(entries not listed are zero"
           + (f"; {omitted} longer ones are omitted here and listed in the JSON result" if omitted else "")
           + ")."]
    return out + (_display(rows) if rows else [])


def _part(design: Design, part: GainDesign, sensitivity=None) -> list[str]:
    title = _PART_TITLES.get(part.part, part.part.capitalize())
    out = [r"\section{" + f"{title}: gain ${part.symbol}$" + "}"]
    rows, cols = GAIN_AXES.get(part.part, (None, None))
    out.append(f"${part.symbol}$ is {part.gain.rows}$\\times${part.gain.cols}"
               + (f" (rows: {rows}, columns: {cols})" if rows else "") + ".")
    out += _target(part, design.model.symbols)
    for step in part.steps:
        out += _step(part, step)
    out += _extras(part)
    out += _branches(part)
    if sensitivity is not None:
        out += _sensitivity(design, part, sensitivity[part.part])
    if part.free_gains:
        out.append("Free gains left undetermined by the target: $"
                   + ", ".join(tex(s) for s in part.free_gains) + "$.")
    return out


def _check(design: Design, n_points: int, seed: int) -> list[str]:
    report = check_design(design, n_points=n_points, seed=seed)
    names = [p for p in design.model.parameters]
    out = [r"\section{Numeric cross-check}",
           f"At {n_points} parameter points (the nominal point, then uniform samples in the declared "
           f"ranges, seed {seed}) the formulas were evaluated and compared with "
           r"\texttt{scipy.signal.place\_poles} (gain error, where the poles are distinct and the gain "
           "unique) and with the target polynomial (closed-loop error: coefficients of the numeric "
           f"closed loop against the target's, with $s$ scaled by the size of the target roots). "
           f"Tolerance {report.tolerance:g}."]
    if design.sampled is not None:
        out.append("Sampled-data design: the sampled plant's gain-error column holds the relative difference "
                   r"of $\Phi$, $\Gamma$ from \texttt{scipy.signal.cont2discrete}; gains are compared on "
                   "scipy's sampled plant and the closed-loop polynomials are in $z$.")
    for part, points in report.points.items():
        cols = "r" * (len(names) + 3) + "l"
        size = r"\footnotesize" if len(names) > 5 else r"\small"
        out += [r"\subsection{" + text(part.capitalize().replace("_", " ")) + "}", "{" + size,
                r"\begin{center}", r"\begin{tabular}{" + cols + "}", r"\hline",
                "point & " + " & ".join(f"${tex(p.symbol)}$" for p in names)
                + r" & gain error & closed-loop error & result \\ \hline"]
        for pt in points:
            label = "nominal" if pt.index == 0 else str(pt.index)
            vals = " & ".join(f"{pt.values[p.name]:.4g}" for p in names)
            err = [("--" if e is None else f"{e:.1e}") for e in (pt.gain_error, pt.closed_loop_error)]
            out.append(f"{label} & {vals} & {err[0]} & {err[1]} & {text(pt.status)} \\\\")
        counts = report.counts(part)
        out += [r"\hline", r"\end{tabular}", r"\end{center}", "}",
                f"{counts['ok']} ok, {counts['fail']} failed, {counts['skipped']} skipped "
                "(skipped: a validity condition fails at that point)."]
    return out


def latex_report(design: Design, n_points: int = 10, seed: int = 0, extra_sections=None) -> str:
    """The full report as LaTeX source (compiles with pdflatex and texlive-latex-base).

    ``extra_sections``: LaTeX lines to place before the safety caution (for example the
    simulation section, :mod:`symgain.analysis.simulation.latex_section`); they may include figures.
    """
    model = design.model
    title = text(model.title or model.name)
    preamble = PREAMBLE + (r"\usepackage{graphicx}" + "\n" if extra_sections else "")
    out = [preamble, r"\title{Gain design report: " + title + "}",
           r"\author{Model \texttt{" + text(model.name) + r"}, derived in closed form by symgain}",
           r"\date{}", r"\begin{document}", r"\maketitle",
           "This report derives the gains as formulas in the plant's physical parameters, states "
           "where they hold, and checks them numerically. Symbols in formulas are the parameters "
           "of the table in Section 1; $k_i$ and similar are the unknown gains before the solution."]
    out += _plant(design)
    if design.warnings:
        out += [r"\section{Warnings}", r"\begin{itemize}"]
        out += [r"\item " + sentence(w) for w in design.warnings] + [r"\end{itemize}"]
    expanded = [p for p in design.parts() if not p.definitions]
    sensitivity = sensitivity_table(replace(design, **{p.part: None for p in design.parts() if p.definitions}))\
        if expanded else {}
    for part in design.parts():
        out += _part(design, part, sensitivity if not part.free_gains and not part.definitions else None)
        if part.definitions:
            out.append("The partial derivatives of a gain in compact form are not listed here; "
                       r"\texttt{symgain derive --json --sensitivity} writes them as definitions.")
    out += _check(design, n_points, seed)
    out += list(extra_sections or [])
    out += [r"\section{Safety caution}", text(CAUTION),
            r"\section*{Review}", "Reviewed and accepted by: "
            r"\rule{6cm}{0.4pt} \qquad Date: \rule{3cm}{0.4pt}", r"\end{document}"]
    return "\n".join(out) + "\n"
