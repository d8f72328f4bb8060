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
    """The command or function was called with arguments that do not fit together.

    A message may name the arguments it is about as ``{name}`` fields listed in
    ``params``: the Python API shows the parameter names (``through``), the
    command line shows its own option names (``--through``) through
    :meth:`worded`.
    """

    exit_code = 2

    def __init__(self, message: str, params: tuple[str, ...] = ()):
        self.template = message
        self.params = tuple(params)
        super().__init__(self.worded({}))

    def worded(self, names: dict[str, str]) -> str:
        """The message with each named argument written as ``names`` gives it (default: its own name)."""
        text = self.template
        for k in self.params:  # plain replacement: the message may quote user text holding braces
            text = text.replace("{" + k + "}", names.get(k, k))
        return text


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
        parts = [visible(self.source)]
        if self.row is not None:
            parts.append(f"row {self.row}")
        if self.column is not None:
            parts.append(visible(self.column))
        prefix = "warning: " if self.severity == "warning" else ""
        return f"{', '.join(parts)}: {prefix}{visible(self.message)}"


def visible(text: str) -> str:
    """``text`` with every character that does not print (controls, escape sequences, zero-width and
    direction marks, spaces other than the plain one) written as a ``\\x..``/``\\u....`` escape,
    so that a file name or cell quoted in a message cannot drive the terminal it is printed to."""
    text = str(text)
    if text.isprintable():
        return text
    return "".join(c if c.isprintable() else (f"\\x{ord(c):02x}" if ord(c) < 0x100 else
                                              f"\\u{ord(c):04x}" if ord(c) < 0x10000 else f"\\U{ord(c):08x}")
                   for c in text)


class LedgerError(GrantvalError):
    """A ledger failed validation; carries every problem found, not only the first."""

    def __init__(self, problems: list[Problem], ledger: str = "ledger"):
        self.problems = list(problems)
        self.ledger = ledger
        errors = [p for p in self.problems if p.severity == "error"]
        head = f"{visible(ledger)}: {len(errors)} problem(s) found"
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
