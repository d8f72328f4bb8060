"""Ledger extensions: the tables, grant columns and event types an award feature adds, and its checks.

A feature (performance conditions, modifications, tax, ...) defines ``EXTENSION`` in its own
module under :mod:`grantval.ledger.ext` and is listed in :data:`MODULES`.  The ledger format
(:mod:`grantval.ledger.schema`) then reads its tables, and :func:`grantval.ledger.read_ledger`
runs its ``check`` on the typed ledger, adding its problems to the others.  Nothing else in the
reader changes when a feature is added.
"""

from __future__ import annotations

import importlib
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Callable

if TYPE_CHECKING:  # pragma: no cover
    import numpy as np
    import pandas as pd

    from grantval.errors import Problem
    from grantval.ledger.columns import Column

#: feature modules, each defining ``EXTENSION``
MODULES: tuple[str, ...] = (
    "grantval.ledger.ext.performance",
    "grantval.ledger.ext.cash",
    "grantval.ledger.ext.accounts",
    "grantval.ledger.ext.tax",
    "grantval.ledger.ext.modifications",
)


@dataclass
class LedgerParts:
    """The typed ledger as the feature checks see it (all checks of the core already run).

    Attributes
    ----------
    grants : DataFrame
        Grants with defaults applied (``_row`` = spreadsheet row).
    tables : dict of str to DataFrame
        Every table of the format, typed (empty when absent).
    sources : dict of str to str
        How problems name each table (``grants.csv``, ``sheet grants``).
    tranches : DataFrame
        Tranches of the grants with a valid schedule.
    schedule_ok : ndarray of bool
        Per grant: its schedule is valid.
    """

    grants: "pd.DataFrame"
    tables: dict[str, "pd.DataFrame"]
    sources: dict[str, str]
    tranches: "pd.DataFrame"
    schedule_ok: "np.ndarray"
    #: events allocated to tranches under the terms as granted (None before allocation)
    changes: "pd.DataFrame | None" = None


@dataclass
class Adjustment:
    """Terms in force that an extension's ``adjust`` returns: events are allocated again under them.

    ``grants`` and ``tranches`` are copies with changed terms (a later expiration date, an earlier
    vest date); ``events`` may have rows added (a ``_source`` column then names each row's table);
    ``problems`` are the extension's own.
    """

    grants: "pd.DataFrame"
    tranches: "pd.DataFrame"
    events: "pd.DataFrame"
    problems: list = field(default_factory=list)


@dataclass(frozen=True)
class Extension:
    """What one feature adds to the ledger format."""

    feature: str
    tables: dict[str, tuple["Column", ...]] = field(default_factory=dict)
    grant_columns: tuple["Column", ...] = ()
    event_types: tuple[str, ...] = ()
    text_columns: frozenset = frozenset()
    check: Callable[[LedgerParts], list["Problem"]] | None = None
    #: ``adjust(parts) -> Adjustment | None``: terms in force after the feature's changes (modifications)
    adjust: Callable[[LedgerParts], "Adjustment | None"] | None = None


def extensions() -> list[Extension]:
    """Every registered extension, in :data:`MODULES` order."""
    return [importlib.import_module(m).EXTENSION for m in MODULES]


def check_extensions(parts: LedgerParts) -> list["Problem"]:
    """Run every extension's check on the typed ledger."""
    problems: list = []
    for ext in extensions():
        if ext.check is not None:
            problems += ext.check(parts)
    return problems


def adjust_extensions(parts: LedgerParts) -> list[Adjustment]:
    """Every extension's terms in force (see :class:`Adjustment`), in :data:`MODULES` order."""
    out = []
    for ext in extensions():
        if ext.adjust is not None:
            a = ext.adjust(parts)
            if a is not None:
                out.append(a)
    return out
