"""The model stage: plant matrices, parameters and targets, from a file or from Python.

Loading ends here (TOML, LaTeX matrices, equations of motion, Python builders):
nothing downstream knows where a model came from.

| module | holds |
| --- | --- |
| ``expressions`` | the safe reader of expression text (never eval or sympify) |
| ``definition`` | ``Parameter``, ``TargetSpec``, ``Model`` (frozen, validated at construction) |
| ``toml_file`` | model file (TOML) -> ``Model`` |
| ``latex_matrix`` | LaTeX matrices -> sympy matrices |
| ``equations`` | nonlinear equations of motion -> linearized ``A``, ``B`` |
| ``builders`` | ``model_from_matrices``, ``model_from_equations`` for the Python API |

>>> from symgain.model import Model, Parameter
>>> Parameter.declare("m", sign="positive", range=(1, 2)).nominal
1.5
"""
from .definition import S, Model, Parameter, TargetSpec
from .toml_file import load_model, model_from_dict, model_from_text
from .builders import model_from_equations, model_from_matrices

__all__ = ["S", "Model", "Parameter", "TargetSpec", "load_model", "model_from_dict", "model_from_text",
           "model_from_equations", "model_from_matrices"]
