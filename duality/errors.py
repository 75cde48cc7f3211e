"""Exceptions raised by the package.

Every error the user can provoke is a :class:`DualityError` (a ``ValueError``) whose
message names the problem and where it is, so front ends can show it on one line.
"""
from __future__ import annotations


class DualityError(ValueError):
    """Base class of every error raised for bad input or an impossible request."""


class FormulaError(DualityError):
    """A formula text could not be read.

    Attributes
    ----------
    text : str
        The formula as given.
    position : int or None
        0-based character offset of the problem in ``text`` (None when the whole
        text is at fault, e.g. it is too long).
    """

    def __init__(self, message: str, text: str = "", position: int | None = None):
        self.text = text
        self.position = position
        self.reason = message
        where = f" at position {position + 1}" if position is not None else ""
        full = f"{message}{where}"
        if position is not None and text and len(text) <= 200:
            full += f"\n  {text}\n  {' ' * position}^"
        super().__init__(full)


class ModelError(DualityError):
    """A model is inconsistent (unknown symbol, a name used twice, bad parameter value)."""


class NoSolutionError(DualityError):
    """The requested dual does not exist for this model (e.g. profit under constant returns).

    The message explains why; ``reason`` holds the same text.
    """

    def __init__(self, message: str):
        self.reason = message
        super().__init__(message)


class DomainError(DualityError):
    """A function was evaluated outside the region where it is valid."""


class BudgetExceeded(DualityError):
    """Work did not finish within its budget (CPU seconds of the work itself).

    ``kind`` says which limit stopped it: ``"cpu"`` (the work used its CPU seconds),
    ``"wall"`` (the wall-clock backstop fired, e.g. the work was blocked), or ``"spent"``
    (nothing was left in the budget when the work would have started).  ``seconds`` is
    the budget that applied, when known.
    """

    def __init__(self, message: str, *, kind: str = "cpu", seconds: float | None = None):
        self.kind = kind
        self.seconds = seconds
        super().__init__(message)

    def __reduce__(self):
        return (_budget_exceeded, (str(self), self.kind, self.seconds))


def _budget_exceeded(message: str, kind: str, seconds: float | None) -> BudgetExceeded:
    return BudgetExceeded(message, kind=kind, seconds=seconds)


# -- row numbers in messages ------------------------------------------------------------
#: Name of a table index that holds the data file's own row numbers.  One rule everywhere:
#: a row is named as a spreadsheet shows the file, the header line being row 1 (so the
#: first data row is row 2).  Readers of data files (scenario data, the command line, the
#: app's uploads, chunked evaluation) number their tables so; a table a user builds keeps
#: its own index, and messages name that index label.
FILE_ROW = "file row"


def number_file_rows(frame, start: int = 0):
    """Give ``frame`` (rows ``start``, ``start + 1``, ... of a data file, counted from 0
    after the header) the file's own row numbers as index; returns ``frame``."""
    frame.index = range(start + 2, start + 2 + len(frame))
    frame.index.name = FILE_ROW
    return frame


def row_label(data, position: int):
    """How messages name the row at 0-based ``position``: a table's index label (the file
    row when read from a file), or ``position + 1`` for plain arrays."""
    index = getattr(data, "index", None)
    if index is not None and hasattr(index, "__getitem__") and len(index) > position:
        return index[position]
    return position + 1
