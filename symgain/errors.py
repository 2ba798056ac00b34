r"""Errors raised by symgain.

Every error is a :class:`SymgainError` (a ``ValueError``). It carries *where*
the problem is (file, key, row and column of a matrix entry) and *what* was
found, and renders as one line:

>>> err = ModelError("undeclared symbol 'q'", where=Where("shuttle.toml", "plant.A", 1, 0))
>>> str(err)
"shuttle.toml: plant.A[1][0]: undeclared symbol 'q'"
>>> isinstance(err, ValueError)
True

The command line prints ``str(err)`` and exits with code 2 for input errors, and
with code 4 for a :class:`ClosedFormLimitation` (a well-posed design that has
no readable closed form).
Whatever text an error echoes is made printable and bounded: control
characters (newline, NUL, escape, direction marks) are written as escapes,
and a line longer than :data:`MAX_MESSAGE` characters is cut:

>>> print(ModelError("unknown key 'a\nb\x00'"))
unknown key 'a b\x00'
>>> len(str(ModelError("y" * 5000))) <= MAX_MESSAGE
True
"""
from __future__ import annotations

from dataclasses import dataclass, replace

__all__ = [
    "Where",
    "SymgainError",
    "ModelError",
    "ExpressionError",
    "DesignError",
    "NotControllableError",
    "OutputError",
    "ClosedFormLimitation",
    "printable",
    "MAX_MESSAGE",
]

MAX_MESSAGE = 300  # characters of one error line (offending texts are echoed shorter still)
MAX_PLACE = 100  # characters of a file name or key in the place prefix


def _escaped(ch: str) -> str:
    code = ord(ch)
    if ch == "\n":
        return "\\n"
    if ch in "\t\r\v\f":
        return " "
    if code < 32 or code == 127:
        return f"\\x{code:02x}"
    if (0x80 <= code < 0xA0 or 0x200B <= code <= 0x200F or 0x202A <= code <= 0x202E
            or 0x2066 <= code <= 0x2069 or code in (0x2028, 0x2029, 0xFEFF)):
        return f"\\u{code:04x}"  # C1 controls, zero-width and direction marks
    return ch


def printable(text, limit: int | None = None) -> str:
    r"""*text* as one printable line: control characters escaped, cut to *limit* characters.

    >>> print(printable("a\nb\x00c\u202e"))
    a\nb\x00c\u202e
    >>> printable("abcdefghij", 8)
    'abcde...'
    """
    line = "".join(_escaped(ch) for ch in str(text))
    if limit is not None and len(line) > limit:
        line = line[: max(limit - 3, 0)] + "..."
    return line


@dataclass(frozen=True)
class Where:
    """A place in the input: file, dotted key, and optional row/column.

    >>> str(Where("m.toml", "feedback.poles", 2))
    'm.toml: feedback.poles[2]'
    >>> str(Where(None, "plant.B", 0, 1))
    'plant.B[0][1]'
    """

    file: str | None = None
    key: str | None = None
    row: int | None = None
    col: int | None = None

    def at(self, row: int | None = None, col: int | None = None) -> "Where":
        """The same place narrowed to a row (and column)."""
        return replace(self, row=row, col=col)

    def child(self, key: str) -> "Where":
        """The same file, a sub-key: ``Where(f, "plant").child("A")`` -> ``plant.A``."""
        full = f"{self.key}.{key}" if self.key else key
        return Where(self.file, full)

    def __str__(self) -> str:
        parts = []
        if self.file:
            parts.append(printable(self.file, MAX_PLACE))
        if self.key:
            key = printable(self.key, MAX_PLACE)
            if self.row is not None:
                key += f"[{self.row}]"
            if self.col is not None:
                key += f"[{self.col}]"
            parts.append(key)
        return ": ".join(parts)


class SymgainError(ValueError):
    """Root of all symgain errors; ``str()`` is a single line."""

    def __init__(self, what: str, *, where: Where | None = None):
        self.what = printable(" ".join(str(what).split()), MAX_MESSAGE)  # one line
        self.where = where if isinstance(where, Where) else Where()
        super().__init__(self.what)

    def __str__(self) -> str:
        place = str(self.where)
        return printable(f"{place}: {self.what}" if place else self.what, MAX_MESSAGE)


class ModelError(SymgainError):
    """The model (file or API input) is malformed or inconsistent."""


class ExpressionError(ModelError):
    """An expression string is not in the allowed syntax."""


class DesignError(SymgainError):
    """The design cannot be carried out (for example: no solution)."""


class NotControllableError(DesignError):
    """The plant is not controllable (or observable) for any parameter values."""


class OutputError(SymgainError):
    """An output file or folder cannot be written."""


class ClosedFormLimitation(SymgainError):
    """The model is well posed but its design has no (readable) closed form; CLI exit code 4.

    >>> err = ClosedFormLimitation("the gain k_24 is a root of a degree-5 factor")
    >>> isinstance(err, DesignError), str(err)
    (False, 'the gain k_24 is a root of a degree-5 factor')
    """
