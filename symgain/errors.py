"""Errors raised by symgain.

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
]


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
            parts.append(str(self.file))
        if self.key:
            key = self.key
            if self.row is not None:
                key += f"[{self.row}]"
            if self.col is not None:
                key += f"[{self.col}]"
            parts.append(key)
        return ": ".join(parts)


class SymgainError(ValueError):
    """Root of all symgain errors; ``str()`` is a single line."""

    def __init__(self, what: str, *, where: Where | None = None):
        self.what = " ".join(str(what).split())  # always one line
        self.where = where or Where()
        super().__init__(self.what)

    def __str__(self) -> str:
        place = str(self.where)
        return f"{place}: {self.what}" if place else self.what


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
