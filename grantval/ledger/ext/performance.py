"""Ledger extension: performance conditions (performance share units) and service periods other than the schedule.

Adds to ``grants``: ``condition_set`` (key into ``performance``), ``max_payout`` (the largest
payout the plan allows, a decimal share of target), ``retirement_eligible_date`` (service is
no longer required after it) and ``service_inception_date`` (service begins before the grant
date).  Adds the table ``performance``: ``condition_set``, ``assessed_on``, ``payout``
(decimal share of target: 1.5 = 150%), ``expected_vest_date`` (optional).
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from grantval.errors import Problem
from grantval.ledger.columns import Column
from grantval.ledger.extensions import Extension, LedgerParts, rows_where

PERFORMANCE = (
    Column("condition_set", "text", required=True),
    Column("assessed_on", "date", required=True),
    Column("payout", "number", required=True),
    Column("expected_vest_date", "date"),
)

GRANT_COLUMNS = (
    Column("condition_set", "text"),
    Column("max_payout", "number"),
    Column("retirement_eligible_date", "date"),
    Column("service_inception_date", "date"),
)


def _grant_problems(g: pd.DataFrame, src: str, market: frozenset = frozenset()) -> list[Problem]:
    """Row checks of the new grant columns (``market``: condition sets of market conditions)."""
    p: list[Problem] = []
    gd = g["grant_date"].to_numpy("datetime64[D]")
    psu = (g["award_type"] == "psu").to_numpy()
    for col in ("retirement_eligible_date",):
        if col not in g:
            continue
        d = g[col].to_numpy("datetime64[D]")
        for r in rows_where(g, ~np.isnat(d) & (d < gd)):
            p.append(Problem(src, r, col, "is before the grant date"))
    inception = g["service_inception_date"].to_numpy("datetime64[D]")
    for r in rows_where(g, ~np.isnat(inception) & (inception > gd)):
        p.append(Problem(src, r, "service_inception_date", "is after the grant date; service that begins after the "
                         "grant date needs no inception date"))
    p += _inception_problems(g, src, inception, gd)
    for r in rows_where(g, psu & g["exercise_price"].notna().to_numpy()):
        p.append(Problem(src, r, "exercise_price", "a psu (performance share unit) has no exercise price; leave it blank"))
    for r in rows_where(g, psu & g["condition_set"].isna().to_numpy()):
        p.append(Problem(src, r, "condition_set", "is required for a psu grant (a key into the performance table)"))
    cs = g["condition_set"].notna().to_numpy() & ~g["condition_set"].isin(market).to_numpy()
    for r in rows_where(g, cs & ~psu):
        p.append(Problem(src, r, "condition_set", "only psu grants carry a performance condition here"))
    mp = g["max_payout"].to_numpy(float)
    for r in rows_where(g, ~np.isnan(mp) & (mp < 0)):
        p.append(Problem(src, r, "max_payout", "must be zero or more"))
    return p


def _inception_problems(g: pd.DataFrame, src: str, inception: np.ndarray, gd: np.ndarray) -> list[Problem]:
    """Award kinds whose cost follows a rule of their own take no earlier service inception date (yet)."""
    from grantval.ledger.ext.cash import CASH_TYPES

    early = ~np.isnat(inception) & (inception < gd)
    award = g["award_type"].to_numpy(dtype=object)
    p: list[Problem] = []
    for r, a in zip(rows_where(g, early & np.isin(award, ("psu",) + CASH_TYPES)),
                    award[early & np.isin(award, ("psu",) + CASH_TYPES)]):
        p.append(Problem(src, r, "service_inception_date", f"service before the grant date is supported for "
                         f"share-settled options and units only, not for award_type {a}; leave it blank"))
    return p


def _table_problems(perf: pd.DataFrame, src: str) -> list[Problem]:
    """Row checks of the performance table."""
    p: list[Problem] = []
    pay = perf["payout"].to_numpy(float)
    for r, x in zip(rows_where(perf, pay < 0), pay[pay < 0]):
        p.append(Problem(src, r, "payout", f"must be zero or more (a decimal share of target: 1.5 is 150%); got {x:g}"))
    for r, x in zip(rows_where(perf, pay > 10), pay[pay > 10]):
        p.append(Problem(src, r, "payout", f"{x:g} is over 10 (1,000% of target): write the payout as a decimal "
                         "share of target (1.5 is 150%)"))
    dup = perf[["condition_set", "assessed_on"]].astype(str).duplicated().to_numpy()
    for r in rows_where(perf, dup):
        p.append(Problem(src, r, "assessed_on", "the condition set already has an assessment on this date"))
    return p


def _cross_problems(g: pd.DataFrame, perf: pd.DataFrame, gsrc: str, psrc: str,
                    market: frozenset = frozenset()) -> list[Problem]:
    """Each psu grant against the assessments of its condition set (market conditions are checked elsewhere)."""
    p: list[Problem] = []
    by_set = {k: f for k, f in perf.groupby("condition_set")} if len(perf) else {}
    known = set(by_set)
    named = g[g["condition_set"].notna().to_numpy()]  # only grants with a condition set (most have none)
    for row, cs, gdate, mp in zip(named["_row"], named["condition_set"], named["grant_date"], named["max_payout"]):
        if cs is None or (isinstance(cs, float) and np.isnan(cs)):
            continue
        if cs in market and cs not in known:
            continue
        if cs not in known:
            p.append(Problem(gsrc, int(row), "condition_set", f"{cs!r} has no rows in the performance table "
                             "(nor in market_conditions)"))
            continue
        f = by_set[cs]
        gd = np.datetime64(gdate, "D")
        assessed = f["assessed_on"].to_numpy("datetime64[D]")
        for r in rows_where(f, assessed < gd):
            p.append(Problem(psrc, r, "assessed_on", f"is before the grant date {gd} of grant(s) using {cs!r}"))
        if not np.any(assessed == gd):
            p.append(Problem(gsrc, int(row), "condition_set",
                             f"{cs!r} has no assessment on the grant date {gd}: give the payout judged probable "
                             "(ASC 718) or the best estimate (IFRS 2) at the grant date"))
        ev = f["expected_vest_date"].to_numpy("datetime64[D]")
        for r in rows_where(f, ~np.isnat(ev) & (ev <= gd)):
            p.append(Problem(psrc, r, "expected_vest_date", f"is not after the grant date {gd}"))
        if mp is not None and not np.isnan(mp):
            over = f["payout"].to_numpy(float) > mp + 1e-12
            for r in rows_where(f, over):
                p.append(Problem(psrc, r, "payout", f"is above the grant's max_payout {mp:g}"))
    return p


def _single_tranche(parts: LedgerParts) -> list[Problem]:
    """A re-estimated vesting date moves the one vesting date of a cliff award; refuse it elsewhere."""
    g, perf = parts.grants, parts.tables["performance"]
    moving = set(perf["condition_set"][perf["expected_vest_date"].notna()])
    if not moving:
        return []
    counts = parts.tranches.groupby("grant_idx").size()
    p = []
    for i, (row, cs) in enumerate(zip(g["_row"], g["condition_set"])):
        if cs in moving and counts.get(i, 1) > 1:
            p.append(Problem(parts.sources["grants"], int(row), "condition_set",
                             f"{cs!r} re-estimates the vesting date (expected_vest_date), which needs a single "
                             "vesting date; this grant has several tranches"))
    return p


def check(parts: LedgerParts) -> list[Problem]:
    """Every check of the performance columns and table."""
    g, perf = parts.grants, parts.tables["performance"]
    gsrc, psrc = parts.sources["grants"], parts.sources["performance"]
    mc = parts.tables.get("market_conditions")
    market = frozenset(mc["condition_set"]) if mc is not None and len(mc) else frozenset()
    return (_grant_problems(g, gsrc, market) + _table_problems(perf, psrc) + _cross_problems(g, perf, gsrc, psrc, market)
            + _single_tranche(parts))


EXTENSION = Extension(
    feature="performance conditions",
    tables={"performance": PERFORMANCE},
    grant_columns=GRANT_COLUMNS,
    text_columns=frozenset({"condition_set"}),
    check=check,
)
