r"""User text inside generated files: one escaping rule per language.

Titles, meanings, units and notes come from the model file and end up in
Python docstrings, C comments, LaTeX, CSV headers and figure labels. Every
emitter passes them through these functions, so that a text can never end a
docstring or a comment, start a TeX command or a matplotlib formula: it
survives as text, on one line.

>>> python_text('x' + '"' * 3 + '\nimport os')
'x\\"\\"\\"\\nimport os'
>>> c_comment("a */ int f(void); /* b")
'a * / int f(void); / * b'
>>> latex_text(r"50% \input{x}")
'50\\% \\textbackslash{}input\\{x\\}'
>>> plot_text("$\\frac{1}{0}$ N")
'\\$\\frac{1}{0}\\$ N'
"""
from __future__ import annotations

__all__ = ["python_text", "python_literal", "c_comment", "latex_text", "csv_text", "plot_text"]

# Letters that pdflatex with its default input and font encodings sets without extra packages.
_LATEX_LETTERS = set("äöüÄÖÜßéèêëàáâçñíóúìòùîôûïÉÈÊÀÁÂÇÑÍÓÚåæøÅÆØ")
_LATEX_SPECIAL = {"\\": r"\textbackslash{}", "&": r"\&", "%": r"\%", "$": r"\$", "#": r"\#",
                  "_": r"\_", "{": r"\{", "}": r"\}", "~": r"\textasciitilde{}",
                  "^": r"\textasciicircum{}", "<": r"\textless{}", ">": r"\textgreater{}",
                  "|": r"\textbar{}", '"': "''", "[": "{[}", "]": "{]}",
                  "\u00b0": r"\ensuremath{^{\circ}}", "\u00b5": r"\ensuremath{\mu}",
                  "\u03bc": r"\ensuremath{\mu}", "\u2126": r"\ensuremath{\Omega}",
                  "\u03a9": r"\ensuremath{\Omega}", "\u00b7": r"\ensuremath{\cdot}"}


def _is_control(ch: str) -> bool:
    code = ord(ch)
    return code < 32 or code == 127 or not ch.isprintable()


def python_text(text) -> str:
    r"""Text for a line inside a (non-raw) Python docstring or string with double quotes.

    Backslashes and quotes are escaped, control and unprintable characters
    written as escapes: the result never ends the string and stays on one line.

    >>> python_text("a\\b \x00 \u2028")
    'a\\\\b \\x00 \\u2028'
    """
    out = []
    for ch in str(text):
        if ch == "\\":
            out.append("\\\\")
        elif ch in "\"'":
            out.append("\\" + ch)
        elif ch == "\n":
            out.append("\\n")
        elif _is_control(ch):
            code = ord(ch)
            out.append(f"\\x{code:02x}" if code < 256 else f"\\u{code:04x}" if code < 0x10000
                       else f"\\U{code:08x}")
        else:
            out.append(ch)
    return "".join(out)


def python_literal(text) -> str:
    """A Python string literal that evaluates to *text* exactly.

    >>> python_literal('a"b')
    '\\'a"b\\''
    """
    return repr(str(text))


def c_comment(text) -> str:
    """Text for one line inside a C block comment: it never closes or opens a comment.

    Non-ASCII and control characters become ``U+XXXX``; ``??`` (a trigraph
    start) is split.

    >>> c_comment("x*/y/*z ??/ \\u00b0C")
    'x* /y/ *z ? ?/ U+00B0C'
    """
    out = []
    for ch in str(text):
        if ord(ch) > 126 or _is_control(ch):
            out.append(f"U+{ord(ch):04X}")
        else:
            out.append(ch)
    line = "".join(out)
    while "*/" in line or "/*" in line or "??" in line:
        line = line.replace("*/", "* /").replace("/*", "/ *").replace("??", "? ?")
    return line


def latex_text(text) -> str:
    r"""Plain text for a LaTeX document: every special character set as itself.

    Characters that pdflatex cannot set without packages are written as
    ``U+XXXX``; control characters (newlines included) become spaces.

    >>> latex_text("N*s/m & 5% of m_c, 20 °C, ☃")
    'N*s/m \\& 5\\% of m\\_c, 20 \\ensuremath{^{\\circ}}C, U+2603'
    """
    out = []
    for ch in str(text):
        if ch in _LATEX_SPECIAL:
            out.append(_LATEX_SPECIAL[ch])
        elif _is_control(ch):
            out.append(" ")
        elif ord(ch) > 126 and ch not in _LATEX_LETTERS:
            out.append(f"U+{ord(ch):04X}")
        else:
            out.append(ch)
    return "".join(out)


def csv_text(text) -> str:
    """Text for a CSV cell: one line, and never read as a spreadsheet formula.

    >>> csv_text("=HYPERLINK(1)"), csv_text("m [kg]")
    ("'=HYPERLINK(1)", 'm [kg]')
    """
    line = "".join(" " if _is_control(ch) else ch for ch in str(text))
    return "'" + line if line[:1] in ("=", "+", "-", "@") else line


def plot_text(text) -> str:
    r"""Text for a matplotlib label or title: dollar signs escaped, so no math text is parsed.

    >>> plot_text("5 $")
    '5 \\$'
    """
    line = "".join(" " if _is_control(ch) and ch != "\n" else ch for ch in str(text))
    return line.replace("$", r"\$")
