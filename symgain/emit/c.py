"""C99 emitter: a header and a source file that need nothing beyond <math.h>.

For each designed matrix ``int PREFIX_<function>(double p1, ..., double G[ROWS][COLS])``:
parameters in declaration order, the matrix last (row-major). It returns 0
on success, ``-k`` when the k-th argument is not finite or breaks the
declared sign of its parameter, ``-(n + k)`` (n arguments) when the k-th
argument lies outside the declared range of its parameter (the design
envelope; compiling the source with ``-D<PREFIX>_NO_RANGE_CHECKS`` removes
these tests, see :func:`symgain.emit.common.range_macro`), ``k`` when the k-th validity condition fails
(rule in :mod:`symgain.emit.common`) and ``n + 1`` (n conditions) when an
entry comes out not finite; on any failure the matrix is left untouched. Shared
subexpressions become ``const double`` locals; no dynamic memory. With
``precision="single"`` everything is ``float`` with ``f``-suffixed literals
and functions. Names that are C keywords, <math.h> names, the matrix
argument or a local name get ``_p`` appended (documented in the header).
User text (title, meanings, units) is escaped for comments
(:func:`symgain.emit.escape.c_comment`).

>>> import sympy as sp
>>> from symgain.model import Model, Parameter, TargetSpec
>>> from symgain.design import derive
>>> m = Parameter.declare("m", sign="positive", range=(1, 2))
>>> model = Model(name="cart", parameters=(m,), states=("p", "v"), inputs=("F",),
...               A=sp.Matrix([[0, 1], [0, 0]]), B=sp.Matrix([[0], [1 / m.symbol]]),
...               feedback=TargetSpec("poles", {"poles": (-1, -1)}))
>>> header, source = c_files(derive(model), "cart")
>>> [line for line in header.splitlines() if line.startswith("int ")][0]
'int cart_feedback_gain(double m, double K[1][2]);'
>>> "value_[0][1] = 2*m;" in source
True
>>> start = source.index("#ifndef CART_NO_RANGE_CHECKS")  # m outside [1, 2]: -2, K untouched
>>> print(source[start:source.index("#endif", start) + 6])
#ifndef CART_NO_RANGE_CHECKS
    if (!(m >= 1.0 && m <= 2.0)) {
        return -2;
    }
#endif
"""
from __future__ import annotations

import sympy as sp
from sympy.codegen.ast import float32, float64, real
from sympy.printing.c import C99CodePrinter
from sympy.printing.precedence import PRECEDENCE

from ..design import Design
from ..errors import OutputError, printable
from ..model.identifiers import C_RESERVED
from .common import (TOLERANCE, Function, design_functions, failure_rule, mangle, range_macro, range_test,
                     shared_subexpressions)
from .escape import c_comment

__all__ = ["c_files", "CPrinter", "C_RESERVED", "c_operation_counts"]




class CPrinter(C99CodePrinter):
    """sympy's C99 printer: small integer powers as products, ``f`` suffix in single precision."""

    type_literal_suffixes = {**C99CodePrinter.type_literal_suffixes, float32: "f"}

    def _print_Pow(self, expr):
        exp = expr.exp
        if exp.is_Integer and 2 <= abs(int(exp)) <= 4:
            base = self.parenthesize(expr.base, PRECEDENCE["Pow"])
            product = "*".join([base] * abs(int(exp)))
            if exp > 0:
                return f"({product})"
            return f"({'1.0f' if self._single else '1.0'}/({product}))"
        return super()._print_Pow(expr)

    def _print_NumberSymbol(self, expr):  # pi, E, ...: a literal, as strict C99 has no M_PI
        return self._print(sp.Float(expr.evalf(20), 20))

    _print_Pi = _print_Exp1 = _print_EulerGamma = _print_GoldenRatio = _print_Catalan = _print_NumberSymbol

    @property
    def _single(self) -> bool:
        return self.type_aliases.get(real) == float32  # (the C printers take type_aliases out of the settings)


def _printer(precision: str) -> CPrinter:
    return CPrinter({"type_aliases": {real: float32 if precision == "single" else float64},
                     "math_macros": {}})


_LOCAL = "value_"  # the local matrix that holds the entries until all are known to be finite


def _names(fn: Function, avoid: set[str]) -> dict[str, str]:
    reserved = set(C_RESERVED) | {fn.label, _LOCAL} | avoid
    return {a: mangle(a, reserved) for a in fn.arguments}


def _range(rng) -> str:
    return f"[{rng[0]:g}, {rng[1]:g}]" if rng else "no declared range"


def _signature(fn: Function, prefix: str, names: dict[str, str], ctype: str) -> str:
    rows, cols = fn.shape
    args = [f"{ctype} {names[a]}" for a in fn.arguments] + [f"{ctype} {fn.label}[{rows}][{cols}]"]
    return f"int {prefix}_{fn.name}({', '.join(args)})"


_SIGN_TEST = {"positive": ">", "nonnegative": ">=", "nonzero": "!="}


def _comment(fn: Function, names: dict[str, str], signs: dict[str, str], ranges: dict | None = None,
             macro: str = "") -> list[str]:
    rows, cols = fn.shape
    lines = [f"/* {fn.part} {c_comment(fn.key.replace('_', ' '))} {fn.label}: {rows} x {cols}, row-major.",
             " *"]
    for name, meaning, unit, rng in fn.meanings:
        shown = names[name] + (f" (model name {name}, mangled)" if names[name] != name else "")
        sign = signs.get(name, "real")
        lines.append(f" * {shown}: {c_comment(meaning) or 'no meaning given'}"
                     + (f" [{c_comment(unit)}]" if unit else "")
                     + (f", {_SIGN_TEST[sign]} 0" if sign in _SIGN_TEST else "") + f", range {_range(rng)}")
    if fn.definitions:
        lines.append(" *")
        lines.append(f" * compact form: {len(fn.definitions)} named intermediate quantities (controllability")
        lines.append(" * columns, a fixed-pivot elimination, Ackermann's formula by Horner's rule), computed")
        lines.append(" * in order; each pivot is tested before it divides anything.")
    lines.append(" *")
    lines.append(" * returns 0 on success;")
    for k, a in enumerate(fn.arguments, start=1):
        sign = signs.get(a, "real")
        need = f"finite and {_SIGN_TEST[sign]} 0" if sign in _SIGN_TEST else "finite"
        lines.append(f" * returns -{k} when {names[a]} is not {need};")
    ranges = ranges or {}
    for k, a in enumerate(fn.arguments, start=len(fn.arguments) + 1):
        if ranges.get(a) is not None:
            lines.append(f" * returns -{k} when {names[a]} lies outside {_range(ranges[a])} "
                         f"(unless compiled with {macro});")
    for k, cond in enumerate(fn.conditions, start=1):
        lines.append(f" * returns {k} when {c_comment(sp.sstr(cond))} == 0;")
    for k, cond in enumerate(fn.nonnegative, start=len(fn.conditions) + 1):
        lines.append(f" * returns {k} when {c_comment(sp.sstr(cond))} < 0 (this branch is not real there);")
    if fn.branch is not None:
        lines.append(f" * solution branch {fn.branch} of the design (several branches reach the target).")
    if not fn.conditions and not fn.nonnegative:
        lines.append(" * valid for every parameter value allowed by the declared signs;")
    lines.append(f" * returns {len(fn.conditions) + len(fn.nonnegative) + 1} when an entry comes out not finite;")
    lines.append(f" * on any failure {fn.label} is left untouched.")
    lines.append(" */")
    return lines


def _renamed(fn: Function, names):
    symbols = fn.matrix.free_symbols.union(*[c.free_symbols for c in (*fn.conditions, *fn.nonnegative)],
                                           *[e.free_symbols for _, e in fn.definitions])
    rename = {s: sp.Symbol(names[str(s)]) for s in symbols if str(s) in names}
    return ([e.xreplace(rename) for e in fn.printed()], [c.xreplace(rename) for c in fn.printed_conditions()],
            [(sym, e.xreplace(rename)) for sym, e in fn.definitions], [c.xreplace(rename) for c in fn.nonnegative])


def _body(fn: Function, names, printer: CPrinter, ctype: str, tol: float, cse: bool = True,
          signs: dict | None = None, ranges: dict | None = None, macro: str = "") -> list[str]:
    entries, conditions, definitions, nonnegative = _renamed(fn, names)
    avoid = set(names.values()) | {fn.label, _LOCAL} | {str(sym) for sym, _ in definitions}
    lines = []
    fabs = "fabsf" if ctype == "float" else "fabs"
    one = "1.0f" if ctype == "float" else "1.0"
    zero = "0.0f" if ctype == "float" else "0.0"
    lit = f"{tol!r}f" if ctype == "float" else repr(tol)
    for k, a in enumerate(fn.arguments, start=1):  # every argument is tested, so every one is used
        sign = (signs or {}).get(a, "real")
        check = f"!isfinite({names[a]})"
        if sign in _SIGN_TEST:
            check += f" || !({names[a]} {_SIGN_TEST[sign]} {zero})"
        lines += [f"    if ({check}) {{", f"        return -{k};", "    }"]
    outside = [(k, range_test(names[a], (ranges or {}).get(a), ctype))
               for k, a in enumerate(fn.arguments, start=len(fn.arguments) + 1)]
    outside = [(k, test) for k, test in outside if test is not None]
    if outside:  # the design envelope; removable at compile time
        lines.append(f"#ifndef {macro}")
        for k, test in outside:
            lines += [f"    if ({test}) {{", f"        return -{k};", "    }"]
        lines.append("#endif")
    checks = fn.checked_after()

    def test(indexes):
        for index in indexes:
            (value,), terms = failure_rule(conditions[index], definitions)
            scale = " + ".join(printer.doprint(abs(t)) if t.is_number else f"{fabs}({printer.doprint(t)})"
                               for t in terms)
            lines.append(f"    if ({fabs}({printer.doprint(value)}) <= {lit} * ({one} + {scale})) {{")
            lines.append(f"        return {index + 1};")
            lines.append("    }")

    test(checks.get(-1, ()))
    for k, (sym, expr) in enumerate(definitions):  # compact form: named quantities, in order
        lines.append(f"    const {ctype} {sym} = {printer.doprint(expr)};")
        test(checks.get(k, ()))
    for k, cond in enumerate(nonnegative, start=len(conditions) + 1):  # a solution branch is real where f >= 0
        (value,), terms = failure_rule(cond)
        scale = " + ".join(printer.doprint(abs(t)) if t.is_number else f"{fabs}({printer.doprint(t)})"
                           for t in terms)
        lines.append(f"    if ({printer.doprint(value)} < -{lit} * ({one} + {scale})) {{")
        lines.append(f"        return {k};")
        lines.append("    }")
    if definitions:  # the definitions already share what there is to share
        replacements, reduced = [], entries
    elif cse:
        replacements, reduced = shared_subexpressions(entries, avoid)
    else:
        replacements, reduced = [], entries
    for sym, expr in replacements:
        lines.append(f"    const {ctype} {sym} = {printer.doprint(expr)};")
    rows, cols = fn.shape
    lines.append(f"    {ctype} {_LOCAL}[{rows}][{cols}];")
    cells = [divmod(k, cols) for k in range(rows * cols)]
    for (i, j), expr in zip(cells, reduced):
        lines.append(f"    {_LOCAL}[{i}][{j}] = {printer.doprint(expr)};")
    for i, j in cells:
        bad = f"isnan({_LOCAL}[{i}][{j}])" if fn.infinite_ok else f"!isfinite({_LOCAL}[{i}][{j}])"
        lines.append(f"    if ({bad}) return {len(conditions) + len(nonnegative) + 1};")
    for i, j in cells:
        lines.append(f"    {fn.label}[{i}][{j}] = {_LOCAL}[{i}][{j}];")
    lines.append("    return 0;")
    return lines


def c_operation_counts(design: Design) -> dict[str, tuple[int, int]]:
    """Arithmetic operations (sympy ``count_ops``) per function: ``(without CSE, with CSE)``.

    For the compact form both are the operations of the definitions and the gains.
    """
    out = {}
    for fn in design_functions(design):
        if fn.definitions:  # compact form: the definitions are the program; no CSE on top
            ops = sum(sp.count_ops(e) for _, e in fn.definitions) + sum(sp.count_ops(e) for e in fn.matrix)
            out[fn.name] = (int(ops), int(ops))
            continue
        plain = sum(sp.count_ops(e) for e in fn.matrix)
        replacements, reduced = shared_subexpressions(list(fn.matrix), set(fn.arguments))
        shared = sum(sp.count_ops(e) for _, e in replacements) + sum(sp.count_ops(e) for e in reduced)
        out[fn.name] = (int(plain), int(shared))
    return out


def c_files(design: Design, prefix: str | None = None, precision: str = "double",
            cse: bool = True) -> tuple[str, str]:
    """``(header, source)`` texts for the design; ``prefix`` defaults to the model name."""
    if not isinstance(precision, str) or precision not in TOLERANCE:
        raise OutputError(f"precision must be 'double' or 'single', found {printable(repr(precision), 40)}")
    model = design.model
    prefix = prefix or model.name
    ctype = "float" if precision == "single" else "double"
    printer = _printer(precision)
    guard = f"{prefix.upper()}_H"
    intro = [f"/* {prefix}: closed-form gains of {model.name}"
             + (f" ({c_comment(model.title)})" if model.title else ""),
             f" * Generated by symgain; C99, {ctype} precision, needs only <math.h>, no dynamic memory.",
             " * Validity test: condition f != 0 fails where |f| <= "
             f"{TOLERANCE[precision]:g} * (1 + sum of |terms of f|).",
             " * Name mangling: a parameter whose name is a C keyword, a <math.h> name or the name",
             " * of the matrix argument gets '_p' appended (int -> int_p).",
             " * Ranges: a parameter outside its declared range (the design envelope) is refused",
             " * with a negative return code and the matrix untouched; compile the source with",
             f" * -D{range_macro(prefix)} to evaluate outside the ranges (signs are still checked).",
             " * Gains from a linear model must be validated in simulation and on the machine",
             " * with safe limits; local codes, safety standards and licensed practice take",
             " * precedence. */"]
    from .controller_c import controller_c
    from .controller_python import controller_blocker, controller_functions

    blocker = controller_blocker(design)
    functions = design_functions(design) + (controller_functions(design) if blocker is None else [])
    if blocker is not None:
        intro[-1] = intro[-1][:-3]
        intro += [f" * No controller functions: {blocker}. */"]
    header = intro + [f"#ifndef {guard}", f"#define {guard}", ""]
    source = intro + ["#include <math.h>", f'#include "{prefix}.h"', ""]
    signs = {p.name: p.sign for p in model.parameters}
    ranges = {p.name: p.range for p in model.parameters}
    no_ranges = range_macro(prefix)
    from .stable_forms import printed_helpers

    source += printed_helpers((e for fn in functions for e in fn.printed()), printer, "c", ctype)
    for fn in functions:
        names = _names(fn, set())
        rows, cols = fn.shape
        macro = f"{prefix}_{fn.name}".upper()
        sig = _signature(fn, prefix, names, ctype)
        header += _comment(fn, names, signs, ranges, no_ranges)
        header += [f"#define {macro}_ROWS {rows}", f"#define {macro}_COLS {cols}", sig + ";", ""]
        source += [sig, "{"] + _body(fn, names, printer, ctype, TOLERANCE[precision], cse, signs,
                                         ranges, no_ranges) + ["}", ""]
    if blocker is None:
        h, src = controller_c(design, prefix, ctype, C_RESERVED)
        header += h
        source += src
    header += [f"#endif /* {guard} */"]
    return "\n".join(header) + "\n", "\n".join(source).rstrip() + "\n"
