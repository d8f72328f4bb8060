"""One column of a ledger table: its name, kind, whether it is required, its choices and default."""

from __future__ import annotations

from dataclasses import dataclass


@dataclass(frozen=True)
class Column:
    """One column of a ledger table.

    ``kind`` is ``text``, ``date``, ``number``, ``integer`` or ``choice``.
    ``required`` means the column must exist and every row must fill it;
    conditional requirements (for options only, for example) are checked in
    :mod:`grantval.ledger.validate`.
    """

    name: str
    kind: str
    required: bool = False
    choices: tuple[str, ...] = ()
    default: object = None
