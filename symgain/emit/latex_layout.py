r"""Typesetting formulas for the report: names, and long expressions broken over lines.

:class:`ReportPrinter` is sympy's LaTeX printer with one change: a
multi-letter name is set as one italic word (``\mathit{mass}``) instead of a
product of letters; subscripts stay subscripts (``m_c`` -> ``m_{c}``,
``omega_n`` -> ``\omega_{n}``).

Long expressions are split at the terms of a sum; a long product with a long
sum inside becomes ``prefix \Bigl( ... \Bigr)`` with the sum split again.
Nothing is computed: the pieces are the expression's own terms and factors.

>>> import sympy as sp
>>> a, b, c = sp.symbols("a b c")
>>> tex(sp.Symbol("omega_n") * sp.Symbol("m_c") + sp.Symbol("mass"))
'm_{c} \\omega_{n} + \\mathit{mass}'
>>> lines = formula_lines("x", sum(sp.Symbol(f"a_{i}") * b**i for i in range(30)), width=40)
>>> len(lines) > 3 and all(visible_width(line) <= 48 for line in lines)
True
>>> lines[0][:8]
'x &= a_{'
"""
from __future__ import annotations

import re

import sympy as sp
from sympy.printing.latex import LatexPrinter

from ..model import S

__all__ = ["ReportPrinter", "tex", "visible_width", "fragments", "formula_lines", "matrix_tex",
           "text", "WIDTH"]

WIDTH = 78  # visible characters of a display line on A4 with 2 cm margins, 10 pt (measured by eye)


class ReportPrinter(LatexPrinter):
    """sympy's LaTeX printer with multi-letter names set as single italic words."""

    def _print_Symbol(self, expr, style="plain"):
        out = super()._print_Symbol(expr, style)
        match = re.match(r"^([A-Za-z]{2,})(?![A-Za-z])", out)
        if match:
            out = r"\mathit{" + match.group(1) + "}" + out[match.end():]
        return out

    def _print_Pow(self, expr):
        root = expr.exp.is_Rational and not expr.exp.is_Integer  # printed as a root: clear already
        if isinstance(expr.base, sp.Function) and expr.exp != -1 and not root:
            # (ln 20)^2, not ln(20)^2 that reads as ln(20^2)
            return r"\left(" + self._print(expr.base) + r"\right)^{" + self._print(expr.exp) + "}"
        return super()._print_Pow(expr)


_PRINTER = ReportPrinter({"ln_notation": True})  # \ln: natural logarithm, never read as base 10


def tex(expr) -> str:
    """LaTeX of a sympy object with the report's naming rules."""
    return _PRINTER.doprint(expr)


_COMMANDS = re.compile(r"\\(left|right|Bigl|Bigr|mathit|mathrm|operatorname|quad|qquad|cdot)\b|\\\\")


def visible_width(code: str) -> int:
    r"""A rough upper bound on the printed width of LaTeX math, in characters.

    Commands count as one character (``\omega``), braces and scripts as none.
    A fraction is counted as numerator plus denominator, which over-estimates.

    >>> visible_width(r"\frac{m \omega_{n}^{2}}{2}")
    5
    """
    code = code.replace(r"\frac", "")
    code = _COMMANDS.sub("", code)
    code = re.sub(r"\\[A-Za-z]+", "x", code)
    code = re.sub(r"[{}&^_]", "", code)
    return len(code.replace(" ", ""))


def _term_fragments(expr, width: int) -> list[str]:
    code = tex(expr)
    if visible_width(code) <= width or not expr.is_Mul:
        return [code]
    num, den = sp.fraction(expr, exact=True)
    factors = sp.Mul.make_args(num)
    sums = [f for f in factors if f.is_Add]
    if not sums:
        return [code]
    big = max(sums, key=lambda f: visible_width(tex(f)))
    rest = [f for f in factors if f is not big]
    prefix_expr = sp.Mul(*rest, evaluate=False) if rest else sp.Integer(1)
    if den != 1:
        prefix = r"\frac{" + tex(prefix_expr) + "}{" + tex(den) + "}"
    else:
        prefix = "" if prefix_expr == 1 else tex(prefix_expr)
    inner = fragments(big, width - 4)
    inner[0] = (prefix + r" \Bigl(" + inner[0]).strip()
    inner[-1] = inner[-1] + r" \Bigr)"
    return inner


def fragments(expr, width: int = WIDTH) -> list[str]:
    """Pieces of the expression's LaTeX that joined with spaces give the whole formula."""
    if not isinstance(expr, sp.Expr) or not expr.is_Add:
        return _term_fragments(expr, width) if isinstance(expr, sp.Expr) else [tex(expr)]
    out: list[str] = []
    terms = _PRINTER._as_ordered_terms(expr)
    if S in expr.free_symbols:  # polynomials in s: descending powers
        terms = sorted(terms, key=lambda t: -t.as_coeff_exponent(S)[1])
    for k, term in enumerate(terms):
        negative = term.could_extract_minus_sign()
        body = -term if negative else term
        pieces = _term_fragments(body, width - 2)
        op = "-" if negative else ("+" if k else "")
        if body.is_Add:  # a sum inside a sum: keep its brackets
            pieces[0], pieces[-1] = r"\Bigl(" + pieces[0], pieces[-1] + r"\Bigr)"
        pieces[0] = f"{op} {pieces[0]}".strip()
        out += pieces
    return out


def pack(pieces: list[str], width: int = WIDTH) -> list[str]:
    """Greedily join consecutive pieces into lines no wider than ``width``."""
    lines: list[str] = []
    for piece in pieces:
        if lines and visible_width(lines[-1] + piece) <= width:
            lines[-1] = lines[-1] + " " + piece
        else:
            lines.append(piece)
    return lines


def formula_lines(lhs: str, expr, relation: str = "=", width: int = WIDTH) -> list[str]:
    """``lhs &= ...`` lines for an ``align*`` environment, continuation lines indented."""
    first = visible_width(lhs) + 3
    lines = pack(fragments(expr, width - first), width - first)
    out = [f"{lhs} &{relation} {lines[0]}" if lhs else f"&{relation} {lines[0]}"]
    out += [rf"&\quad {line}" for line in lines[1:]]
    return out


def equation_lines(lhs, rhs, label: str = "", width: int = WIDTH) -> list[str]:
    """An equation ``label: lhs = rhs`` for ``align*``; both sides broken when long."""
    label = f"{label}\\colon\\quad " if label else ""
    inner = width - visible_width(label) - 4
    left = pack(fragments(lhs, inner), inner)
    right = pack(fragments(rhs, inner - 2), inner - 2)
    if len(left) == 1 and len(right) == 1 and visible_width(left[0] + right[0]) <= inner:
        return [f"{label}& {left[0]} = {right[0]}"]
    out = [f"{label}& {left[0]}"] + [rf"&\quad {line}" for line in left[1:]]
    out.append(f"&= {right[0]}")
    return out + [rf"&\quad {line}" for line in right[1:]]


def matrix_tex(mat) -> str | None:
    """A ``bmatrix`` when it fits on a line, otherwise ``None`` (show the entries one by one)."""
    cells = [[tex(e) for e in mat.row(i)] for i in range(mat.rows)]
    rows = [" & ".join(r) for r in cells]
    widths = [max(visible_width(cells[i][j]) for i in range(mat.rows)) for j in range(mat.cols)]
    if sum(widths) + 3 * mat.cols > WIDTH - 12:  # columns align: the widest entry of each column counts
        return None
    return r"\begin{bmatrix} " + r" \\ ".join(rows) + r" \end{bmatrix}"


def text(value) -> str:
    r"""Plain text made safe for LaTeX (the rule of :func:`symgain.emit.escape.latex_text`).

    >>> text("N*s/m & 5% of m_c")
    'N*s/m \\& 5\\% of m\\_c'
    """
    from .escape import latex_text

    return latex_text(value)


_FORMULAS = [  # formulas inside step titles and notes, set as mathematics
    (r"det\(sI - A \+ L C\) = det\(sI - A\^T \+ C\^T L\^T\)",
     r"$\\det(sI - A + LC) = \\det(sI - A^{T} + C^{T} L^{T})$"),
    (r"det\(sI - A \+ B K\) det\(sI - A \+ L C\)", r"$\\det(sI - A + BK)\\,\\det(sI - A + LC)$"),
    (r"det\(sI - A \+ B (\w+)\)", r"$\\det(sI - A + B\1)$"),
    (r"det\(sI - A\)", r"$\\det(sI - A)$"),
    (r"det \[\[A, B\], \[C, D\]\]", r"$\\det\\begin{bmatrix} A \& B \\\\ C \& D \\end{bmatrix}$"),
    (r"A_a = \[\[A, 0\], \[C, 0\]\], B_a = \[\[B\], \[D\]\]",
     r"$A_{a} = \\begin{bmatrix} A \& 0 \\\\ C \& 0 \\end{bmatrix}$, $B_{a} = \\begin{bmatrix} B \\\\ D \\end{bmatrix}$"),
    (r"\[C; C A; \.\.\.\]", r"$[C;\\ CA;\\ \\dots]$"),
    (r"A - B (\w+)", r"$A - B\1$"),
    (r"A - L C", r"$A - LC$"),
    (r"\[K, Ki\]", r"$[K,\\ K_{i}]$"),
    (r"u = -K x - Ki q", r"$u = -Kx - K_{i} q$"),
    (r"q' = y - r", r"$\\dot q = y - r$"),
    (r"u = -K x_hat", r"$u = -K\\hat x$"),
    (r"u = -K x", r"$u = -Kx$"),
    (r"(\w) = f k\b", r"$\1 = f k$"),
    (r"k\^T f\^T", r"$k^{T} f^{T}$"),
    (r"\|s\| = (\w+)", r"$|s| = \1$"),
    (r"\(s \+ (\w+)\)\^n", r"$(s + \1)^{n}$"),
    (r"e = x - x_hat", r"$e = x - \\hat x$"),
    (r"B_m: rows q_i A\^\(mu_i - 1\) B", r"$B_{m}$: rows $q_{i} A^{\\mu_{i} - 1} B$"),
    (r"([Rr])ows q_i of M\^-1", r"\1ows $q_{i}$ of $M^{-1}$"),
    (r"from N r to y: C \(B K - A\)\^\(-1\) B", r"from $N r$ to $y$: $C (BK - A)^{-1} B$"),
    (r"[Dd]et M \(M: the kept columns A\^k b_i", r"$\\det M$ ($M$: the kept columns $A^{k} b_{i}$"),
    (r"det Ctrb", r"$\\det \\mathcal{C}$"),
    (r"([Dd])irection f\b", r"\1irection $f$"),
    (r"([Gg])ain (K|L) = B_m\^-1 \[q_i p_i\(A\)\]", r"\1ain $\2 = B_{m}^{-1} [q_{i}\\, p_{i}(A)]$"),
    (r"\b([Gg])ain Ki\b", r"\1ain $K_{i}$"),
    (r"\b([Gg])ain (K|L|N)\b", r"\1ain $\2$"),
    (r"\b([A-Za-z])_(\d+)\b", r"$\1_{\2}$"),
    (r"\bat (-\w+)", r"at $\1$"),
]


def prose(value: str) -> str:
    r"""Text with the formulas it quotes set as mathematics, the rest made safe for LaTeX.

    >>> prose("closed-loop matrix A - B K")
    'closed-loop matrix $A - BK$'
    >>> prose("poles on |s| = w")
    'poles on $|s| = w$'
    """
    import re as _re

    pieces, rest = [], str(value)
    pattern = _re.compile("|".join(f"(?:{p})" for p, _ in _FORMULAS))
    pos = 0
    for match in pattern.finditer(rest):
        pieces.append(text(rest[pos:match.start()]))
        found = match.group(0)
        for p, repl in _FORMULAS:
            if _re.fullmatch(p, found):
                pieces.append(_re.sub(p, repl, found))
                break
        pos = match.end()
    pieces.append(text(rest[pos:]))
    return "".join(pieces)


def sentence(value: str) -> str:
    """A note as a sentence: capital first letter, a full stop at the end, formulas as mathematics.

    >>> sentence("extra poles at 5 times the dominant real part (rule of thumb)")
    'Extra poles at 5 times the dominant real part (rule of thumb).'
    """
    value = str(value).strip()
    if not value:
        return ""
    value = value[:1].upper() + value[1:]
    return prose(value if value.endswith((".", "!", "?")) else value + ".")


def unit_tex(unit: str) -> str:
    r"""A unit as upright mathematics: ``N*s/m`` -> ``$\mathrm{N\,s/m}$``, ``m/s^2`` with a superscript.

    >>> unit_tex("kg*m^2")
    '$\\mathrm{kg\\,m^{2}}$'
    >>> unit_tex("")
    ''
    >>> unit_tex("$x$ & ~")
    '\\$x\\$ \\& \\textasciitilde{}'
    """
    import re as _re

    if not unit:
        return ""
    if not _re.fullmatch(r"[A-Za-z0-9 */^().{}-]+", unit) or unit.count("{") != unit.count("}"):
        return text(unit)  # anything else is set as plain text, escaped
    parts = _re.split(r"\^\{?\(?(-?[0-9.]+)\)?\}?", unit.strip())
    body = "".join(text(piece).replace("*", r"\,").replace(" ", r"\,") if k % 2 == 0 else f"^{{{piece}}}"
                   for k, piece in enumerate(parts))
    return r"$\mathrm{" + body + "}$"
