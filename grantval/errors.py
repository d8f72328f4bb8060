"""The one exception family of grantval.

Every error the tool raises on purpose derives from :class:`GrantvalError`, so
a caller can catch one class.  Messages are written for the person who has to
fix the input: they name the argument, file, sheet, row or column at fault and
say what is wrong.
"""

from __future__ import annotations

from dataclasses import dataclass


class GrantvalError(Exception):
    """Base class of every error grantval raises deliberately."""

    #: process exit code the command layer uses for this error
    exit_code = 1


class InputError(GrantvalError, ValueError):
    """An argument of a Python API function is invalid.

    Subclasses :class:`ValueError` so numeric callers can treat it as one.
    """


class UsageError(GrantvalError):
    """The command was called with options that do not fit together."""

    exit_code = 2


@dataclass(frozen=True)
class Problem:
    """One problem found in a ledger, located as a spreadsheet user sees it.

    Parameters
    ----------
    source : str
        File name (CSV) or sheet name (xlsx) the problem is in.
    row : int or None
        Row number as shown in a spreadsheet (the header is row 1), or None
        when the problem concerns the whole table.
    column : str or None
        Column name, or None when the problem concerns the whole row or table.
    message : str
        What is wrong, in words the user can act on.
    severity : str
        ``"error"`` or ``"warning"``.
    """

    source: str
    row: int | None
    column: str | None
    message: str
    severity: str = "error"

    def __str__(self) -> str:
        parts = [self.source]
        if self.row is not None:
            parts.append(f"row {self.row}")
        if self.column is not None:
            parts.append(self.column)
        prefix = "warning: " if self.severity == "warning" else ""
        return f"{', '.join(parts)}: {prefix}{self.message}"


class LedgerError(GrantvalError):
    """A ledger failed validation; carries every problem found, not only the first."""

    def __init__(self, problems: list[Problem], ledger: str = "ledger"):
        self.problems = list(problems)
        self.ledger = ledger
        errors = [p for p in self.problems if p.severity == "error"]
        head = f"{ledger}: {len(errors)} problem(s) found"
        super().__init__("\n".join([head] + [str(p) for p in errors]))


class OutputError(GrantvalError):
    """An output file cannot be written where it was asked for."""


class OutputPathError(OutputError, UsageError):
    """An output location is unusable (checked before any computing): exit code 2.

    Raised by :func:`grantval.io.outputs.plan_outputs` for a missing folder, a folder
    where a file is expected (or the reverse), an output that is an input or a ledger
    folder, an output named twice, or a folder without write permission.
    """

    exit_code = 2
