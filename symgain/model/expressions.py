"""Safe reading of math text into sympy expressions.

Matrix entries, poles and targets arrive as short pieces of text such as
``"-c/m"`` or ``"1/(m*l^2)"``. This module turns them into sympy objects
without ever running them as code: the text is split into a syntax tree by
Python's :mod:`ast` module, and only the nodes of plain math (numbers,
declared names, ``+ - * / ** ^``, parentheses and a short list of functions)
are turned into sympy objects. Everything else is refused with an
:class:`~symgain.errors.ExpressionError` that names what was found.

>>> m, c = sympy.symbols("m c", positive=True)
>>> parse_expression("-c/m", {"m": m, "c": c})
-c/m
>>> parse_expression("m.__class__", {"m": m})
Traceback (most recent call last):
...
symgain.errors.ExpressionError: refused attribute access '.__class__' in 'm.__class__'

Numbers are exact: decimals become fractions (``0.1`` is 1/10), never floats.
``^`` means power, as in ordinary math notation, and binds like ``**``.
"""
from __future__ import annotations

import ast
import difflib
import math
import warnings
from decimal import Decimal
from typing import Callable, Mapping

import sympy

from ..errors import ExpressionError, Where

__all__ = [
    "parse_expression",
    "ALLOWED_FUNCTIONS",
    "CONSTANTS",
    "RESERVED_NAMES",
    "MAX_TEXT_LENGTH",
    "MAX_DEPTH",
    "MAX_EXPONENT",
    "MAX_LITERAL_DIGITS",
    "MAX_NUMBER_BITS",
    "MAX_NUMBER_DIGITS",
]

#: Functions that may be called in an expression, by the name written in text.
ALLOWED_FUNCTIONS: dict[str, Callable[[sympy.Basic], sympy.Expr]] = {
    "sqrt": sympy.sqrt,
    "exp": sympy.exp,
    "log": sympy.log,
    "sin": sympy.sin,
    "cos": sympy.cos,
    "tan": sympy.tan,
    "sinh": sympy.sinh,
    "cosh": sympy.cosh,
    "tanh": sympy.tanh,
    "atan": sympy.atan,
    "abs": sympy.Abs,
}

#: Names with a fixed meaning: the imaginary unit, pi and Euler's number.
CONSTANTS: dict[str, sympy.Expr] = {"I": sympy.I, "pi": sympy.pi, "E": sympy.E}

#: Names that cannot be declared as parameters.
RESERVED_NAMES: frozenset[str] = frozenset({"s", "z", *CONSTANTS, *ALLOWED_FUNCTIONS})

MAX_TEXT_LENGTH = 10_000  # characters
MAX_DEPTH = 100  # nested constructs (a long flat sum or product counts as one level)
MAX_EXPONENT = 1000  # largest constant exponent, in magnitude
MAX_LITERAL_DIGITS = 400  # longest single number literal
#: Rough ceiling on any number built, in decimal digits: below Python's default limit on
#: converting integers to text (4300 digits, ``sys.get_int_max_str_digits``), so that
#: every number the reader accepts can also be printed.
MAX_NUMBER_DIGITS = 4000
MAX_NUMBER_BITS = math.ceil(MAX_NUMBER_DIGITS * math.log2(10))

_LITERAL_BITS = math.ceil(MAX_LITERAL_DIGITS * math.log2(10))
_UNDEFINED = (sympy.zoo, sympy.nan, sympy.oo, -sympy.oo)
_HINTS = {"i": "I", "j": "I", "e": "E", "Pi": "pi", "PI": "pi", "ln": "log",
          "arctan": "atan", "Abs": "abs", "Sqrt": "sqrt", "Exp": "exp"}
_REFUSED = {
    "Attribute": "attribute access", "Subscript": "subscript", "Slice": "slice",
    "Lambda": "lambda", "IfExp": "conditional expression", "Compare": "comparison",
    "BoolOp": "logical operator", "List": "list", "Tuple": "tuple", "Set": "set",
    "Dict": "dict", "ListComp": "comprehension", "SetComp": "comprehension",
    "DictComp": "comprehension", "GeneratorExp": "generator expression",
    "Starred": "starred argument", "NamedExpr": "assignment expression",
    "JoinedStr": "formatted string", "FormattedValue": "formatted string",
    "Await": "await", "Yield": "yield", "YieldFrom": "yield",
}
_OPERATORS = {ast.Mod: "%", ast.FloorDiv: "//", ast.MatMult: "@", ast.LShift: "<<",
              ast.RShift: ">>", ast.BitOr: "|", ast.BitAnd: "&", ast.BitXor: "^",
              ast.Not: "not", ast.Invert: "~"}


def parse_expression(
    text: str | int | float,
    symbols: Mapping[str, sympy.Symbol],
    *,
    where: Where | None = None,
    extra: Mapping[str, sympy.Basic] | None = None,
) -> sympy.Expr:
    """Read *text* (or a TOML number) as an exact sympy expression.

    *symbols* maps each declared name to its sympy symbol; *extra* adds
    further allowed names (for example the polynomial variable ``s``).
    ``I``, ``pi`` and ``E`` always mean the constants. Errors are
    :class:`~symgain.errors.ExpressionError` carrying *where*.

    >>> m, l, w = sympy.symbols("m l w", positive=True)
    >>> parse_expression("1/(m*l^2)", {"m": m, "l": l})
    1/(l**2*m)
    >>> parse_expression("0.1", {})
    1/10
    >>> parse_expression(0.25, {})
    1/4
    >>> parse_expression("-w + 2*I*w", {"w": w})
    -w + 2*I*w
    >>> s = sympy.Symbol("s")
    >>> parse_expression("s^2 + 2*w*s + w^2", {"w": w}, extra={"s": s})
    s**2 + 2*s*w + w**2
    >>> parse_expression("omega + 1", {"omega_n": w}, where=Where("a.toml", "feedback.poles", 0))
    Traceback (most recent call last):
    ...
    symgain.errors.ExpressionError: a.toml: feedback.poles[0]: undeclared symbol 'omega' in 'omega + 1'; did you mean 'omega_n'?
    >>> parse_expression("9**9**9**9", {})
    Traceback (most recent call last):
    ...
    symgain.errors.ExpressionError: exponent 387420489 is too large (limit 1000) in '9**9**9**9'
    """
    names: dict[str, sympy.Basic] = dict(symbols)
    if extra:
        names.update(extra)
    if isinstance(text, bool) or not isinstance(text, (str, int, float)):
        raise ExpressionError(
            f"expected text or a number, found {type(text).__name__} {_quote(repr(text))}",
            where=where)
    if not isinstance(text, str):
        if isinstance(text, int):
            label = repr(text) if text.bit_length() <= _LITERAL_BITS else "a huge integer"
            return _Reader(label, label, names, where).integer(text)[0]
        reader = _Reader(repr(text), repr(text), names, where)
        return reader.decimal(text, repr(text))[0]
    return _read_text(text, names, where)


def _read_text(text: str, names: dict[str, sympy.Basic], where: Where | None) -> sympy.Expr:
    shown = text.strip()
    if not shown:
        raise ExpressionError("empty expression", where=where)
    if len(shown) > MAX_TEXT_LENGTH:
        raise ExpressionError(
            f"expression too long ({len(shown)} characters, limit {MAX_TEXT_LENGTH}) "
            f"in {_quote(shown)}", where=where)
    if "#" in shown:
        raise ExpressionError(f"refused comment sign '#' in {_quote(shown)}", where=where)
    for position, ch in enumerate(shown):  # Python would fold lookalike letters (NFKC) into ASCII names
        if ord(ch) > 127:
            raise ExpressionError(f"non-ASCII character U+{ord(ch):04X} at character {position + 1} of "
                                  f"{_quote(shown)}; names and operators are plain ASCII", where=where)
    # One line for the parser; '^' is power, not Python's exclusive or.
    source = "".join(" " if ch in "\n\r\t\f\v" else ch for ch in shown).replace("^", "**")
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            tree = ast.parse(source, mode="eval")
    except SyntaxError as exc:
        reason = (exc.msg or "invalid syntax").split(" (")[0]
        if exc.offset:
            reason += f" at character {_original_position(shown, exc.offset - 1) + 1}"
        raise ExpressionError(f"cannot read {_quote(shown)}: {reason}", where=where) from None
    except (RecursionError, MemoryError):
        raise ExpressionError(f"cannot read {_quote(shown)}: too long or too deeply nested",
                              where=where) from None
    except ValueError as exc:
        raise ExpressionError(f"cannot read {_quote(shown)}: {exc}", where=where) from None
    reader = _Reader(shown, source, names, where)
    try:
        value, _ = reader.build(tree.body, 1)
    except ExpressionError:
        raise
    except RecursionError:
        reader.fail("nesting too deep")
    except (ArithmeticError, TypeError, ValueError, MemoryError) as exc:
        reader.fail(f"cannot evaluate ({type(exc).__name__}: {exc})")
    return value


class _Reader:
    """Turns one syntax tree into sympy; each builder returns (value, bits).

    *bits* is an upper estimate of the size of the numbers the value holds,
    used to refuse results that would be enormous before sympy computes them.
    """

    def __init__(self, text: str, source: str, names: Mapping[str, sympy.Basic],
                 where: Where | None):
        self.text = text  # as the user wrote it, for messages
        self.source = source  # as handed to the parser (one line)
        self.encoded = source.encode("utf-8")  # ast offsets count UTF-8 bytes
        self.names = names
        self.where = where

    def fail(self, what: str, after: str = ""):
        raise ExpressionError(f"{what} in {_quote(self.text)}{after}", where=self.where)

    def literal(self, node: ast.AST) -> str:
        """The text of *node* as parsed (a plain slice: the source is one line)."""
        if getattr(node, "lineno", None) != 1 or getattr(node, "end_lineno", None) != 1:
            return ast.get_source_segment(self.source, node) or type(node).__name__
        return self.encoded[node.col_offset:node.end_col_offset].decode("utf-8", "replace")

    def segment(self, node: ast.AST) -> str:
        return _quote(self.literal(node))

    def build(self, node: ast.AST, depth: int) -> tuple[sympy.Expr, int]:
        if depth > MAX_DEPTH:
            self.fail(f"nesting deeper than {MAX_DEPTH} levels")
        builder = getattr(self, "_build_" + type(node).__name__, None)
        if builder is None:
            self.refuse(node)
        value, bits = builder(node, depth)
        if isinstance(node, ast.BinOp) and _constant_zero(value):
            value = sympy.Integer(0)  # a zero in disguise, such as sin(1)^2 + cos(1)^2 - 1
        if bits > MAX_NUMBER_BITS:
            self.fail(f"numbers would grow beyond about {MAX_NUMBER_DIGITS} digits")
        if value.has(*_UNDEFINED):
            self.fail(f"{self.segment(node)} has no finite value")
        return value, bits

    def refuse(self, node: ast.AST):
        kind = type(node).__name__
        if isinstance(node, ast.Attribute):
            self.fail(f"refused attribute access {_quote('.' + node.attr)}")
        self.fail(f"refused {_REFUSED.get(kind, kind)} {self.segment(node)}")

    # -- numbers -----------------------------------------------------------
    def integer(self, value: int) -> tuple[sympy.Expr, int]:
        if value.bit_length() > _LITERAL_BITS:
            self.fail(f"number has more than {MAX_LITERAL_DIGITS} digits")
        return sympy.Integer(value), value.bit_length()

    def decimal(self, value: float, literal: str) -> tuple[sympy.Expr, int]:
        if not math.isfinite(value):
            self.fail(f"number {_quote(literal)} is not finite")
        sign, digits, exponent = Decimal(literal.replace("_", "")).as_tuple()
        if not any(digits):
            return sympy.Integer(0), 0
        if len(digits) + abs(exponent) > MAX_LITERAL_DIGITS:
            self.fail(f"number {_quote(literal)} needs more than {MAX_LITERAL_DIGITS} digits")
        mantissa = int("".join(map(str, digits))) * (-1 if sign else 1)
        if exponent >= 0:
            number = sympy.Integer(mantissa * 10**exponent)
        else:
            number = sympy.Rational(mantissa, 10**-exponent)
        return number, _bits(number)

    def _build_Constant(self, node: ast.Constant, depth: int):
        value = node.value
        if isinstance(value, bool) or value is None or value is Ellipsis:
            self.fail(f"refused constant {_quote(repr(value))}")
        if isinstance(value, (str, bytes)):
            self.fail(f"refused string {self.segment(node)}")
        if isinstance(value, complex):
            self.fail(f"refused complex number {self.segment(node)} (write the imaginary unit as I)")
        if isinstance(value, int):
            return self.integer(value)
        return self.decimal(value, self.literal(node))

    # -- names and calls ---------------------------------------------------
    def _build_Name(self, node: ast.Name, depth: int):
        name = node.id
        if name in CONSTANTS:
            if name in self.names and self.names[name] != CONSTANTS[name]:
                self.fail(f"'{name}' is reserved for the constant {CONSTANTS[name]} "
                          "and cannot be declared")
            return CONSTANTS[name], 0
        if name in self.names:
            value = self.names[name]
            return value, _bits(value)
        if name in ALLOWED_FUNCTIONS:
            self.fail(f"function '{name}' used without an argument")
        self.fail(f"undeclared symbol {_quote(name)}",
                  self._suggest(name, [*self.names, *CONSTANTS]))

    def _build_Call(self, node: ast.Call, depth: int):
        func = node.func
        if not isinstance(func, ast.Name):
            self.fail(f"refused call of {self.segment(func)}")
        name = func.id
        if name not in ALLOWED_FUNCTIONS:
            self.fail(f"refused call of {_quote(name)}",
                      self._suggest(name, list(ALLOWED_FUNCTIONS))
                      or "; allowed functions: " + ", ".join(ALLOWED_FUNCTIONS))
        if node.keywords:
            self.fail(f"refused keyword argument in call of '{name}'")
        if len(node.args) != 1:
            self.fail(f"'{name}' takes exactly one argument, found {len(node.args)}")
        argument, bits = self.build(node.args[0], depth + 1)
        return ALLOWED_FUNCTIONS[name](argument), bits

    @staticmethod
    def _suggest(name: str, candidates: list[str]) -> str:
        close = difflib.get_close_matches(name, candidates, n=3, cutoff=0.6)
        close += [c for c in candidates if c.lower() == name.lower() and c not in close]
        hint = _HINTS.get(name)
        if hint and hint not in close and (hint in candidates or hint in CONSTANTS):
            close.append(hint)
        return "; did you mean " + " or ".join(f"'{c}'" for c in close) + "?" if close else ""

    # -- operators ---------------------------------------------------------
    def _build_UnaryOp(self, node: ast.UnaryOp, depth: int):
        if isinstance(node.op, (ast.USub, ast.UAdd)):
            value, bits = self.build(node.operand, depth + 1)
            return (-value if isinstance(node.op, ast.USub) else value), bits
        self.fail(f"refused operator {_quote(_OPERATORS.get(type(node.op), '?'))}")

    def _build_BinOp(self, node: ast.BinOp, depth: int):
        if isinstance(node.op, (ast.Add, ast.Sub)):
            return self._chain(node, depth, (ast.Add, ast.Sub))
        if isinstance(node.op, (ast.Mult, ast.Div)):
            return self._chain(node, depth, (ast.Mult, ast.Div))
        if isinstance(node.op, ast.Pow):
            return self._power(node, depth)
        self.fail(f"refused operator {_quote(_OPERATORS.get(type(node.op), '?'))}")

    def _chain(self, node: ast.BinOp, depth: int, kinds: tuple[type, type]):
        """A flat run such as ``a - b + c`` or ``a/b*c``, read as one level."""
        operands: list[tuple[bool, ast.AST]] = []
        current: ast.AST = node
        while isinstance(current, ast.BinOp) and isinstance(current.op, kinds):
            operands.append((isinstance(current.op, (ast.Sub, ast.Div)), current.right))
            current = current.left
        operands.append((False, current))
        terms, total = [], 0
        for inverse, operand in reversed(operands):
            value, bits = self.build(operand, depth + 1)
            total += bits
            if inverse and kinds[0] is ast.Add:
                value = -value
            elif inverse:
                if value == 0 or _constant_zero(value) or _expands_to_zero(value):
                    self.fail(f"division by zero at {self.segment(operand)}")
                value = sympy.Pow(value, -1)
            terms.append(value)
        if total > MAX_NUMBER_BITS:
            self.fail(f"numbers would grow beyond about {MAX_NUMBER_DIGITS} digits")
        return (sympy.Add(*terms) if kinds[0] is ast.Add else sympy.Mul(*terms)), total

    def _power(self, node: ast.BinOp, depth: int):
        base, base_bits = self.build(node.left, depth + 1)
        exponent, exponent_bits = self.build(node.right, depth + 1)
        bits = base_bits + exponent_bits
        if exponent.is_Rational:
            if abs(exponent) > MAX_EXPONENT:
                self.fail(f"exponent {exponent} is too large (limit {MAX_EXPONENT})")
            if (base == 0 or _constant_zero(base)) and exponent < 0:
                self.fail(f"division by zero: 0 raised to {exponent}")
            bits = base_bits * max(1, math.ceil(abs(exponent))) + exponent_bits
            if bits > MAX_NUMBER_BITS:
                self.fail(f"numbers would grow beyond about {MAX_NUMBER_DIGITS} digits")
        return sympy.Pow(base, exponent), bits


def _constant_zero(value: sympy.Basic) -> bool:
    """True for a constant (no symbols) that is exactly zero though not written as 0.

    >>> _constant_zero(sympy.sin(1)**2 + sympy.cos(1)**2 - 1), _constant_zero(sympy.sqrt(2) - 1)
    (True, False)
    """
    if value.free_symbols or value.is_Rational or not value.is_number:
        return bool(value == 0)
    try:
        if abs(complex(sympy.N(value, 60))) > 1e-45:
            return False
    except (TypeError, ValueError, ArithmeticError):
        return False
    simplified = sympy.nsimplify(sympy.simplify(value))
    return simplified == 0 or bool(value.equals(0))


def _expands_to_zero(value: sympy.Basic) -> bool:
    """True for a small expression in symbols that expands to zero, such as (m+1)^2 - m^2 - 2m - 1."""
    if not value.free_symbols or not value.is_Add or sympy.count_ops(value) > 200:
        return False
    return sympy.expand(value) == 0


def _bits(value: sympy.Basic) -> int:
    """Sum of the sizes (in bits) of the exact numbers inside *value*."""
    return sum(int(r.p).bit_length() + max(int(r.q).bit_length() - 1, 0)
               for r in value.atoms(sympy.Rational))


def _quote(text: str, limit: int = 60) -> str:
    text = " ".join(str(text).split())
    return "'" + (text if len(text) <= limit else text[: limit - 3] + "...") + "'"


def _original_position(shown: str, index: int) -> int:
    """Map a character index in the parsed source back to the text as written."""
    position = 0
    for original, ch in enumerate(shown):
        position += 2 if ch == "^" else 1
        if position > index:
            return original
    return len(shown)
