"""The machine-readable result (JSON contract of the model-file reference).

>>> import sympy as sp
>>> from symgain.model import Model, Parameter, TargetSpec
>>> from symgain.design import derive
>>> m = Parameter.declare("m", sign="positive", range=(1, 2))
>>> model = Model(name="cart", parameters=(m,), states=("p", "v"), inputs=("F",),
...               A=sp.Matrix([[0, 1], [0, 0]]), B=sp.Matrix([[0], [1 / m.symbol]]),
...               feedback=TargetSpec("poles", {"poles": (-1, -1)}))
>>> design_to_dict(derive(model))["feedback"]["gain"]
[['m', '2*m']]
>>> design_to_dict(derive(model))["feedback"]["sensitivity"]  # dK/dm, one matrix per parameter
{'m': [['1', '2']]}
>>> design_to_dict(derive(model))["feedback"]["form"]
'expanded'

A part in compact form adds ``definitions`` (pairs ``[name, formula]`` to evaluate in
order; the gain is written in these names). Its sensitivities are included only when
asked (``sensitivity=True``), as ``sensitivity_definitions`` followed by ``sensitivity``.
"""
from __future__ import annotations

import json

import sympy as sp

from ..design import Design, GainDesign

__all__ = ["design_to_dict", "design_to_json"]


def _matrix(mat) -> list[list[str]]:
    return [[sp.sstr(e) for e in mat.row(i)] for i in range(mat.rows)]


def _part(part: GainDesign, sensitivity: dict | None = None, added=()) -> dict:
    out = {"form": part.form}
    if part.definitions:
        out["definitions"] = [[str(s), sp.sstr(e)] for s, e in part.definitions]
        for step in part.steps:  # compact form: det Ctrb, factored, where it was affordable
            if step.name.endswith("_determinant"):
                out[step.name] = sp.sstr(step.value)
    out |= {"gain": _matrix(part.gain), "valid_when": [sp.sstr(c) for c in part.valid_when]}
    for key, value in part.extra.items():
        if key == "gain_symbols":
            continue
        if isinstance(value, sp.MatrixBase):
            out[key] = _matrix(value)
        elif isinstance(value, (tuple, list)):
            out[key] = [sp.sstr(v) for v in value]
        else:
            out[key] = sp.sstr(value)
    if part.target is not None:
        out["target_polynomial"] = sp.sstr(part.target.polynomial)
        out["target"] = part.target.description
    if part.closed_loop_polynomial is not None:
        out["closed_loop_polynomial"] = sp.sstr(part.closed_loop_polynomial)
    if "gain_symbols" in part.extra:
        out["gain_symbols"] = _matrix(part.extra["gain_symbols"])
    if part.free_gains:
        out["free_gains"] = [str(s) for s in part.free_gains]
    if part.notes:
        out["notes"] = list(part.notes)
    if part.branches:  # every real solution branch, with the conditions for it to be real
        out["selected_branch"] = part.selected_branch if part.selected_branch is not None else "all"
        out["branches"] = [{"branch": b.index, "gain": _matrix(b.gain),
                            **{key: _matrix(v) for key, v in b.extra.items()},
                            "valid_when": [sp.sstr(c) for c in b.valid_when],
                            "real_when": [sp.sstr(c) for c in b.real_when],
                            **({"note": b.note} if b.note else {})} for b in part.branches]
    if added:
        out["sensitivity_definitions"] = [[str(s), sp.sstr(e)] for s, e in added]
    if sensitivity is not None:
        out["sensitivity"] = {name: _matrix(mat) for name, mat in sensitivity.items()}
    return out


def design_to_dict(design: Design, sensitivity: bool | None = None) -> dict:
    """The contract's JSON object as Python data (strings that sympy.sympify reads back).

    ``sensitivity``: None includes the partial derivatives of expanded parts only (they
    are cheap there); True includes them for every part; False for none.
    """
    model = design.model
    out = {
        "name": model.name,
        "title": model.title,
        "parameters": [p.name for p in model.parameters],
        "states": list(model.states),
        "inputs": list(model.inputs),
        "outputs": list(model.outputs),
    }
    if model.notes:
        out["plant_notes"] = list(model.notes)
    if model.extra.get("equilibrium"):
        out["equilibrium"] = {str(k): sp.sstr(v) for k, v in model.extra["equilibrium"].items()}
    if design.sampled is not None:
        sampled = design.sampled
        out["sampled"] = {"sample_time": sp.sstr(sampled.period), "method": sampled.method,
                          "Phi": _matrix(sampled.Phi), "Gamma": _matrix(sampled.Gamma),
                          "valid_when": [sp.sstr(c) for c in sampled.valid_when], "notes": list(sampled.notes),
                          "estimator_form": model.sampling.estimator_form}
    out["warnings"] = list(design.warnings)
    wanted = [p for p in design.parts() if sensitivity or (sensitivity is None and not p.definitions)]
    matrices, added = _sensitivities(design, wanted) if wanted else ({}, {})
    for part in design.parts():
        out[part.part] = _part(part, matrices.get(part.part), added.get(part.part, ()))
    return out


def _sensitivities(design: Design, parts) -> tuple[dict, dict]:
    """part -> parameter -> dK/dp matrix, and part -> added definitions (compact form)."""
    from dataclasses import replace

    from ..analysis.sensitivity import sensitivity_table

    chosen = {p.part: p for p in parts}
    subset = replace(design, **{name: chosen.get(name) for name in ("feedback", "estimator", "integral",
                                                                     "feedforward")})
    table, added = sensitivity_table(subset, with_definitions=True)
    matrices = {}
    for part in parts:
        rows, cols = part.gain.shape
        matrices[part.part] = {p.name: sp.Matrix(rows, cols, lambda i, j, _n=p.name: table[part.part][(i, j, _n)])
                               for p in design.model.parameters}
    return matrices, added


def design_to_json(design: Design, indent: int = 2, sensitivity: bool | None = None) -> str:
    """:func:`design_to_dict` as JSON text."""
    return json.dumps(design_to_dict(design, sensitivity), indent=indent)
