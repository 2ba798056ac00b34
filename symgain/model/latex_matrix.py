r"""Plant matrices written in LaTeX, read with latex2sympy2.

A matrix copied from a paper or report, as one string holding a ``bmatrix``,
``pmatrix`` or ``matrix`` environment, becomes a sympy matrix over the
declared parameters:

>>> import sympy as sp
>>> c, m = sp.symbols("c m", positive=True)
>>> parse_latex_matrix(r'\begin{bmatrix} 0 & 1 \\ 0 & -\frac{c}{m} \end{bmatrix}',
...                    {"c": c, "m": m})
Matrix([
[0,    1],
[0, -c/m]])

Names map to declared parameters by one rule, :func:`latex_name_to_identifier`:
drop the backslash of a command name (``\omega`` is ``omega``, ``\ell`` is
``ell``), keep the content of ``\mathrm{..}``, ``\mathit{..}`` and
``\text{..}``, and drop the braces of a subscript (``m_{p}`` is ``m_p``,
``k_{\theta}`` is ``k_theta``). A subscript of digits may also match a
declared name written without the underscore (``\theta_{0}`` is ``theta0``
when ``theta_0`` is not declared), since that is how sympy itself writes
``theta0``. A name that maps to nothing declared is an error naming it.
As in ordinary mathematics, two letters side by side are a product (``kx``
is ``k*x``: write ``k_x`` for one name), ``e`` is Euler's number and ``\pi``
is pi.

Before the parser sees anything, every LaTeX command is checked against a
short list of math commands; commands that would make a TeX engine act
(``\input``, ``\write18``, ``\def``, ``\catcode`` ...) are refused, and
anything else unknown is reported as unsupported. Rows are split and counted
here, so ragged rows are reported by row, and a cell the parser cannot read
is reported by row, column and text: never a traceback from the parser.
"""
from __future__ import annotations

import io
import re
import warnings
from contextlib import redirect_stderr, redirect_stdout
from typing import Mapping

import sympy as sp

from ..errors import ExpressionError, ModelError, Where
from .expressions import ALLOWED_FUNCTIONS, MAX_EXPONENT, MAX_LITERAL_DIGITS, MAX_NUMBER_BITS, _bits

__all__ = ["parse_latex_matrix", "latex_name_to_identifier", "ENVIRONMENTS", "ALLOWED_COMMANDS",
           "REFUSED_COMMANDS", "MAX_LATEX_LENGTH",
           "MAX_LATEX_DEPTH", "MAX_SUPERSCRIPT_DEPTH"]

#: Matrix environments that may hold the plant matrix.
ENVIRONMENTS = ("bmatrix", "pmatrix", "matrix")

MAX_LATEX_LENGTH = 2_500  # characters: the LaTeX parser needs about 2.5 ms per character
MAX_LATEX_DEPTH = 12  # groups ({ }, ( ), [ ]) inside one another: the parser slows down steeply
MAX_SUPERSCRIPT_DEPTH = 4  # superscripts inside superscripts (x^{y^{2}} is 2 deep); 10 deep take seconds

_GREEK = ("alpha beta gamma delta epsilon varepsilon zeta eta theta vartheta iota kappa lambda mu nu "
          "xi rho varrho sigma tau upsilon phi varphi chi psi omega Gamma Delta Theta Lambda Xi Sigma "
          "Upsilon Phi Psi Omega ell").split()

#: Math commands accepted inside a LaTeX matrix (``\pi`` is the constant).
ALLOWED_COMMANDS = frozenset([
    "begin", "end", "frac", "dfrac", "tfrac", "sqrt", "cdot", "times", "left", "right",
    "sin", "cos", "tan", "sinh", "cosh", "tanh", "exp", "ln", "log", "arctan",
    "mathrm", "mathit", "text", "pi", "quad", "qquad", *_GREEK,
])

#: Commands that make a TeX engine read, write, define or run things: always refused.
REFUSED_COMMANDS = frozenset(
    "input include includeonly write write18 immediate openin openout read readline closein closeout "
    "def edef gdef xdef let futurelet catcode uccode lccode mathcode newcommand renewcommand "
    "providecommand newenvironment renewenvironment DeclareRobustCommand csname endcsname "
    "expandafter noexpand usepackage RequirePackage documentclass special jobname shipout "
    "directlua pdfshellescape ShellEscape loop repeat makeatletter".split())

_COMMAND = re.compile(r"\\([A-Za-z]+|.)")
_SPACING = {",", ";", ":", "!", " ", "\\", "{", "}", "%"}
_REFUSED_SPACING = {"%"}  # a comment would hide the rest of a line from the reader
_WRAPPERS = ("mathrm", "mathit", "text")
_DIGIT_SUBSCRIPT = re.compile(r"_(\d+)$")
_FUNCTION_CLASSES = {type(f(sp.Symbol("x"))): name for name, f in ALLOWED_FUNCTIONS.items()
                     if name != "sqrt"}


def latex_name_to_identifier(name: str) -> str:
    r"""The identifier a LaTeX symbol name stands for (the one documented rule).

    >>> latex_name_to_identifier(r"\omega_n")
    'omega_n'
    >>> latex_name_to_identifier("m_{p}")
    'm_p'
    >>> latex_name_to_identifier(r"\ell")
    'ell'
    >>> latex_name_to_identifier(r"k_{\theta}")
    'k_theta'
    >>> latex_name_to_identifier(r"\mathrm{km}")
    'km'
    """
    text = name
    for wrapper in _WRAPPERS:
        text = text.replace("\\" + wrapper + "{", "{")
    return re.sub(r"[\\{}\s]", "", text)


def _quote(text: str, limit: int = 60) -> str:
    text = " ".join(str(text).split())
    return "'" + (text if len(text) <= limit else text[: limit - 3] + "...") + "'"


def _check_commands(text: str, where: Where | None) -> None:
    for match in _COMMAND.finditer(text):
        command = match.group(1)
        if command in REFUSED_COMMANDS or command.startswith("write"):
            digits = re.match(r"\d*", text[match.end():]).group(0)
            raise ModelError(f"refused TeX command '\\{command}{digits}': a LaTeX matrix holds math only, "
                             "and symgain never runs TeX", where=where)
        if command in _REFUSED_SPACING:
            raise ModelError(f"refused '\\{command}' in LaTeX matrix", where=where)
        if command in _SPACING or command in ALLOWED_COMMANDS:
            continue
        raise ModelError(f"unsupported LaTeX command '\\{command}' in "
                         f"{_quote(text[max(0, match.start() - 20):match.end() + 20])}", where=where)
    if "#" in text or "^^" in text:
        raise ModelError("refused '#' or '^^' in a LaTeX matrix (TeX macro syntax)", where=where)
    if "%" in text.replace("\\%", ""):
        raise ModelError("refused '%' (a TeX comment) in a LaTeX matrix", where=where)


def _check_size(text: str, where: Where | None) -> None:
    r"""Bound nesting, superscript nesting and number literals before the parser sees the text.

    >>> _check_size(r"\begin{matrix} x^{x^{x^{x^{x^{2}}}}} \end{matrix}", None)
    Traceback (most recent call last):
    ...
    symgain.errors.ModelError: superscripts nest 5 deep in the LaTeX matrix (limit 4)
    """
    stack: list[bool] = []  # True for a group that is a superscript
    previous = ""
    for ch in text:
        if ch in "{([":
            stack.append(ch == "{" and previous == "^")
            if len(stack) > MAX_LATEX_DEPTH:
                raise ModelError(f"groups nest more than {MAX_LATEX_DEPTH} deep in the LaTeX matrix",
                                 where=where)
            depth = sum(stack)
            if depth > MAX_SUPERSCRIPT_DEPTH:
                raise ModelError(f"superscripts nest {depth} deep in the LaTeX matrix "
                                 f"(limit {MAX_SUPERSCRIPT_DEPTH})", where=where)
        elif ch in "})]" and stack:
            stack.pop()
        if not ch.isspace():
            previous = ch
    for literal in re.findall(r"\d[\d.]*", text):
        if len(literal) > MAX_LITERAL_DIGITS:
            raise ModelError(f"number has more than {MAX_LITERAL_DIGITS} digits in the LaTeX matrix",
                             where=where)


def _split_top(text: str, separator: str) -> list[str]:
    """Split at *separator* outside braces."""
    parts, depth, start, i = [], 0, 0, 0
    while i < len(text):
        ch = text[i]
        if ch == "\\" and not text.startswith(separator, i):
            i += 2
            continue
        if ch == "{":
            depth += 1
        elif ch == "}":
            depth -= 1
        elif depth == 0 and text.startswith(separator, i):
            parts.append(text[start:i])
            i += len(separator)
            start = i
            continue
        i += 1
    parts.append(text[start:])
    return parts


def _cells(text: str, where: Where | None) -> list[list[str]]:
    """The cell texts, row by row, with ragged rows reported."""
    pattern = re.compile(r"\\begin\{(\w+)\}(.*)\\end\{(\w+)\}", re.S)
    found = pattern.search(text)
    if not found:
        raise ModelError(f"expected a LaTeX matrix (\\begin{{bmatrix}} ... \\end{{bmatrix}}), found "
                         f"{_quote(text)}", where=where)
    env, body, closing = found.groups()
    if env not in ENVIRONMENTS or closing != env:
        raise ModelError(f"unsupported LaTeX environment '{env}'; use one of {', '.join(ENVIRONMENTS)}",
                         where=where)
    outside = (text[:found.start()] + " " + text[found.end():]).replace("$", " ")
    outside = re.sub(r"\\left\s*[\[(]|\\right\s*[\])]", " ", outside)
    if outside.strip():
        raise ModelError(f"unexpected text outside the matrix: {_quote(outside.strip())}", where=where)
    if "\\begin" in body or "\\end" in body:
        raise ModelError("nested environments are not supported in a LaTeX matrix", where=where)
    body = re.sub(r"\\\\\s*\[[^\]]*\]", r"\\\\", body)  # row spacing such as \\[2pt]
    for i, row in enumerate(body.split("\\\\")):
        depth = 0
        for ch in re.sub(r"\\[{}]", "", row):
            depth += {"{": 1, "}": -1}.get(ch, 0)
            if depth < 0:
                break
        if depth:
            raise ModelError(f"unbalanced braces in row {i} of the LaTeX matrix: {_quote(row.strip())}",
                             where=where)
    rows = [row for row in _split_top(body, "\\\\")]
    while rows and not rows[-1].strip():
        rows.pop()  # a trailing \\ ends the last row
    if not rows:
        raise ModelError("the LaTeX matrix is empty", where=where)
    table = [[cell.strip() for cell in _split_top(row, "&")] for row in rows]
    width = len(table[0])
    for i, row in enumerate(table):
        if len(row) != width:
            raise ModelError(f"ragged LaTeX matrix: row {i} has {len(row)} entries but row 0 has {width} "
                             f"(row {i} is {_quote(rows[i].strip())})", where=where)
        for j, cell in enumerate(row):
            if not cell:
                raise ModelError(f"empty entry in row {i}, column {j} of the LaTeX matrix", where=where)
    return table


def _latex2sympy(text: str):
    with warnings.catch_warnings():  # the parser's runtime imports deprecated typing.io
        warnings.simplefilter("ignore", DeprecationWarning)
        from latex2sympy2 import latex2sympy

    sink = io.StringIO()
    with redirect_stdout(sink), redirect_stderr(sink), sp.evaluate(False):  # sizes are checked on rebuild
        return latex2sympy(text)


def parse_latex_matrix(text: str, symbols: Mapping[str, sp.Symbol], *,
                       where: Where | None = None) -> sp.Matrix:
    r"""Read a LaTeX matrix into a sympy matrix over the declared *symbols*.

    Errors are one line naming the fragment and, where it applies, the row
    and column:

    >>> k = sp.Symbol("k", positive=True)
    >>> parse_latex_matrix(r'\begin{pmatrix} 0 & 1 \\ -k \end{pmatrix}', {"k": k})
    Traceback (most recent call last):
    ...
    symgain.errors.ModelError: ragged LaTeX matrix: row 1 has 1 entries but row 0 has 2 (row 1 is '-k')
    >>> parse_latex_matrix(r'\begin{matrix} \omega_n^2 \end{matrix}', {"k": k})
    Traceback (most recent call last):
    ...
    symgain.errors.ExpressionError: LaTeX name '\omega_n' (read as 'omega_n') is not a declared parameter in '\omega_n^2'
    >>> parse_latex_matrix(r'\begin{matrix} \input{secret} \end{matrix}', {})
    Traceback (most recent call last):
    ...
    symgain.errors.ModelError: refused TeX command '\input': a LaTeX matrix holds math only, and symgain never runs TeX
    """
    if not isinstance(text, str):
        raise ModelError(f"expected a LaTeX string, found {type(text).__name__}", where=where)
    if len(text) > MAX_LATEX_LENGTH:
        raise ModelError(f"LaTeX matrix too long ({len(text)} characters, limit {MAX_LATEX_LENGTH})",
                         where=where)
    _check_commands(text, where)
    _check_size(text, where)
    table = _cells(text, where)
    rows, cols = len(table), len(table[0])
    whole = "\\begin{bmatrix}" + " \\\\ ".join(" & ".join(r) for r in table) + "\\end{bmatrix}"
    parsed = None
    try:
        parsed = _latex2sympy(whole)
    except (Exception, RecursionError):  # the parser's own errors: located cell by cell below
        parsed = None
    if not isinstance(parsed, sp.MatrixBase) or parsed.shape != (rows, cols):
        parsed = None
    entries = []
    for i, row in enumerate(table):
        for j, cell in enumerate(row):
            cell_where = where.at(i, j) if where is not None else Where(row=i, col=j)
            value = parsed[i, j] if parsed is not None else _parse_cell(cell, cell_where)
            entries.append(_rebuild(value, symbols, cell, cell_where))
    return sp.Matrix(rows, cols, entries)


def _parse_cell(cell: str, where: Where):
    try:
        value = _latex2sympy(cell)
    except (Exception, RecursionError) as exc:
        reason = str(exc).strip().splitlines()[0] if str(exc).strip() else type(exc).__name__
        raise ExpressionError(f"cannot read LaTeX {_quote(cell)}: {reason}", where=where) from None
    return value


def _rebuild(value, symbols: Mapping[str, sp.Symbol], cell: str, where: Where) -> sp.Expr:
    """Rebuild the parser's expression from allowed parts, on the declared symbols."""
    def fail(what: str):
        raise ExpressionError(f"{what} in {_quote(cell)}", where=where)

    def build(e) -> sp.Expr:
        if isinstance(e, (list, tuple)) or not isinstance(e, sp.Basic) or isinstance(e, sp.MatrixBase):
            fail("expected one expression per entry")
        if e.is_Rational:
            return sp.Rational(e)
        if e.is_Float:
            return sp.Rational(str(e))
        if e in (sp.pi, sp.E, sp.I):
            return e
        if isinstance(e, sp.Symbol):
            identifier = latex_name_to_identifier(e.name)
            if identifier not in symbols:  # theta0 is written \theta_{0} (sympy does so too)
                joined = _DIGIT_SUBSCRIPT.sub(r"\1", identifier)
                identifier = joined if joined in symbols else identifier
            if identifier not in symbols:
                fail(f"LaTeX name {_quote(_latex_form(e.name))} (read as {_quote(identifier)}) "
                     "is not a declared parameter")
            return symbols[identifier]
        if e.is_Add or e.is_Mul:
            args = [build(a) for a in e.args]
            if sum(_bits(a) for a in args) > MAX_NUMBER_BITS:
                fail("numbers would grow too large")
            return sp.Add(*args) if e.is_Add else sp.Mul(*args)
        if e.is_Pow:
            base, exponent = build(e.args[0]), build(e.args[1])
            if exponent.is_Rational and abs(exponent) > MAX_EXPONENT:
                fail(f"exponent {exponent} is too large (limit {MAX_EXPONENT})")
            if exponent.is_Rational and _bits(base) * max(1, abs(int(exponent))) > MAX_NUMBER_BITS:
                fail("numbers would grow too large")
            if base == 0 and exponent.is_negative:
                fail("division by zero")
            return sp.Pow(base, exponent)
        if isinstance(e, sp.log) and len(e.args) == 2:
            return sp.log(build(e.args[0])) / sp.log(build(e.args[1]))
        if type(e) in _FUNCTION_CLASSES and len(e.args) == 1:
            return ALLOWED_FUNCTIONS[_FUNCTION_CLASSES[type(e)]](build(e.args[0]))
        fail(f"unsupported LaTeX construct {_quote(sp.sstr(e))}")

    try:
        result = build(value)
    except ExpressionError:
        raise
    except (Exception, RecursionError) as exc:
        raise ExpressionError(f"cannot read LaTeX {_quote(cell)}: {type(exc).__name__}", where=where) from None
    if result.has(sp.zoo, sp.nan, sp.oo, -sp.oo):
        fail("no finite value")
    return result


def _latex_form(name: str) -> str:
    """How a name read by the parser was most likely written (``omega_n`` -> ``\\omega_n``)."""
    head = re.match(r"[A-Za-z]+", name)
    if head and head.group(0) in _GREEK and not name.startswith("\\"):
        return "\\" + name
    return name
