"""The helper functions that emitted code calls for the short-period forms.

The forms themselves (Taylor remainders E_k, C_k, S_k in place of cancelling
exp/cos/sin terms) are derived in :mod:`symgain.design.short_period`; here each
remainder used becomes a small function of the emitted Python module or C file:
its series for |x| < 2 (Horner's scheme), the direct formula beyond.

>>> import sympy as sp
>>> from symgain.design.short_period import ExpRemainder
>>> from sympy.printing.numpy import NumPyPrinter
>>> lines = printed_helpers([ExpRemainder(sp.Symbol("x"), 1)], NumPyPrinter(), "python")
>>> [l for l in lines if l.startswith("def ")]
['def _exprem1(x):']
"""
from __future__ import annotations

import sympy as sp

from ..design.short_period import (CosRemainder, ExpRemainder, SinRemainder, remainders, stable_condition,  # noqa: F401
                                   stable_form)

__all__ = ["python_helpers", "c_helpers", "printed_helpers", "stable_form", "stable_condition", "ExpRemainder",
           "CosRemainder", "SinRemainder"]


def _series_coefficients(kind, k: int, terms: int) -> list:
    """Coefficients of the series in x (exp) or in x^2 (cos, sin) of the remainder."""
    if kind is ExpRemainder:
        return [sp.Rational(1, sp.factorial(j + k)) for j in range(terms)]
    shift = 0 if kind is CosRemainder else 1
    return [sp.Rational((-1)**(j + k), sp.factorial(2 * (j + k) + shift)) for j in range(terms)]


def _helper_parts(kind, k: int):
    x = sp.Symbol("x")
    terms = 28 if kind is ExpRemainder else 14
    coefficients = _series_coefficients(kind, k, terms)
    return x, coefficients, kind(x, k).direct(), ("x" if kind is ExpRemainder else "x * x")


def python_helpers(used, printer) -> list[str]:
    """The remainder functions of the emitted Python module (numpy only), one per (kind, order)."""
    out = []
    for kind, k in used:
        x, coefficients, direct, var = _helper_parts(kind, k)
        name = f"_{kind._c_name[:-1]}{k}"
        horner = repr(float(coefficients[-1]))
        for c in coefficients[-2::-1]:
            horner = f"({horner}) * s + {float(c)!r}"
        out += ["", "", f"def {name}(x):",
                f'    """{kind.__doc__[:-1]} with k = {k}, without cancellation (its series for |x| < 2)."""',
                "    x = numpy.asarray(x, dtype=numpy.float64)", "    small = numpy.abs(x) < 2.0",
                f"    s = numpy.where(small, x, 0.0){' ** 2' if var != 'x' else ''}",
                "    x = numpy.where(small, 1.0, x)",
                "    with numpy.errstate(all=\"ignore\"):",
                f"        return numpy.where(small, {horner}, {printer.doprint(direct)})"]
    return out


def c_helpers(used, printer, ctype: str) -> list[str]:
    """The remainder functions of the emitted C file (static, C99), one per (kind, order)."""
    fabs = "fabsf" if ctype == "float" else "fabs"
    out = []
    for kind, k in used:
        x, coefficients, direct, var = _helper_parts(kind, k)
        horner = printer.doprint(sp.Float(coefficients[-1], 20))
        for c in coefficients[-2::-1]:
            horner = f"({horner}) * s + {printer.doprint(sp.Float(c, 20))}"
        out += [f"/* {kind.__doc__[:-1]} with k = {k}, without cancellation (its series for |x| < 2). */",
                f"static {ctype} {kind._c_name[:-1]}{k}_({ctype} x)", "{",
                f"    if ({fabs}(x) < 2) {{", f"        const {ctype} s = {var};", f"        return {horner};", "    }",
                f"    return {printer.doprint(direct)};", "}", ""]
    return out


def printed_helpers(exprs, printer, language: str, ctype: str = "double") -> list[str]:
    """Every helper function (Taylor remainders) that the printed expressions call."""
    used = remainders(list(exprs))
    if language == "python":
        return python_helpers(used, printer)
    return c_helpers(used, printer, ctype)
