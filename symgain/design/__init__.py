"""The design stage: from a ``Model`` to a ``Design`` (gains, conditions, derivation trail).

| module | holds |
| --- | --- |
| ``algebra`` | exact fraction field of the parameters (FLINT), sparse LU, characteristic polynomial |
| ``targets``, ``prototypes`` | target forms -> monic polynomial; prototype tables with sources |
| ``placement`` | single-input coefficient matching and Ackermann's formula |
| ``compact``, ``compact_design`` | the compact form for large plants: named definitions in order |
| ``validity`` | nonzero conditions from factors and sign assumptions |
| ``result`` | ``Step``, ``GainDesign``, ``Design`` (what every consumer reads) |
| ``single_input`` | ``design_gain``: the one placement entry every part uses |
| ``several_inputs`` | gain patterns and input directions for several inputs; the route chosen |
| ``polynomial_systems`` | polynomial coefficient equations solved branch by branch (factored eliminating polynomials) |
| ``decoupled`` | plants that split into blocks of states and inputs, designed block by block |
| ``canonical_form`` | the multi-input controllable canonical form (Luenberger) and its unique gain |
| ``target_split`` | one target polynomial shared out over blocks or chains |
| ``estimator``, ``integral_action``, ``feedforward`` | the parts, as uses of the placement entry |
| ``diagnostics`` | warnings: conditions that can fail in the ranges, name clashes, ill-conditioned gains |
| ``derive`` | ``derive(model)``: every part the model asks for |

Imports flow one way: result <- single_input <- several_inputs <- parts <- derive.

>>> from symgain.design import derive, Design
>>> callable(derive) and Design.__name__
'Design'
"""
from .result import EXTRA_SYMBOLS, GAIN_AXES, Branch, Design, GainDesign, Step, gain_labels
from .single_input import design_gain
from .derive import derive

__all__ = ["EXTRA_SYMBOLS", "GAIN_AXES", "Branch", "Design", "GainDesign", "Step", "gain_labels", "design_gain", "derive"]
