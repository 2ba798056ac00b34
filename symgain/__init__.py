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
from .model.builders import model_from_equations, model_from_matrices
from .analysis.check import CheckReport, check_design
from .design import Design, GainDesign, derive
from .emit.json import design_to_dict, design_to_json
from .errors import DesignError, ExpressionError, ModelError, NotControllableError, SymgainError
from .model import Model, Parameter, TargetSpec
from .model.toml_file import load_model, model_from_text

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
]
