"""What a design holds: the gains, where they hold, and the derivation trail as data.

Every consumer (terminal, JSON, code, report, checks) reads one :class:`Design`.

>>> from symgain.model import Model
>>> gain_labels(Model.__new__(Model), "feedback", 1, 2)
(['1'], ['1', '2'])
"""
from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import sympy as sp

from ..model import Model
from .targets import Target

__all__ = ["Step", "Branch", "GainDesign", "Design", "GAIN_AXES", "gain_labels"]


@dataclass(frozen=True)
class Step:
    """One named step of a derivation: ``value`` is a sympy object (or a tuple of them)."""

    name: str
    title: str
    value: Any


@dataclass(frozen=True)
class Branch:
    """One solution branch of a design with several inputs (see :mod:`symgain.design.polynomial_systems`).

    ``gain`` and ``extra`` (e.g. ``integral_gain``) are the matrices of this branch; ``real_when``
    lists the conditions under which its formulas are real (empty: real wherever they hold).
    """

    index: int  # 1-based, as reported
    gain: sp.ImmutableMatrix
    valid_when: tuple = ()
    real_when: tuple = ()
    extra: dict = field(default_factory=dict)
    note: str = ""


@dataclass(frozen=True)
class GainDesign:
    """One designed gain (feedback K, estimator L, ...) with its derivation."""

    part: str  # "feedback", "estimator", "integral", "feedforward"
    symbol: str  # "K", "L", ...
    gain: sp.ImmutableMatrix
    valid_when: tuple[sp.Basic, ...]
    target: Target | None = None
    closed_loop_polynomial: sp.Expr | None = None  # with the gains as unknown symbols
    steps: tuple[Step, ...] = ()
    free_gains: tuple[sp.Symbol, ...] = ()
    notes: tuple[str, ...] = ()
    extra: dict = field(default_factory=dict)  # more matrices of the part, e.g. integral_gain
    branches: tuple[Branch, ...] = ()  # every solution branch when there are several (gain = the selected one)
    selected_branch: int | None = None  # the branch the model selects (key branch), None: all are emitted
    # compact form: named intermediate quantities, in order; the gain is written in their symbols
    definitions: tuple[tuple[sp.Symbol, sp.Expr], ...] = ()
    form: str = "expanded"  # "expanded" or "compact"

    def step(self, name: str) -> Step:
        for st in self.steps:
            if st.name == name:
                return st
        raise KeyError(name)


@dataclass(frozen=True)
class Design:
    """All designed parts of one model."""

    model: Model
    feedback: GainDesign | None = None
    estimator: GainDesign | None = None
    integral: GainDesign | None = None
    feedforward: GainDesign | None = None
    sampled: Any = None  # symgain.design.discretize.SampledPlant of a sampled-data design
    warnings: tuple[str, ...] = ()  # one line each, for stderr and the JSON result

    def parts(self) -> list[GainDesign]:
        """The designed parts, in pipeline order."""
        return [p for p in (self.feedback, self.estimator, self.integral, self.feedforward) if p]

    @property
    def valid_when(self) -> tuple[sp.Basic, ...]:
        """Every condition of every part, without duplicates."""
        return tuple(dict.fromkeys(c for p in self.parts() for c in p.valid_when))

    def _repr_markdown_(self) -> str:
        """Jupyter display: gains, targets and conditions (see :mod:`symgain.notebook`)."""
        from ..notebook import design_markdown

        return design_markdown(self)


EXTRA_SYMBOLS = {"integral_gain": "Ki"}  # the trade's name of each extra matrix of a part

GAIN_AXES = {  # which model names label the rows and columns of each gain matrix
    "feedback": ("inputs", "states"),
    "estimator": ("states", "outputs"),
    "integral": ("inputs", "states"),
    "integral_gain": ("inputs", "outputs"),
    "feedforward": ("inputs", "outputs"),
}


def gain_labels(model: Model, key: str, rows: int, cols: int) -> tuple[list[str], list[str]]:
    """Row and column names of a gain matrix (a part name or an extra key such as integral_gain).

    Falls back to 1, 2, ... where the names do not fit the shape.
    """
    rnames, cnames = GAIN_AXES.get(key, (None, None))
    rl = list(getattr(model, rnames, ())) if rnames else []
    cl = list(getattr(model, cnames, ())) if cnames else []
    if len(rl) != rows:
        rl = [str(i + 1) for i in range(rows)]
    if len(cl) != cols:
        cl = [str(j + 1) for j in range(cols)]
    return rl, cl


