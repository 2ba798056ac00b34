"""The controller under test: the ``Controller`` class of the module ``symgain emit --to python`` writes.

The simulation does not carry a second copy of the control law: it writes
the emitted module into a folder, imports it with importlib and drives its
``Controller`` (the shared controller contract: ``Controller(T, **params)``,
``step(y, r)``, ``reset()``, ``set_parameters(...)``, ``saturated``).

>>> import sympy as sp, tempfile
>>> from symgain.model import Model, Parameter, TargetSpec
>>> from symgain.design import derive
>>> m = Parameter.declare("m", sign="positive", range=(1, 3))
>>> model = Model(name="cart", parameters=(m,), states=("p", "v"), inputs=("F",),
...               A=sp.Matrix([[0, 1], [0, 0]]), B=sp.Matrix([[0], [1 / m.symbol]]),
...               feedback=TargetSpec("poles", {"poles": (-1, -2)}))
>>> path = write_controller_module(derive(model), tempfile.mkdtemp())
>>> path.name
'cart.py'
>>> ctl = new_controller(path, 0.01, {"m": 2.0})
>>> ctl.step([1.0, 0.0]).tolist()
[-4.0]
"""
from __future__ import annotations

import importlib.util
import inspect
import sys
from dataclasses import replace
from pathlib import Path

import sympy as sp

from ...design import Design
from ...errors import DesignError, Where

__all__ = ["write_controller_module", "load_controller_module", "new_controller", "controller_keywords",
           "fix_free_gains"]

_MODULES: dict[str, object] = {}  # per process: path -> imported module


def write_controller_module(design: Design, folder) -> Path:
    """Write the emitted Python module of the design into ``folder``; its path.

    A design whose target leaves free gains gets them fixed first (``free_gains``, default 0:
    any value places the poles); other designs without a Controller are refused.
    """
    from ...emit import emit
    from ...emit.controller_python import controller_blocker

    blocker = controller_blocker(design)
    if blocker is not None:
        raise DesignError(f"simulate runs the emitted Controller, and there is none: {blocker}",
                          where=Where(design.model.source))
    (path,) = emit(design, ["python"], folder)
    return path


def fix_free_gains(design: Design, values: dict | None = None) -> tuple[Design, dict]:
    """The design with every free gain replaced by a number (given, else 0), and the values used.

    >>> import sympy as sp
    >>> from symgain.design import Design, GainDesign
    >>> k = sp.Symbol("k_21")
    >>> part = GainDesign("feedback", "K", sp.ImmutableMatrix([[1, k]]), (), free_gains=(k,))
    >>> fixed, used = fix_free_gains(Design(model=None, feedback=part))
    >>> fixed.feedback.gain, fixed.feedback.free_gains, used
    (Matrix([[1, 0]]), (), {'k_21': 0.0})
    """
    values = dict(values or {})
    free = {s for part in design.parts() for s in part.free_gains}
    if not free:
        return design, {}
    used = {str(s): float(values.get(str(s), 0.0)) for s in sorted(free, key=str)}
    point = {s: sp.Float(used[str(s)]) if used[str(s)] else sp.Integer(0) for s in free}

    def fixed(part):
        if part is None:
            return None
        extra = {k: (sp.ImmutableMatrix(v.xreplace(point)) if isinstance(v, sp.MatrixBase) and k != "gain_symbols"
                     else v) for k, v in part.extra.items()}
        valid = tuple(c.xreplace(point) for c in part.valid_when)
        return replace(part, gain=sp.ImmutableMatrix(part.gain.xreplace(point)), free_gains=(), extra=extra,
                       valid_when=tuple(c for c in valid if c is not sp.true))

    return replace(design, feedback=fixed(design.feedback), estimator=fixed(design.estimator),
                   integral=fixed(design.integral), feedforward=fixed(design.feedforward)), used


def load_controller_module(path) -> object:
    """Import the emitted module at ``path`` (once per process) and check it has a Controller."""
    path = str(Path(path).resolve())
    if path not in _MODULES:
        name = f"_symgain_emitted_{len(_MODULES)}_{Path(path).stem}"
        spec = importlib.util.spec_from_file_location(name, path)
        module = importlib.util.module_from_spec(spec)
        sys.modules[name] = module
        spec.loader.exec_module(module)
        if not hasattr(module, "Controller"):
            raise DesignError("the emitted Python module has no Controller class")
        _MODULES[path] = module
    return _MODULES[path]


def controller_keywords(controller_class, values: dict[str, float]) -> dict[str, float]:
    """The keyword arguments the Controller accepts, from parameter values (reserved names mangled)."""
    declared = getattr(controller_class, "PARAMETERS", None)
    accepted = set(declared) if declared is not None else set(inspect.signature(controller_class).parameters) - {"T"}
    out = {}
    for name, value in values.items():
        for candidate in (name, name + "_p", name + "_p_p"):
            if candidate in accepted:
                out[candidate] = float(value)
                break
    return out


def new_controller(path, T: float | None, values: dict[str, float]):
    """A Controller of the emitted module at ``path`` with sample period T (None: the design's own)
    and the given parameter values."""
    cls = load_controller_module(path).Controller
    kwargs = controller_keywords(cls, values)
    period = getattr(cls, "PERIOD_PARAMETER", None)  # a declared parameter that is the sample period
    if period is not None and period in kwargs:
        value = kwargs.pop(period)
        T = value if T is None else T
    return cls(T, **kwargs)
