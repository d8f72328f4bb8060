"""The optional ``accounts`` ledger table: general-ledger account names for the close's journal.

Each row names the account one kind of journal entry goes to for one award type::

    award_type,entry,account
    *,expense,6100 Stock-based compensation
    rsu,expense,6110 Stock-based compensation - units
    *,equity,3200 Additional paid-in capital

``award_type`` is an award type of the grants table or ``*`` (every type);
``entry`` is the kind of line (``expense``, ``equity``; features add their own,
such as a liability or tax account).  A row for the award type wins over the
``*`` row; without either, :data:`DEFAULT_ACCOUNTS` applies.
"""

from __future__ import annotations

import numpy as np

from grantval.awards.registry import AWARD_TYPES
from grantval.errors import Problem
from grantval.ledger.columns import Column
from grantval.ledger.extensions import Extension, LedgerParts

#: account names used when the ledger has no ``accounts`` row for an entry
DEFAULT_ACCOUNTS: dict[str, str] = {
    "expense": "Stock-based compensation expense",
    "equity": "Additional paid-in capital",
    "liability": "Share-based payment liability",
    "cash": "Cash",
}
#: entries whose account a feature may set (features add theirs to this tuple by importing it)
KNOWN_ENTRIES: list[str] = list(DEFAULT_ACCOUNTS)
ANY = "*"

ACCOUNTS = (
    Column("award_type", "text", required=True),
    Column("entry", "text", required=True),
    Column("account", "text", required=True),
)


def _check(parts: LedgerParts) -> list[Problem]:
    """Unknown award types, repeated (award_type, entry) pairs, unknown entries (warning)."""
    t = parts.tables.get("accounts")
    if t is None or t.empty:
        return []
    src = parts.sources.get("accounts", "accounts")
    out: list[Problem] = []
    seen: dict[tuple, int] = {}
    for row, award, entry, account in zip(t["_row"], t["award_type"], t["entry"], t["account"]):
        if award is None or entry is None or account is None:
            continue  # the required-cell problem is already reported
        row = int(row)
        if award != ANY and award not in AWARD_TYPES:
            out.append(Problem(src, row, "award_type",
                               f"{award!r} is not an award type ({', '.join(AWARD_TYPES)}) or * for every type"))
        key = (award, entry.strip().lower())
        if key in seen:
            out.append(Problem(src, row, "entry", f"the {key[1]} account of award type {award} is set twice "
                                                   f"(also row {seen[key]})"))
        else:
            seen[key] = row
        if key[1] not in KNOWN_ENTRIES:
            out.append(Problem(src, row, "entry", f"{entry!r} is not an entry the journal uses "
                                                   f"({', '.join(KNOWN_ENTRIES)}); the row is not used", "warning"))
    return out


EXTENSION = Extension(
    feature="accounts",
    tables={"accounts": ACCOUNTS},
    text_columns=frozenset({"award_type", "entry", "account"}),
    check=_check,
)


class AccountMap:
    """Account names by award type and entry, from a ledger's ``accounts`` table.

    Parameters
    ----------
    table : DataFrame or None
        The typed ``accounts`` table (``ledger.tables["accounts"]``); None or
        empty means every account is the default.
    """

    def __init__(self, table=None):
        self._names: dict[tuple[str, str], str] = {}
        if table is not None and len(table):
            for award, entry, account in zip(table["award_type"], table["entry"], table["account"]):
                if award is not None and entry is not None and account is not None:
                    self._names.setdefault((str(award), str(entry).strip().lower()), str(account))

    def account(self, award_type: str, entry: str) -> str:
        """The account of ``entry`` for ``award_type``: its own row, the ``*`` row, or the default."""
        for key in ((award_type, entry), (ANY, entry)):
            if key in self._names:
                return self._names[key]
        if entry not in DEFAULT_ACCOUNTS:
            raise KeyError(f"no default account for the journal entry {entry!r}; add it to the accounts table")
        return DEFAULT_ACCOUNTS[entry]

    def accounts(self, award_types: np.ndarray, entry: str) -> np.ndarray:
        """Per element of ``award_types``, the account of ``entry`` (object array)."""
        award_types = np.asarray(award_types, dtype=object)
        out = np.empty(len(award_types), dtype=object)
        for a in set(award_types.tolist()):
            out[award_types == a] = self.account(a, entry)
        return out


def account_map(ledger) -> AccountMap:
    """The :class:`AccountMap` of a loaded ledger."""
    return AccountMap(ledger.tables.get("accounts"))
