"""Python emitter: one standalone module that needs numpy only.

Each function takes the parameters as keyword arguments, accepts floats or
numpy arrays (broadcast together) and returns an array of shape
``(..., rows, cols)``. Before computing, it tests the validity conditions
(rule in :mod:`symgain.emit.common`) and raises ``ValueError`` naming the
condition and, for arrays, the first offending index; with ``on_invalid="nan"``
it returns NaN gains at the failing points instead (schedules use this: the
module is the one vectorized evaluator of the project, see
:mod:`symgain.analysis.evaluate`). Shared subexpressions
are computed once (``sympy.cse``). Names that are Python keywords get ``_p``
appended. Every argument must be a finite number with the declared sign of
its parameter (``ValueError`` otherwise, naming the argument), and a result
that is not finite raises ``ValueError`` instead of being returned. A value
outside the declared range of its parameter (the design envelope) raises
``ValueError`` naming the parameter, the value and the range; pass
``check_ranges=False`` to evaluate outside the envelope on purpose (the signs
are still enforced). With ``on_invalid="nan"`` out-of-range points get NaN
gains like any other invalid point, and numpy's divide/invalid warnings are
silenced inside the function (the NaN gains are the report). User text
(title, meanings, units) is escaped (:mod:`symgain.emit.escape`).

>>> import sympy as sp
>>> from symgain.model import Model, Parameter, TargetSpec
>>> from symgain.design import derive
>>> b = Parameter.declare("b", sign="real", range=(1, 2))
>>> model = Model(name="cart", parameters=(b,), states=("p", "v"), inputs=("F",),
...               A=sp.Matrix([[0, 1], [0, 0]]), B=sp.Matrix([[0], [b.symbol]]),
...               feedback=TargetSpec("poles", {"poles": (-1, -1)}))
>>> namespace = {}
>>> exec(python_module(derive(model)), namespace)
>>> namespace["feedback_gain"](b=[1.0, 2.0]).tolist()
[[[1.0, 2.0]], [[0.5, 1.0]]]
>>> namespace["feedback_gain"](b=[1.0, 0.0], on_invalid="nan").tolist()  # b = 0: outside [1, 2]
[[[1.0, 2.0]], [[nan, nan]]]
>>> namespace["feedback_gain"](b=3.0)
Traceback (most recent call last):
...
ValueError: feedback_gain: b = 3.0 lies outside its declared range [1, 2] (the design envelope) at these parameter values; pass check_ranges=False to evaluate outside it
>>> namespace["feedback_gain"](b=4.0, check_ranges=False).tolist()
[[0.25, 0.5]]
>>> namespace["feedback_gain"](b=0.0, check_ranges=False)  # valid when b != 0
Traceback (most recent call last):
...
ValueError: feedback_gain: condition b != 0 fails at these parameter values
"""
from __future__ import annotations

import sympy as sp
from sympy.printing.numpy import NumPyPrinter

from ..design import Design
from .common import (PYTHON_RESERVED, TOLERANCE, Function, design_functions, failure_rule, mangle,
                     shared_subexpressions)
from .escape import python_text

__all__ = ["python_module", "PythonPrinter"]


class PythonPrinter(NumPyPrinter):
    """sympy's NumPy printer, writing ``numpy.`` calls and plain float literals."""

    def __init__(self, settings=None):
        super().__init__(settings or {"fully_qualified_modules": True})

    def _print_Pow(self, expr, rational=False):
        if expr.exp == -1:
            return "1/" + self.parenthesize(expr.base, sp.printing.precedence.PRECEDENCE["Pow"])
        return super()._print_Pow(expr, rational=rational)


def _range_text(rng) -> str:
    return f"[{rng[0]:g}, {rng[1]:g}]" if rng else "no declared range"


_SIGN_WORDS = {"positive": "> 0", "nonnegative": ">= 0", "nonzero": "!= 0", "real": "any real"}


def _docstring(design: Design, fn: Function, names: dict[str, str]) -> list[str]:
    model = design.model
    signs = {p.name: p.sign for p in model.parameters}
    rows, cols = fn.shape
    lines = [f'"""{fn.part.capitalize()} {python_text(fn.key.replace("_", " "))} {fn.label} of '
             f"{model.name}: an array of shape (..., {rows}, {cols}).", ""]
    if fn.definitions:
        lines.append(f"Definitions, computed in order ({len(fn.definitions)}; compact form):")
        lines += [f"    {sp.sstr(sym)} = {python_text(sp.sstr(expr))}" for sym, expr in fn.definitions]
        lines.append("")
    lines.append("Formulas:")
    for i in range(rows):
        for j in range(cols):
            lines.append(f"    {fn.label}[{i}, {j}] = {python_text(sp.sstr(fn.matrix[i, j]))}")
    lines += ["", "Parameters (keyword only; floats or numpy arrays, broadcast together):"]
    for name, meaning, unit, rng in fn.meanings:
        shown = names[name] + (f" (model name {name})" if names[name] != name else "")
        unit_text = f" [{python_text(unit)}]" if unit else ""
        lines.append(f"    {shown}{unit_text}: {python_text(meaning) or 'no meaning given'}; "
                     f"{_SIGN_WORDS[signs.get(name, 'real')]}, range {_range_text(rng)}")
    if fn.branch is not None:
        lines += ["", f"Solution branch {fn.branch} of the design (several branches reach the target)."]
    if any(rng for *_, rng in fn.meanings):
        lines += ["", "Outside a declared range (the design envelope): ValueError, or NaN gains with",
                  "on_invalid=\"nan\"; check_ranges=False evaluates there (the signs still hold)."]
    lines += ["", "Valid when (otherwise ValueError):"]
    if fn.conditions or fn.nonnegative:
        lines += [f"    {python_text(sp.sstr(c))} != 0" for c in fn.conditions]
        lines += [f"    {python_text(sp.sstr(c))} >= 0  (the branch is real)" for c in fn.nonnegative]
        lines.append(f"    (fails where |f| <= {TOLERANCE['double']:g} * (1 + sum of |terms of f|), "
                     "or f < -that for f >= 0)")
    else:
        lines.append("    always (the declared signs rule out every singular case)")
    lines.append('"""')
    return lines


def _function(design: Design, fn: Function, printer: PythonPrinter) -> list[str]:
    names = {a: mangle(a, PYTHON_RESERVED) for a in fn.arguments}
    symbols = fn.matrix.free_symbols.union(*[c.free_symbols for c in (*fn.conditions, *fn.nonnegative)],
                                           *[e.free_symbols for _, e in fn.definitions])
    rename = {s: sp.Symbol(names[str(s)]) for s in symbols if str(s) in names}
    args = ", ".join(names[a] for a in fn.arguments)
    keywords = ", ".join([*([args] if args else []), 'on_invalid="raise"', "check_ranges=True"])
    body = [f"def {fn.name}(*, {keywords}):"]
    body += ["    " + line if line else "" for line in _docstring(design, fn, names)]
    signs = {p.name: p.sign for p in design.model.parameters}
    for a in fn.arguments:
        body.append(f"    {names[a]} = _argument({names[a]}, {names[a]!r}, {fn.name!r})")
    body.append(f"    shape = numpy.broadcast_shapes({', '.join(names[a] + '.shape' for a in fn.arguments)})")
    avoid = set(names.values()) | {"shape", "out", "numpy", "_fails", "_bad", "on_invalid", "check_ranges"}
    body.append("    _bad = _invalid_mask(on_invalid, shape)")
    head = len(body)  # from here on, the body runs inside _quiet(on_invalid)
    ranges = {p.name: p.range for p in design.model.parameters}
    for a in fn.arguments:
        body.append(f"    _bad = _sign({names[a]}, {names[a]!r}, {fn.name!r}, {signs.get(a, 'real')!r}, "
                    "shape, _bad)")
    for a in fn.arguments:
        if ranges.get(a) is not None:
            low, high = (float(v) for v in ranges[a])
            body.append(f"    _bad = _range({names[a]}, {names[a]!r}, {fn.name!r}, {low!r}, {high!r}, "
                        "check_ranges, shape, _bad)")
    definitions = [(sym, expr.xreplace(rename)) for sym, expr in fn.definitions]
    checks = fn.checked_after()

    def test(indexes):
        for index in indexes:
            cond, orig = fn.printed_conditions()[index].xreplace(rename), fn.conditions[index]
            (value,), terms = failure_rule(cond, definitions)
            scale = " + ".join(printer.doprint(abs(t)) if t.is_number else f"numpy.abs({printer.doprint(t)})"
                              for t in terms)
            body.append(f"    _bad = _fails(numpy.abs({printer.doprint(value)}) <= "
                        f"{TOLERANCE['double']!r} * (1.0 + {scale}), shape, "
                        f"{fn.name!r}, {sp.sstr(orig) + ' != 0'!r}, _bad)")

    test(checks.get(-1, ()))
    for k, (sym, expr) in enumerate(definitions):  # compact form: named quantities, in order
        body.append(f"    {sym} = {printer.doprint(expr)}")
        test(checks.get(k, ()))
    for cond in fn.nonnegative:  # a solution branch is real only where f >= 0
        (value,), terms = failure_rule(cond.xreplace(rename))
        scale = " + ".join(printer.doprint(abs(t)) if t.is_number else f"numpy.abs({printer.doprint(t)})"
                          for t in terms)
        body.append(f"    _bad = _fails({printer.doprint(value)} < -{TOLERANCE['double']!r} * (1.0 + {scale}), "
                    f"shape, {fn.name!r}, {sp.sstr(cond) + ' >= 0'!r}, _bad)")
    entries = [e.xreplace(rename) for e in fn.printed()]  # short-period stable forms (same values)
    if definitions:  # the definitions already share what there is to share
        replacements, reduced = [], entries
    else:
        replacements, reduced = shared_subexpressions(entries, avoid)
    rows, cols = fn.shape
    body.append(f"    out = numpy.empty(shape + ({rows}, {cols}))")
    statements = [(str(sym), expr) for sym, expr in replacements]
    statements += [(f"out[..., {k // cols}, {k % cols}]", expr) for k, expr in enumerate(reduced)]
    last_use = {}  # with many temporaries, free each after its last use (memory for large arrays)
    if len(replacements) > 30:
        temps = {sym for sym, _ in replacements}
        for index, (_, expr) in enumerate(statements):
            for sym in expr.free_symbols & temps:
                last_use[sym] = index
    done: dict[int, list[str]] = {}
    for sym, index in last_use.items():
        done.setdefault(index, []).append(str(sym))
    for index, (target, expr) in enumerate(statements):
        body.append(f"    {target} = {printer.doprint(expr)}")
        if index in done:
            body.append(f"    del {', '.join(sorted(done[index]))}")
    body.append(f"    return _finite(out, {fn.name!r}, _bad" + (", infinite=True)" if fn.infinite_ok else ")"))
    return body[:head] + ["    with _quiet(_bad):"] + ["    " + line for line in body[head:]]


_HELPER = '''
_SIGNS = {"positive": (lambda v: v > 0, "positive"), "nonnegative": (lambda v: v >= 0, "nonnegative"),
          "nonzero": (lambda v: v != 0, "nonzero"), "real": (lambda v: v == v, "real")}


def _where(bad):
    if bad.ndim == 0:
        return "at these parameter values"
    return f"at index {tuple(int(i) for i in numpy.argwhere(bad)[0])}"


def _argument(value, name, function):
    """The argument as a float array (text is refused, not converted)."""
    if isinstance(value, (str, bytes)):
        raise TypeError(f"{function}: {name} must be a number or an array of numbers, not text")
    return numpy.asarray(value, dtype=numpy.float64)


def _sign(value, name, function, sign, shape, mask):
    """Raise ValueError where the argument is not finite or breaks its declared sign,
    or, with a mask, add those points to it (their gains become NaN)."""
    test, word = _SIGNS[sign]
    with numpy.errstate(invalid="ignore"):
        bad = numpy.broadcast_to(~(numpy.isfinite(value) & test(value)), shape)
    if mask is not None:
        return mask | bad
    if bad.any():
        raise ValueError(f"{function}: {name} must be a finite {word} number (declared sign), "
                         f"fails {_where(bad)}")
    return None


def _range(value, name, function, low, high, check, shape, mask):
    """Raise ValueError where the argument lies outside its declared range [low, high]
    (unless check is False), or, with a mask, add those points to it."""
    if not check:
        return mask
    bad = numpy.broadcast_to(~((value >= low) & (value <= high)), shape)
    if mask is not None:
        return mask | bad
    if bad.any():
        shown = value if value.ndim == 0 else numpy.broadcast_to(value, shape)[tuple(numpy.argwhere(bad)[0])]
        raise ValueError(f"{function}: {name} = {float(shown)!r} lies outside its declared range "
                         f"[{low:g}, {high:g}] (the design envelope) {_where(bad)}; "
                         "pass check_ranges=False to evaluate outside it")
    return None


def _quiet(mask):
    """Inside the function with on_invalid="nan" (a mask): no numpy warnings, the NaN gains are the report."""
    return numpy.errstate(all="ignore") if mask is not None else numpy.errstate()


def _finite(out, function, mask, infinite=False):
    """The result: never inf or nan where it is returned as valid (ValueError instead,
    or NaN at the masked points with on_invalid="nan"); ``infinite``: +-inf is a value (no limit)."""
    ok = ~numpy.isnan(out) if infinite else numpy.isfinite(out)
    if mask is not None:
        out[mask | ~ok.all(axis=(-2, -1))] = numpy.nan
        return out
    bad = ~ok.all(axis=(-2, -1))
    if bad.any():
        raise ValueError(f"{function}: the gain is not finite {_where(bad)}")
    return out


def _invalid_mask(on_invalid, shape):
    """None to raise on a failed condition; a mask to collect failures ("nan")."""
    if on_invalid == "raise":
        return None
    if on_invalid == "nan":
        return numpy.zeros(shape, dtype=bool)
    raise ValueError(f"on_invalid must be 'raise' or 'nan', not {on_invalid!r}")


def _fails(bad, shape, function, condition, mask):
    """Raise ValueError where a validity condition fails (the first offending index),
    or, with a mask, add the failing points to it (their gains become NaN)."""
    bad = numpy.broadcast_to(bad, shape)
    if mask is not None:
        return mask | bad
    if bad.any():
        if bad.ndim == 0:
            raise ValueError(f"{function}: condition {condition} fails at these parameter values")
        index = tuple(int(i) for i in numpy.argwhere(bad)[0])
        raise ValueError(f"{function}: condition {condition} fails at index {index}")
    return None
'''


def python_module(design: Design) -> str:
    """The text of a standalone Python module (imports numpy only) for the design."""
    from .controller_python import (CONTROLLER_DOC, controller_blocker, controller_class,
                                     controller_functions, keyword_names)

    model = design.model
    printer = PythonPrinter()
    fns = design_functions(design)
    blocker = controller_blocker(design)
    if blocker is None:
        fns += controller_functions(design)
    head = [f'"""Closed-form gains of {model.name}' + (f": {python_text(model.title)}" if model.title else "")
            + ".",
            "",
            "Generated by symgain from the model's symbolic design; needs numpy only.",
            "Functions: " + ", ".join(f.name for f in fns) + ".",
            "Each refuses a parameter outside its declared sign or range (the design envelope);",
            "check_ranges=False evaluates outside the ranges on purpose.",
            (CONTROLLER_DOC + "." if blocker is None else f"No Controller class: {blocker}."),
            "Gains from a linear model must be validated in simulation and on the machine with safe limits;",
            "local codes, safety standards and licensed practice take precedence.",
            '"""', "import numpy", "", f"__all__ = {[f.name for f in fns] + (['Controller'] if blocker is None else [])!r}", _HELPER]
    from .stable_forms import printed_helpers

    head += printed_helpers((e for fn in fns for e in fn.printed()), printer, "python")
    for fn in fns:
        head += [""] + _function(design, fn, printer) + [""]
    if blocker is None:
        head += controller_class(design, printer, keyword_names(design))
    return "\n".join(head).rstrip() + "\n"
