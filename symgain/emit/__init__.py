"""Emitters: one module per output language, each reading a :class:`~symgain.design.Design`.

:func:`emit` renders every requested target in memory first and only then
writes the files (each atomically), so a failure while rendering leaves no
output at all.

>>> import sympy as sp, tempfile
>>> from symgain.model import Model, Parameter, TargetSpec
>>> from symgain.design import derive
>>> m = Parameter.declare("m", sign="positive", range=(1, 2))
>>> model = Model(name="cart", parameters=(m,), states=("p", "v"), inputs=("F",),
...               A=sp.Matrix([[0, 1], [0, 0]]), B=sp.Matrix([[0], [1 / m.symbol]]),
...               feedback=TargetSpec("poles", {"poles": (-1, -1)}))
>>> [p.name for p in emit(derive(model), ["python", "c", "json"], tempfile.mkdtemp())]
['cart.py', 'cart.h', 'cart.c', 'cart.json']
"""
from __future__ import annotations

from pathlib import Path
from typing import TYPE_CHECKING

from ..errors import OutputError, printable

if TYPE_CHECKING:  # the design stage (sympy) loads only when something is rendered
    from ..design import Design

__all__ = ["emit", "render", "TARGETS"]

TARGETS = ("python", "c", "latex", "json")


def render(design: Design, targets, name: str | None = None, precision: str = "double",
           latex_sections=None) -> dict[str, str]:
    """File name -> text for each target (nothing is written); ``latex_sections``: extra report sections."""
    from ..design import Design
    from ..model.identifiers import C_KEYWORDS, PYTHON_KEYWORDS, describe_name, is_identifier

    if not isinstance(design, Design):
        raise OutputError(f"emit needs a Design (from derive), found {type(design).__name__}")
    name = design.model.name if name is None else name
    if not is_identifier(name):
        raise OutputError(f"name {printable(repr(name), 60)} is not a name: {describe_name(name)} "
                          "(it names files, the Python module and C functions)")
    if name in PYTHON_KEYWORDS or name in C_KEYWORDS:
        raise OutputError(f"name {name!r} is a Python or C keyword; choose another with --name")
    if not isinstance(precision, str) or precision not in ("double", "single"):
        raise OutputError(f"precision must be 'double' or 'single', found {printable(repr(precision), 40)}")
    if isinstance(targets, str):
        targets = [targets]
    if not isinstance(targets, (list, tuple, set, frozenset)) or not targets:
        raise OutputError(f"targets must be a list such as ['python', 'c'], found {type(targets).__name__}")
    texts: dict[str, str] = {}
    for target in dict.fromkeys(targets):
        if target == "python":
            from .python import python_module
            texts[f"{name}.py"] = python_module(design)
        elif target == "c":
            from .c import c_files
            texts[f"{name}.h"], texts[f"{name}.c"] = c_files(design, name, precision)
        elif target == "latex":
            from .latex import latex_report
            texts[f"{name}.tex"] = latex_report(design, extra_sections=latex_sections)
        elif target == "json":
            from .json import design_to_json
            texts[f"{name}.json"] = design_to_json(design) + "\n"
        else:
            raise OutputError(f"unknown target {printable(repr(target), 40)}; choose from {', '.join(TARGETS)}")
    return texts


def emit(design: Design, targets, out_dir=".", name: str | None = None,
         precision: str = "double", latex_sections=None, extra_files=None) -> list[Path]:
    """Write the design as the given targets into ``out_dir``; the written paths.

    ``extra_files`` (name -> text or bytes, e.g. the figures of ``latex_sections``) join the
    same all-or-nothing set.
    """
    from .files import write_files
    texts = render(design, targets, name, precision, latex_sections)
    return write_files(out_dir, {**texts, **dict(extra_files or {})})
