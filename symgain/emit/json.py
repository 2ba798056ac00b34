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
"""
from __future__ import annotations

import json

import sympy as sp

from ..design import Design, GainDesign
from ..analysis.sensitivity import sensitivity_matrices

__all__ = ["design_to_dict", "design_to_json"]


def _matrix(mat) -> list[list[str]]:
    return [[sp.sstr(e) for e in mat.row(i)] for i in range(mat.rows)]


def _part(part: GainDesign, sensitivity: dict | None = None) -> dict:
    out = {"gain": _matrix(part.gain), "valid_when": [sp.sstr(c) for c in part.valid_when]}
    for key, value in part.extra.items():
        if key == "gain_symbols":
            continue
        out[key] = _matrix(value) if isinstance(value, sp.MatrixBase) else sp.sstr(value)
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
    if sensitivity is not None:
        out["sensitivity"] = {name: _matrix(mat) for name, mat in sensitivity.items()}
    return out


def design_to_dict(design: Design) -> dict:
    """The contract's JSON object as Python data (strings that sympy.sympify reads back)."""
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
    if design.warnings:
        out["warnings"] = list(design.warnings)
    sensitivity = sensitivity_matrices(design)
    for part in design.parts():
        out[part.part] = _part(part, sensitivity.get(part.part))
    return out


def design_to_json(design: Design, indent: int = 2) -> str:
    return json.dumps(design_to_dict(design), indent=indent)
