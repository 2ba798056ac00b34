"""sympy expressions as numpy functions, safe from name clashes with printed constants.

sympy's ``lambdify`` prints Euler's number as ``e`` and pi as ``pi``; a model
parameter named ``e`` would then shadow the constant (even with
``dummify=True``). Here every argument is renamed to a private name first.

>>> import sympy as sp
>>> e, m = sp.symbols("e m", positive=True)
>>> f = lambdify([e, m], sp.E / (m * e))
>>> round(float(f(1.0, 2.0)), 6)
1.359141
"""
from __future__ import annotations

import sympy as sp

__all__ = ["lambdify"]


def _rename(expr, mapping):
    if isinstance(expr, (list, tuple)):
        return type(expr)(_rename(e, mapping) for e in expr)
    if isinstance(expr, sp.Basic):
        return expr.xreplace(mapping)
    return expr


def lambdify(args, expr, modules="numpy", **kwargs):
    """``sympy.lambdify`` with the arguments renamed to ``_arg0, _arg1, ...`` before printing."""
    args = list(args)
    private = [sp.Symbol(f"_arg{i}") for i in range(len(args))]
    mapping = dict(zip(args, private))
    return sp.lambdify(private, _rename(expr, mapping), modules=modules, **kwargs)
