"""The one error type of Phasewise.

Every error a user can cause (a bad file, a bad setting, a bad rulebook, a
locked ledger) is raised as :class:`PhasewiseError` or one of its subclasses.
The message always names where the problem is: the file, the row, the column
or the field, and what was expected.  Code that catches user errors catches
``PhasewiseError`` and nothing broader.
"""

from __future__ import annotations

__all__ = [
    "PhasewiseError",
    "ReadError",
    "SettingsError",
    "RulebookError",
    "LedgerError",
    "LedgerLockedError",
    "LedgerVersionError",
    "GridTooLargeError",
    "plain_reason",
]


class PhasewiseError(Exception):
    """An error the user can cause and fix.

    Parameters
    ----------
    message : str
        What is wrong and what was expected, in plain words.
    file, row, column, field : optional
        Where the problem is.  Whatever is given is put in front of the
        message in a fixed order, so all messages read the same way:
        ``"stars.csv: row 12, column 'mag': not a number: 'abc'"``.
    """

    def __init__(
        self,
        message: str,
        *,
        file: str | None = None,
        row: int | None = None,
        column: str | None = None,
        field: str | None = None,
    ) -> None:
        self.reason = message
        self.file = None if file is None else str(file)
        self.row = row
        self.column = column
        self.field = field
        super().__init__(self._compose())

    def _compose(self) -> str:
        where = []
        if self.row is not None:
            where.append(f"row {self.row}")
        if self.column is not None:
            where.append(f"column '{self.column}'")
        if self.field is not None:
            where.append(f"field '{self.field}'")
        text = ", ".join(where)
        if self.file:
            text = f"{self.file}: {text}" if text else self.file
        return f"{text}: {self.reason}" if text else self.reason


class ReadError(PhasewiseError):
    """A file could not be read as photometry."""


class SettingsError(PhasewiseError):
    """A setting has a value outside what it accepts."""


class GridTooLargeError(SettingsError):
    """A frequency grid is larger than the stated limit; ask before computing it."""


class RulebookError(PhasewiseError):
    """A rulebook (TOML) is malformed; the message names the line."""


class LedgerError(PhasewiseError):
    """A ledger file cannot be opened or written."""


class LedgerLockedError(LedgerError):
    """Another process holds the ledger for writing."""


class LedgerVersionError(LedgerError):
    """The ledger was written by a newer Phasewise."""


def plain_reason(exc: BaseException) -> str:
    """Our own sentence for why a computation on one star stopped.

    Stored for the star and shown to the person instead of the raw exception
    text (which names internals, or may carry bytes from the input); the raw
    text belongs in a debug field or log only.
    """
    if isinstance(exc, PhasewiseError):
        return str(exc)
    if isinstance(exc, (ZeroDivisionError, OverflowError, FloatingPointError)):
        return (
            "a computation overflowed or divided by zero: the magnitudes or their errors "
            "may lie outside any physical range"
        )
    if type(exc).__name__ == "LinAlgError":
        return (
            "a fit had no unique solution: too few distinct points, or errors that are "
            "zero or enormous"
        )
    if isinstance(exc, MemoryError):
        return "there was not enough memory to analyse this star"
    if isinstance(exc, (ValueError, TypeError, IndexError, KeyError)):
        return "the analysis met values it cannot use (for example too few distinct times)"
    return (
        f"an unexpected error ({type(exc).__name__}) stopped the analysis of this star; "
        "please report it with the ledger's failure details"
    )
