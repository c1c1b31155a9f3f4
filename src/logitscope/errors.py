"""Exceptions raised by logitscope.

Every problem with user input is reported by one of these classes, each a
subclass of :class:`ValueError` or :class:`TypeError`, so existing ``except
ValueError`` handlers keep working, and each message names what is wrong
(which rows, which labels, which shape was expected).
"""

from __future__ import annotations

from collections.abc import Sequence

__all__ = [
    "ClassNameError",
    "DuplicateError",
    "FileFormatError",
    "InputTypeError",
    "LabelError",
    "LogitscopeError",
    "LooksLikeProbabilitiesWarning",
    "NonFiniteError",
    "ParameterError",
    "ProbabilityError",
    "ShapeError",
    "describe_rows",
]


class LogitscopeError(ValueError):
    """Base class of every input error that logitscope raises."""


class ShapeError(LogitscopeError):
    """An array has the wrong rank or length."""


class NonFiniteError(LogitscopeError):
    """Logits or probabilities hold NaN or infinite values."""


class LabelError(LogitscopeError):
    """Labels are out of range, of the wrong length or of the wrong kind."""


class ClassNameError(LogitscopeError):
    """A class name is unknown or class names are inconsistent."""


class DuplicateError(LogitscopeError):
    """Class names or sample ids are not unique."""


class ProbabilityError(LogitscopeError):
    """Probabilities are negative or their rows do not sum to one."""


class FileFormatError(LogitscopeError):
    """A file is missing, unreadable or not laid out as documented."""


class ParameterError(LogitscopeError):
    """A parameter (temperature, k, target accuracy, costs ...) is out of its range."""


class InputTypeError(TypeError):
    """An argument is of a type logitscope cannot use."""


class LooksLikeProbabilitiesWarning(UserWarning):
    """Logits whose rows are all non-negative and sum to one: probabilities, most likely.

    Taken as logits they give other probabilities (softmax of probabilities
    is not the identity); :meth:`logitscope.LogitFrame.from_probabilities`
    is the constructor for them.
    """


def describe_rows(rows: Sequence[int] | object, limit: int = 5) -> str:
    """Format the first few row indices of a problem for an error message.

    Parameters
    ----------
    rows : sequence of int
        Offending row indices, in order.
    limit : int
        How many to list before summarising the rest.

    Examples
    --------
    >>> describe_rows([3, 7, 9, 12, 20, 31, 40])
    'rows 3, 7, 9, 12, 20 and 2 more'
    >>> describe_rows([4])
    'row 4'
    """
    seq = [int(r) for r in rows]  # type: ignore[union-attr]
    if len(seq) == 1:
        return f"row {seq[0]}"
    shown = ", ".join(str(r) for r in seq[:limit])
    rest = len(seq) - limit
    return f"rows {shown}" + (f" and {rest} more" if rest > 0 else "")
