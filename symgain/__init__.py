"""symgain: closed-form pole-placement gains as functions of a plant's physical parameters.

The pipeline: a model (TOML file or Python) -> ``derive`` -> a :class:`Design`
(gains, conditions, derivation trail) -> ``check_design`` (numeric second
opinion with scipy) and the emitters (JSON, Python, C, LaTeX).

>>> import symgain
>>> model = symgain.model_from_text('''
... name = "lift"
... [parameters]
... m = { sign = "positive", range = [2, 8] }
... w = { sign = "positive", range = [1, 4], role = "design" }
... [plant]
... states = ["h", "v"]
... inputs = ["F"]
... A = [[0, 1], [0, 0]]
... B = [[0], ["1/m"]]
... [feedback]
... poles = ["-w", "-w"]
... ''')
>>> design = symgain.derive(model)
>>> design.feedback.gain
Matrix([[m*w**2, 2*m*w]])
>>> symgain.check_design(design, n_points=5).passed
True
"""
import importlib

# Names are imported on first use (PEP 562), so that ``symgain --help`` does not load
# sympy, scipy or matplotlib; ``from symgain import derive`` works as usual.
_EXPORTS = {
    "model_from_equations": "symgain.model.builders", "model_from_matrices": "symgain.model.builders",
    "CheckReport": "symgain.analysis.check", "check_design": "symgain.analysis.check",
    "Design": "symgain.design", "GainDesign": "symgain.design", "derive": "symgain.design",
    "design_to_dict": "symgain.emit.json", "design_to_json": "symgain.emit.json",
    "DesignError": "symgain.errors", "ExpressionError": "symgain.errors", "ModelError": "symgain.errors",
    "NotControllableError": "symgain.errors", "SymgainError": "symgain.errors",
    "ClosedFormLimitation": "symgain.errors",
    "Model": "symgain.model", "Parameter": "symgain.model", "TargetSpec": "symgain.model",
    "load_model": "symgain.model.toml_file", "model_from_text": "symgain.model.toml_file",
}


def __getattr__(name: str):
    if name in _EXPORTS:
        value = getattr(importlib.import_module(_EXPORTS[name]), name)
        globals()[name] = value
        return value
    raise AttributeError(f"module 'symgain' has no attribute {name!r}")


def __dir__():
    return sorted([*globals(), *_EXPORTS])


__version__ = "0.1.0"

__all__ = [
    "load_model",
    "model_from_text",
    "model_from_matrices",
    "model_from_equations",
    "derive",
    "check_design",
    "design_to_json",
    "design_to_dict",
    "Model",
    "Parameter",
    "TargetSpec",
    "Design",
    "GainDesign",
    "CheckReport",
    "SymgainError",
    "ModelError",
    "ExpressionError",
    "DesignError",
    "NotControllableError",
    "ClosedFormLimitation",
]
