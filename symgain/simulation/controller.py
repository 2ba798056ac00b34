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
from pathlib import Path

from ..design import Design
from ..errors import DesignError

__all__ = ["write_controller_module", "load_controller_module", "new_controller", "controller_keywords"]

_MODULES: dict[str, object] = {}  # per process: path -> imported module


def write_controller_module(design: Design, folder) -> Path:
    """Write the emitted Python module of the design into ``folder``; its path."""
    from ..emit import emit

    (path,) = emit(design, ["python"], folder)
    return path


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
    accepted = set(inspect.signature(controller_class).parameters) - {"T"}
    out = {}
    for name, value in values.items():
        for candidate in (name, name + "_p", name + "_p_p"):
            if candidate in accepted:
                out[candidate] = float(value)
                break
    return out


def new_controller(path, T: float | None, values: dict[str, float]):
    """A Controller of the emitted module at ``path`` with sample period T and the given parameter values."""
    cls = load_controller_module(path).Controller
    kwargs = controller_keywords(cls, values)
    return cls(T, **kwargs) if T is not None else cls(**kwargs)
