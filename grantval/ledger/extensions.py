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
    "grantval.ledger.ext.espp",
    "grantval.ledger.ext.market",
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
    # (espp) grants a feature synthesizes from its own tables; see :class:`Contribution`
    contribute: Callable[[dict, dict], "Contribution"] | None = None
    # (espp) tranche changes of the feature's own event types:
    # ``changes(parts, events, grant_pos, core_changes) -> (extra changes, problems)``
    changes: Callable | None = None
    #: (market conditions) vest dates the feature sets on the generated tranches:
    #: ``vest_dates(grants, tables, tranches) -> tranches``
    vest_dates: Callable | None = None


@dataclass
class Contribution:
    """Grants, tranches and assumption rows a feature synthesizes from its own tables (ESPP enrollments).

    They join the ledger after the core checks of the grants table, so the feature checks its own
    rows (``check`` and the problems returned here).

    Attributes
    ----------
    grants : DataFrame
        Rows in the grants format (missing columns blank) with ``_row`` and ``_source`` naming the
        feature's table row, and ``assumption_row``: position in ``assumptions``.
    tranches : DataFrame
        ``grant`` (position in ``grants``), ``vest_date``, ``quantity`` (int64).
    assumptions : DataFrame
        Rows in the assumptions format (the valuation inputs of the synthesized grants).
    problems : list of Problem
    withheld : set of str
        Grant ids the feature would have built but could not (their problems are reported), so
        events naming them are not also reported as unknown grants.
    """

    grants: "pd.DataFrame"
    tranches: "pd.DataFrame"
    assumptions: "pd.DataFrame"
    problems: list
    withheld: set = field(default_factory=set)


def rows_where(frame: "pd.DataFrame", mask) -> list[int]:
    """Spreadsheet row numbers (the ``_row`` column) of the rows of ``frame`` where ``mask`` holds."""
    import numpy as np

    return [int(r) for r in frame["_row"].to_numpy()[np.asarray(mask, dtype=bool)]]


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


def vest_date_extensions(grants, tables: dict, tranches):
    """Tranches with the vest dates the extensions set (a market condition's settlement date)."""
    for ext in extensions():
        if ext.vest_dates is not None:
            tranches = ext.vest_dates(grants, tables, tranches)
    return tranches


def adjust_extensions(parts: LedgerParts, allocate: Callable) -> "tuple[Adjustment, pd.DataFrame, list] | None":
    """Chain every extension's terms in force (see :class:`Adjustment`), in :data:`MODULES` order.

    Each extension's ``adjust`` sees the terms the previous ones returned: its ``parts`` carry their
    grants, tranches and events (in ``tables["events"]``) and ``changes`` allocated again under them
    by ``allocate(grants, tranches, events) -> (changes, problems)``, so two adjusting features
    combine instead of the last one replacing the others.

    Returns
    -------
    (Adjustment, DataFrame, list) or None
        The last terms in force (problems of every extension), the changes allocated under them and
        the allocation problems; None when no extension changed anything.
    """
    last = None
    problems: list = []
    changes, probs = parts.changes, []
    for ext in extensions():
        if ext.adjust is None:
            continue
        a = ext.adjust(parts)
        if a is None:
            continue
        problems += a.problems
        changes, probs = allocate(a.grants, a.tranches, a.events)
        last = a
        parts = LedgerParts(a.grants, {**parts.tables, "events": a.events}, parts.sources, a.tranches,
                            parts.schedule_ok, changes)
    if last is None:
        return None
    return Adjustment(last.grants, last.tranches, last.events, problems), changes, probs


def contribute_extensions(g, a, pos, tables: dict, sources: dict):
    """Append every extension's synthesized grants and assumption rows (ESPP enrollments, ...).

    Returns the grants, the assumptions, the assumptions row of each grant, the synthesized
    tranches (``grant_idx`` into the returned grants, ``vest_date``, ``quantity``), the problems and
    the grant ids withheld (see :class:`Contribution`).
    """
    import numpy as np
    import pandas as pd

    from grantval.errors import Problem

    problems: list = []
    extra = []
    withheld: set = set()
    for ext in extensions():
        if ext.contribute is None:
            continue
        c = ext.contribute(tables, sources)
        problems += c.problems
        withheld |= c.withheld
        if not len(c.grants):
            continue
        clash = c.grants["grant_id"].isin(set(g["grant_id"].dropna())).to_numpy()
        for r, s, k in zip(c.grants["_row"][clash], c.grants["_source"][clash], c.grants["grant_id"][clash]):
            problems.append(Problem(s, int(r), "grant_id", f"{k!r} is also a grant of the grants table"))
        n_g, n_a = len(g), len(a)
        rows = c.grants.drop(columns="assumption_row").reset_index(drop=True)
        for col in g.columns:  # blanks of each missing column's own type (NaT, NaN, None)
            if col not in rows:
                rows[col] = g[col].iloc[:0].reindex(range(len(rows))).to_numpy()
        rows = rows[list(g.columns) + [x for x in rows.columns if x not in g.columns]]
        g = pd.concat([g, rows], ignore_index=True) if len(g) else rows.reset_index(drop=True)
        a = pd.concat([a, c.assumptions.reindex(columns=a.columns)], ignore_index=True)
        pos = np.concatenate([pos, n_a + c.grants["assumption_row"].to_numpy(np.int64)])
        t = c.tranches
        extra.append(pd.DataFrame({"grant_idx": n_g + t["grant"].to_numpy(np.int64),
                                   "vest_date": t["vest_date"].to_numpy("datetime64[D]"),
                                   "quantity": t["quantity"].to_numpy(np.int64)}))
    tranches = pd.concat(extra, ignore_index=True) if extra else None
    return g, a, pos, tranches, problems, withheld


def extension_changes(parts: LedgerParts, events, grant_pos, changes):
    """Add the tranche changes of the extensions' own event types to the core's ``changes``."""
    import pandas as pd

    problems: list = []
    for ext in extensions():
        if ext.changes is None:
            continue
        more, probs = ext.changes(parts, events, grant_pos, changes)
        problems += probs
        if len(more):
            changes = pd.concat([changes, more], ignore_index=True) if len(changes) else more.reset_index(drop=True)
    return changes, problems
