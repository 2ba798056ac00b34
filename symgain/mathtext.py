"""Plain mathematical text for the terminal: formulas, conditions and sets an engineer reads.

Not sympy's print syntax: powers are written ``m^2``, a condition ``Ne(m, 0)``
is ``m != 0``, a set of ratios ``Interval.open(0, 6.45)`` is
``0 < r < 6.45``. The JSON output keeps sympy's own syntax (it is read back
by programs); everything a person reads goes through this module.

>>> import sympy as sp
>>> m, w = sp.symbols("m w", positive=True)
>>> math_text(m * w**2 / (m + 1))
'm*w^2/(m + 1)'
>>> math_text(sp.log(20) * m)
'm*ln(20)'
>>> condition_text(sp.Ne(m - 2, 0))
'm - 2 != 0'
>>> set_text(sp.Interval.open(0, sp.Rational(129, 20)), "r")
'0 < r < 6.45'
>>> set_text(sp.Union(sp.Interval.open(0, 1), sp.Interval.open(2, sp.oo)), "r")
'0 < r < 1 or r > 2'
"""
from __future__ import annotations

import sympy as sp
from sympy.printing.str import StrPrinter

__all__ = ["math_text", "condition_text", "set_text", "number_text", "named_condition"]


class _MathPrinter(StrPrinter):
    """sympy's string printer with ``^`` for powers and words for relations."""

    _relations = {"==": "=", "!=": "!=", ">=": ">=", "<=": "<=", ">": ">", "<": "<"}

    def _print_Pow(self, expr, rational=False):
        text = super()._print_Pow(expr, rational)
        return text.replace("**", "^")

    def _print_Relational(self, expr):
        op = self._relations.get(expr.rel_op, expr.rel_op)
        return f"{self._print(expr.lhs)} {op} {self._print(expr.rhs)}"

    def _print_Float(self, expr):
        return number_text(float(expr))

    def _print_And(self, expr):
        return " and ".join(self._print(a) for a in expr.args)

    def _print_Or(self, expr):
        return " or ".join(self._print(a) for a in expr.args)

    def _print_Abs(self, expr):
        return f"|{self._print(expr.args[0])}|"

    def _print_log(self, expr):
        return "ln(" + ", ".join(self._print(a) for a in expr.args) + ")"

    def _print_ImaginaryUnit(self, expr):
        return "i"


_PRINTER = _MathPrinter({"order": None})


def number_text(x: float, digits: int = 6) -> str:
    """A number with ``digits`` significant digits, ``inf`` for infinity.

    >>> number_text(2.0), number_text(1 / 3), number_text(float("inf"))
    ('2', '0.333333', 'inf')
    """
    if x == float("inf"):
        return "inf"
    if x == float("-inf"):
        return "-inf"
    return f"{x:.{digits}g}"


def math_text(expr) -> str:
    """One formula as plain text (``^`` for powers, no sympy function names)."""
    expr = sp.sympify(expr)
    if isinstance(expr, (sp.Set,)):
        return set_text(expr, "x")
    return _PRINTER.doprint(expr).replace("**", "^")


def condition_text(cond) -> str:
    """A validity condition: ``Ne(f, 0)`` becomes ``f != 0``, ``Ge(f, 0)`` ``f >= 0``.

    >>> k = sp.Symbol("k")
    >>> condition_text(sp.Ge(k - 1, 0))
    'k - 1 >= 0'
    """
    return math_text(cond)


def named_condition(cond, limit: int = 60) -> tuple[str, str]:
    """(short text, full text) of a condition; long ones are named after their size.

    >>> x = sp.Symbol("x")
    >>> named_condition(sp.Ne(x, 0))
    ('x != 0', 'x != 0')
    >>> short, full = named_condition(sp.Ne(sum(x**k for k in range(30)), 0), limit=40)
    >>> short
    'D (a polynomial of 30 terms, see --json) != 0'
    """
    full = condition_text(cond)
    if len(full) <= limit or not isinstance(cond, sp.Rel):
        return full, full
    f = cond.lhs - cond.rhs if cond.rhs != 0 else cond.lhs
    terms = len(sp.Add.make_args(sp.expand(f))) if sp.count_ops(f) < 2000 else len(sp.Add.make_args(f))
    op = _MathPrinter._relations.get(cond.rel_op, cond.rel_op)
    return f"D (a polynomial of {terms} terms, see --json) {op} 0", full


def _bound(x) -> str:
    x = sp.sympify(x)
    if x.is_number:
        value = float(x)
        if x.is_Rational or abs(value) >= 1e-3:
            return number_text(value)
    return math_text(x)


def set_text(subset, var: str) -> str:
    """A set of real numbers as inequalities in ``var`` (``0 < r < 6.45``; ``or`` between pieces)."""
    if subset is sp.S.EmptySet:
        return "none"
    if isinstance(subset, sp.Union):
        return " or ".join(set_text(a, var) for a in subset.args)
    if isinstance(subset, sp.FiniteSet):
        return " or ".join(f"{var} = {_bound(a)}" for a in subset.args)
    if isinstance(subset, sp.Interval):
        lo, hi = subset.start, subset.end
        left = "" if lo == -sp.oo else f"{_bound(lo)} {'<' if subset.left_open else '<='} "
        right = "" if hi == sp.oo else f" {'<' if subset.right_open else '<='} {_bound(hi)}"
        if not left and not right:
            return f"every real {var}"
        if not left:
            return f"{var}{right}"
        if not right:
            return f"{var} {'>' if subset.left_open else '>='} {_bound(lo)}"
        return f"{left}{var}{right}"
    if subset is sp.S.Reals:
        return f"every real {var}"
    return math_text(subset)
