"""Tranches cut where a modification's new vesting schedule would vest their units on two dates.

The ledger generates each grant's tranches on its grant date.  A later schedule change (the
``modifications`` table's ``vest_months``, ``vest_every_months``, ``cliff_months``) may put the
units of one tranche on two or more new dates: 1,000 units in four annual tranches of 250 becoming
36 months every 12 (333 / 333 / 334) vests units 251-333 of tranche 2 on the first new date and
units 334-500 on the second.  Such a tranche is cut, from the grant date on, into pieces at the
new schedule's boundaries (units in vesting order, as :func:`grantval.ledger.ext.modifications.vesting`
takes them).  The pieces have the tranche's vesting date, so until the modification they carry the
same grant-date fair value per unit and the same cost as the whole tranche; from the modification on,
each piece takes the new vesting date of its units.  The pieces are numbered with the grant's other
tranches in vesting order (``tranche`` 1, 2, ...), so the grant's tranche numbers after a cut
tranche move up.

Only valid schedules are cut for (the modification checks report the others on their rows), and
only where the pieces' dates differ after the modification date (a tranche whose units all fall on
or before it vests on it whole).  A tranche vested before the modification is never cut.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from grantval.ledger.ext.modifications import (SCHEDULE, Terms, _cum_within, new_schedules, schedule_fault, terms,
                                               vesting)

#: schedule changes of one grant can cut a piece again (a second change's boundaries): passes at most
PASSES = 8


def split_tranches(grants: pd.DataFrame, tables: dict, tranches: pd.DataFrame) -> pd.DataFrame:
    """``tranches`` with every tranche a schedule change would split cut into pieces (see the module).

    Parameters
    ----------
    grants : DataFrame
        Every grant of the ledger (position = ``tranches["grant_idx"]``).
    tables : dict of DataFrame
        The typed ledger tables; ``tables["modifications"]`` is used.
    tranches : DataFrame
        ``grant_idx``, ``tranche``, ``vest_date``, ``quantity``, sorted by grant then vest date.

    Returns
    -------
    DataFrame
        The same columns; unchanged when nothing is cut.
    """
    mods = tables.get("modifications")
    if mods is None or not len(mods) or not any(c in mods for c in SCHEDULE) or not len(tranches):
        return tranches
    t = terms(grants, mods)
    if t.reschedule is None or not t.reschedule.any():
        return tranches
    t.reschedule = t.reschedule & _valid(t.schedule_after)
    for _ in range(PASSES):
        v = vesting(grants, tranches, mods, t)
        if not v.split.any():
            break
        rows, ends = _cuts(grants, tranches, t, v)
        tranches = _cut(tranches, rows, ends)
    return tranches


def _valid(after: np.ndarray) -> np.ndarray:
    """Per modification: its schedule in force is whole numbers passing the grants table's rules."""
    whole = np.isfinite(after).all(axis=1) & (after == np.round(after)).all(axis=1)
    return np.array([bool(w) and schedule_fault(*row) is None for w, row in zip(whole, after)], dtype=bool)


def _cuts(grants: pd.DataFrame, tranches: pd.DataFrame, t: Terms, v) -> tuple[np.ndarray, np.ndarray]:
    """Cut points of the split pairs: (tranche row, units of the grant up to the cut) arrays.

    A cut sits at each end of a new-schedule tranche strictly inside the tranche's units whose date
    (the modification date at the earliest) differs from the next new tranche's.
    """
    j = np.flatnonzero(v.split)
    ns = new_schedules(grants, tranches, t, np.unique(v.p_mod[j]))
    k, tr, day = ns.which[v.p_mod[j]], v.p_tranche[j], t.date[v.p_mod[j]]
    start = np.searchsorted(ns.key, k * ns.width + ns.lo[tr] + 1, side="left")
    stop = np.searchsorted(ns.key, k * ns.width + ns.hi[tr], side="left")  # new tranches ending inside the tranche
    count = stop - start
    pair = np.repeat(np.arange(len(j)), count)
    at = np.repeat(start, count) + np.arange(count.sum()) - np.repeat(np.cumsum(count) - count, count)
    nxt = np.minimum(at + 1, len(ns.date) - 1)
    differs = np.maximum(ns.date[at], day[pair]) != np.maximum(ns.date[nxt], day[pair])
    return tr[pair][differs].astype(np.int64), ns.cum[at][differs].astype(np.int64)


def _cut(tranches: pd.DataFrame, rows: np.ndarray, ends: np.ndarray) -> pd.DataFrame:
    """Tranche ``rows[i]`` cut after unit ``ends[i]`` of its grant; pieces renumbered within the grant."""
    q = tranches["quantity"].to_numpy(np.int64)
    hi = _cum_within(tranches["grant_idx"].to_numpy(), q)
    lo = hi - q
    all_rows = np.concatenate([rows, np.arange(len(tranches))])
    all_ends = np.concatenate([ends, hi])
    order = np.lexsort((all_ends, all_rows))
    all_rows, all_ends = all_rows[order], all_ends[order]
    keep = np.r_[True, (all_rows[1:] != all_rows[:-1]) | (all_ends[1:] != all_ends[:-1])]
    all_rows, all_ends = all_rows[keep], all_ends[keep]
    first = np.r_[True, all_rows[1:] != all_rows[:-1]]
    begin = np.where(first, lo[all_rows], np.r_[0, all_ends[:-1]])
    out = tranches.iloc[all_rows].reset_index(drop=True)
    out["quantity"] = (all_ends - begin).astype(np.int64)
    gi = out["grant_idx"].to_numpy()
    heads = np.flatnonzero(np.r_[True, gi[1:] != gi[:-1]])
    out["tranche"] = (np.arange(len(out)) - np.repeat(heads, np.diff(np.r_[heads, len(out)])) + 1).astype(np.int64)
    return out
