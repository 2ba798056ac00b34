"""sympy expressions as numpy functions, safe from name clashes with printed constants.

sympy's ``lambdify`` prints Euler's number as ``e`` and pi as ``pi``; a model
parameter named ``e`` would then shadow the constant (even with
``dummify=True``). Here every argument is renamed to a private name first.

>>> import sympy as sp
>>> e, m = sp.symbols("e m", positive=True)
>>> f = lambdify([e, m], sp.E / (m * e))
>>> round(float(f(1.0, 2.0)), 6)
1.359141
>>> lambdify([e], sp.Matrix([[e, sp.E]]))(2.0).tolist()
[[2.0, 2.718281828459045]]
"""
from __future__ import annotations

import sympy as sp

__all__ = ["lambdify"]


def _free(expr) -> set:
    if isinstance(expr, (list, tuple)):
        return set().union(*(_free(e) for e in expr)) if expr else set()
    return set(expr.free_symbols) if isinstance(expr, (sp.Basic, sp.MatrixBase)) else set()


def _rename(expr, mapping):
    if isinstance(expr, (list, tuple)):
        return type(expr)(_rename(e, mapping) for e in expr)
    if isinstance(expr, (sp.Basic, sp.MatrixBase)):
        return expr.xreplace(mapping)
    return expr


def lambdify(args, expr, modules="numpy", **kwargs):
    """``sympy.lambdify`` with the arguments renamed to ``_arg0, _arg1, ...`` before printing.

    A free symbol with the name of an argument is that argument, whatever its
    assumptions (as in sympy's own printing-based matching).
    """
    args = list(args)
    private = [sp.Symbol(f"_arg{i}") for i in range(len(args))]
    by_name = {str(a): p for a, p in zip(args, private)}  # symbols match by name, as printing did
    mapping = {s: by_name[str(s)] for s in _free(expr) if str(s) in by_name}
    mapping.update(zip(args, private))
    return sp.lambdify(private, _rename(expr, mapping), modules=modules, **kwargs)
