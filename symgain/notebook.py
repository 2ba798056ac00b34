"""Rich display of models and designs in Jupyter (Markdown with LaTeX math).

:class:`~symgain.model.Model` and :class:`~symgain.design.Design` call these
from their ``_repr_markdown_`` methods, so a notebook cell that ends with a
model or a design shows its matrices, gains and conditions typeset.

>>> import sympy as sp
>>> from symgain.model import Model, Parameter, TargetSpec
>>> from symgain.design import derive
>>> m = Parameter.declare("m", sign="positive", range=(1, 2), unit="kg", meaning="mass")
>>> model = Model(name="cart", parameters=(m,), states=("p", "v"), inputs=("F",),
...               A=sp.Matrix([[0, 1], [0, 0]]), B=sp.Matrix([[0], [1 / m.symbol]]),
...               feedback=TargetSpec("poles", {"poles": (-1, -1)}))
>>> print(design_markdown(derive(model)).splitlines()[4])
$$K = \\left[\\begin{matrix}m & 2 m\\end{matrix}\\right]$$
"""
from __future__ import annotations

import sympy as sp

__all__ = ["model_markdown", "design_markdown"]


def _math(expr) -> str:
    return sp.latex(expr)


def _names(names) -> str:
    return ", ".join(f"`{n}`" for n in names) or "none"


def _escape(text: str) -> str:
    return str(text).replace("|", "\\|")


def model_markdown(model) -> str:
    """The model as Markdown: names, parameter table, matrices, notes and targets."""
    lines = [f"**{model.name}**" + (f": {_escape(model.title)}" if model.title else ""), "",
             f"states {_names(model.states)}; inputs {_names(model.inputs)}; "
             f"outputs {_names(model.outputs)}", "",
             "| parameter | sign | range | nominal | role | unit | meaning |",
             "| --- | --- | --- | --- | --- | --- | --- |"]
    for p in model.parameters:
        rng = f"[{p.range[0]:g}, {p.range[1]:g}]" if p.range else ""
        nominal = f"{p.nominal:g}" if p.nominal is not None else ""
        lines.append(f"| ${_math(p.symbol)}$ | {p.sign} | {rng} | {nominal} | {p.role} | "
                     f"{_escape(p.unit)} | {_escape(p.meaning)} |")
    lines.append("")
    matrices = [("A", model.A), ("B", model.B), ("C", model.C), ("D", model.D)]
    lines.append("$$" + ",\\quad ".join(f"{k} = {_math(v)}" for k, v in matrices if v is not None) + "$$")
    for note in model.notes:
        lines += ["", f"*note:* {_escape(note)}"]
    for part in ("feedback", "estimator", "integral"):
        spec = getattr(model, part)
        if spec is not None:
            shown = ", ".join(f"{k} = {sp.sstr(v)}" for k, v in spec.values.items())
            lines += ["", f"*{part} target:* {spec.kind} ({_escape(shown)})"]
    return "\n".join(lines) + "\n"


def design_markdown(design) -> str:
    """The design as Markdown: each part's gain, target and the conditions where it holds."""
    model = design.model
    lines = [f"**{model.name}**" + (f": {_escape(model.title)}" if model.title else ""), ""]
    for part in design.parts():
        lines += [f"*{part.part} gain {part.symbol}*", "", f"$${part.symbol} = {_math(part.gain)}$$"]
        for key, value in part.extra.items():
            if isinstance(value, sp.MatrixBase) and key != "gain_symbols":
                lines.append(f"$$\\text{{{key}}} = {_math(value)}$$")
        if part.target is not None:
            lines += ["", f"target: {_escape(part.target.description)}, "
                      f"$${_math(part.target.polynomial)}$$"]
        if part.valid_when:
            lines += ["", "valid when: " + ", ".join(f"${_math(c)}$" for c in part.valid_when)]
        else:
            lines += ["", "valid when: always (the declared signs rule out every singular case)"]
        for note in part.notes:
            lines += ["", f"*note:* {_escape(note)}"]
        if part.free_gains:
            lines += ["", "free gains: " + ", ".join(f"${_math(g)}$" for g in part.free_gains)]
        lines.append("")
    if not design.parts():
        lines.append("no design target given")
    return "\n".join(lines).rstrip() + "\n"
