"""Ledger extension of cash-settled awards: the ``liability_values`` table and its checks.

``liability_values`` gives the fair value per unit of cash-settled awards at
reporting dates, from an outside valuation: ``applies_to`` (a ``grant_id``, a
``group`` or ``*``; the most specific row wins, as for estimates), ``measured_on``
and ``fair_value``.  Exercises of cash-settled awards must carry the
``share_price`` of the exercise date: the cash paid is the intrinsic value.
"""

from __future__ import annotations

import numpy as np

from grantval.errors import Problem
from grantval.ledger.columns import Column
from grantval.ledger.extensions import Extension, LedgerParts

#: award types settled in cash (kept here so the ledger checks need not import the award kinds)
CASH_TYPES = ("cash_sar", "cash_unit")

LIABILITY_VALUES = (
    Column("applies_to", "text", required=True),
    Column("measured_on", "date", required=True),
    Column("fair_value", "number", required=True),
)


def _value_rows(parts: LedgerParts) -> list[Problem]:
    """Row checks of ``liability_values``: known target, non-negative value, one row per target and date."""
    lv = parts.tables["liability_values"]
    src = parts.sources.get("liability_values", "liability_values")
    p: list[Problem] = []
    if lv.empty:
        return p
    g = parts.grants
    ids = set(g["grant_id"].dropna())
    groups = set(g["group"].dropna()) - {""}
    cash = np.isin(g["award_type"].to_numpy(dtype=object), CASH_TYPES)
    cash_targets = set(g["grant_id"][cash]) | set(g["group"][cash]) | {"*"}
    values = lv["fair_value"].to_numpy(float)
    for r, k, x in zip(lv["_row"], lv["applies_to"], values):
        if k is not None and k != "*" and k not in ids and k not in groups:
            p.append(Problem(src, int(r), "applies_to", f"{k!r} is not a grant_id, a group or '*'"))
        elif k is not None and k not in cash_targets:
            p.append(Problem(src, int(r), "applies_to", f"{k!r} has no cash-settled award (cash_sar or cash_unit); "
                             "the row is not used", "warning"))
        if not np.isnan(x) and x < 0:
            p.append(Problem(src, int(r), "fair_value", f"must be zero or more (a fair value per unit); got {x:g}"))
    key = lv[["applies_to", "measured_on"]].astype(str)
    for r, k, d in zip(lv["_row"][key.duplicated()], lv["applies_to"][key.duplicated()],
                       lv["measured_on"][key.duplicated()]):
        p.append(Problem(src, int(r), "measured_on", f"{k!r} already has a liability value measured on "
                         f"{np.datetime64(d, 'D')}"))
    return p


def _exercise_rows(parts: LedgerParts) -> list[Problem]:
    """Exercises of cash-settled awards carry the share price of the exercise date."""
    ev = parts.tables["events"]
    src = parts.sources.get("events", "events")
    if ev.empty:
        return []
    g = parts.grants
    award = dict(zip(g["grant_id"].to_numpy(dtype=object), g["award_type"].to_numpy(dtype=object)))
    p: list[Problem] = []
    for r, gid, kind, s in zip(ev["_row"].to_numpy(), ev["grant_id"].to_numpy(dtype=object),
                               ev["event_type"].to_numpy(dtype=object), ev["share_price"].to_numpy(float)):
        if award.get(gid) not in CASH_TYPES or kind != "exercise":
            continue
        if np.isnan(s):
            p.append(Problem(src, int(r), "share_price", f"is required for an exercise of the cash-settled grant "
                             f"{gid}: the cash paid is (share price - exercise price) x quantity"))
        elif s < 0:
            p.append(Problem(src, int(r), "share_price", f"must be zero or more; got {s:g}"))
    return p


def check(parts: LedgerParts) -> list[Problem]:
    """Every problem of the cash-settled feature's tables and events."""
    return _value_rows(parts) + _exercise_rows(parts)


EXTENSION = Extension(feature="cash-settled awards", tables={"liability_values": LIABILITY_VALUES}, check=check)
