"""C99 emitter: a header and a source file that need nothing beyond <math.h>.

For each designed matrix ``int PREFIX_<function>(double p1, ..., double G[ROWS][COLS])``:
parameters in declaration order, the matrix last (row-major). It returns 0
on success and ``k`` when the k-th validity condition fails (rule in
:mod:`symgain.emit.common`); the matrix is then left untouched. Shared
subexpressions become ``const double`` locals; no dynamic memory. With
``precision="single"`` everything is ``float`` with ``f``-suffixed literals
and functions. Names that are C keywords, <math.h> names, the matrix
argument or a local name get ``_p`` appended (documented in the header).

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
>>> "K[0][1] = 2*m;" in source
True
"""
from __future__ import annotations

import sympy as sp
from sympy.codegen.ast import float32, float64, real
from sympy.printing.c import C99CodePrinter
from sympy.printing.precedence import PRECEDENCE

from ..design import Design
from .common import TOLERANCE, Function, design_functions, failure_rule, mangle, shared_subexpressions

__all__ = ["c_files", "CPrinter", "C_RESERVED", "c_operation_counts"]

C_KEYWORDS = set("""auto break case char const continue default do double else enum extern float for goto if
inline int long register restrict return short signed sizeof static struct switch typedef union unsigned
void volatile while _Bool _Complex _Imaginary""".split())
MATH_NAMES = set("""acos asin atan atan2 cos sin tan acosh asinh atanh cosh sinh tanh exp exp2 expm1 frexp
ldexp log log10 log1p log2 logb modf scalbn cbrt fabs hypot pow sqrt erf erfc lgamma tgamma ceil floor
nearbyint rint round trunc fmod remainder copysign nan nextafter fdim fmax fmin fma isnan isinf isfinite
signbit j0 j1 jn y0 y1 yn gamma main errno""".split())
C_RESERVED = C_KEYWORDS | MATH_NAMES


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
        return self._settings["type_aliases"].get(real) == float32


def _printer(precision: str) -> CPrinter:
    return CPrinter({"type_aliases": {real: float32 if precision == "single" else float64},
                     "math_macros": {}})


def _names(fn: Function, avoid: set[str]) -> dict[str, str]:
    reserved = set(C_RESERVED) | {fn.label} | avoid
    return {a: mangle(a, reserved) for a in fn.arguments}


def _range(rng) -> str:
    return f"[{rng[0]:g}, {rng[1]:g}]" if rng else "no declared range"


def _signature(fn: Function, prefix: str, names: dict[str, str], ctype: str) -> str:
    rows, cols = fn.shape
    args = [f"{ctype} {names[a]}" for a in fn.arguments] + [f"{ctype} {fn.label}[{rows}][{cols}]"]
    return f"int {prefix}_{fn.name}({', '.join(args)})"


def _comment(fn: Function, names: dict[str, str]) -> list[str]:
    rows, cols = fn.shape
    lines = [f"/* {fn.part} {fn.key.replace('_', ' ')} {fn.label}: {rows} x {cols}, row-major.", " *"]
    for name, meaning, unit, rng in fn.meanings:
        shown = names[name] + (f" (model name {name}, mangled)" if names[name] != name else "")
        lines.append(f" * {shown}: {meaning or 'no meaning given'}"
                     + (f" [{unit}]" if unit else "") + f", range {_range(rng)}")
    lines.append(" *")
    lines.append(" * returns 0 on success;")
    for k, cond in enumerate(fn.conditions, start=1):
        lines.append(f" * returns {k} when {sp.sstr(cond)} == 0 ({fn.label} is then left untouched);")
    if not fn.conditions:
        lines.append(" * valid for every parameter value allowed by the declared signs.")
    lines.append(" */")
    return [line.replace("*/", "* /") if i < len(lines) - 1 else line for i, line in enumerate(lines)]


def _renamed(fn: Function, names):
    symbols = fn.matrix.free_symbols.union(*[c.free_symbols for c in fn.conditions])
    rename = {s: sp.Symbol(names[str(s)]) for s in symbols if str(s) in names}
    return [e.xreplace(rename) for e in fn.matrix], [c.xreplace(rename) for c in fn.conditions]


def _body(fn: Function, names, printer: CPrinter, ctype: str, tol: float, cse: bool = True) -> list[str]:
    entries, conditions = _renamed(fn, names)
    avoid = set(names.values()) | {fn.label}
    lines = []
    used = {str(s) for e in [*entries, *conditions] for s in e.free_symbols}
    for a in fn.arguments:
        if names[a] not in used:
            lines.append(f"    (void){names[a]};  /* not needed by these formulas */")
    fabs = "fabsf" if ctype == "float" else "fabs"
    one = "1.0f" if ctype == "float" else "1.0"
    for k, cond in enumerate(conditions, start=1):
        (value,), terms = failure_rule(cond)
        scale = " + ".join(printer.doprint(sp.Float(abs(t))) if t.is_number else f"{fabs}({printer.doprint(t)})"
                           for t in terms)
        lit = f"{tol!r}f" if ctype == "float" else repr(tol)
        lines.append(f"    if ({fabs}({printer.doprint(value)}) <= {lit} * ({one} + {scale})) {{")
        lines.append(f"        return {k};")
        lines.append("    }")
    if cse:
        replacements, reduced = shared_subexpressions(entries, avoid)
    else:
        replacements, reduced = [], entries
    for sym, expr in replacements:
        lines.append(f"    const {ctype} {sym} = {printer.doprint(expr)};")
    rows, cols = fn.shape
    for k, expr in enumerate(reduced):
        i, j = divmod(k, cols)
        lines.append(f"    {fn.label}[{i}][{j}] = {printer.doprint(expr)};")
    lines.append("    return 0;")
    return lines


def c_operation_counts(design: Design) -> dict[str, tuple[int, int]]:
    """Arithmetic operations (sympy ``count_ops``) per function: ``(without CSE, with CSE)``."""
    out = {}
    for fn in design_functions(design):
        plain = sum(sp.count_ops(e) for e in fn.matrix)
        replacements, reduced = shared_subexpressions(list(fn.matrix), set(fn.arguments))
        shared = sum(sp.count_ops(e) for _, e in replacements) + sum(sp.count_ops(e) for e in reduced)
        out[fn.name] = (int(plain), int(shared))
    return out


def c_files(design: Design, prefix: str | None = None, precision: str = "double",
            cse: bool = True) -> tuple[str, str]:
    """``(header, source)`` texts for the design; ``prefix`` defaults to the model name."""
    if precision not in TOLERANCE:
        raise ValueError(f"precision must be 'double' or 'single', found {precision!r}")
    model = design.model
    prefix = prefix or model.name
    ctype = "float" if precision == "single" else "double"
    printer = _printer(precision)
    guard = f"{prefix.upper()}_H"
    intro = [f"/* {prefix}: closed-form gains of {model.name}" + (f" ({model.title})" if model.title else ""),
             f" * Generated by symgain; C99, {ctype} precision, needs only <math.h>, no dynamic memory.",
             " * Validity test: condition f != 0 fails where |f| <= "
             f"{TOLERANCE[precision]:g} * (1 + sum of |terms of f|).",
             " * Name mangling: a parameter whose name is a C keyword, a <math.h> name or the name",
             " * of the matrix argument gets '_p' appended (int -> int_p).",
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
    for fn in functions:
        names = _names(fn, set())
        rows, cols = fn.shape
        macro = f"{prefix}_{fn.name}".upper()
        sig = _signature(fn, prefix, names, ctype)
        header += _comment(fn, names)
        header += [f"#define {macro}_ROWS {rows}", f"#define {macro}_COLS {cols}", sig + ";", ""]
        source += [sig, "{"] + _body(fn, names, printer, ctype, TOLERANCE[precision], cse) + ["}", ""]
    if blocker is None:
        h, src = controller_c(design, prefix, ctype, C_RESERVED)
        header += h
        source += src
    header += [f"#endif /* {guard} */"]
    return "\n".join(header) + "\n", "\n".join(source).rstrip() + "\n"
