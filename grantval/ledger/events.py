"""Applying grant events to the tranches: who holds what, and when.

Rules (documented in docs/ledger-format.md):

- ``forfeit`` removes unvested options (a blank quantity: all unvested on the
  date), the latest-vesting tranches first.  A tranche vesting on the event
  date counts as vested.  Forfeiting more than is unvested is an error.
- ``cancel`` removes outstanding options (blank: all outstanding), the
  latest-vesting tranches first, so unvested ones go before vested ones.
- ``exercise`` removes vested options (quantity required), the earliest
  vesting first; more than is vested and outstanding is an error.
- ``expire`` removes vested options (blank: all vested and outstanding),
  the earliest vesting first.
- RSUs have no exercise or expire events: their units settle when they vest.
- No event may fall after an option's expiration date: options still
  outstanding at the end of that date expire by themselves (the disclosure
  tables count them as expired on that date).
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from grantval.errors import Problem

#: tranche-change kinds, in the order they are written
KINDS = ("forfeit", "cancel", "exercise", "expire")


def apply_events(grants: pd.DataFrame, tranches: pd.DataFrame, events: pd.DataFrame,
                 grant_pos: np.ndarray, source: str) -> tuple[pd.DataFrame, list[Problem]]:
    """Allocate every event to tranches and check it against what is outstanding.

    Parameters
    ----------
    grants : DataFrame
        The ledger's grants (for award type, grant and expiration dates).
    tranches : DataFrame
        Output of :func:`grantval.ledger.schedule.generate_tranches`.
    events : DataFrame
        Typed ``events`` table with ``_row``.
    grant_pos : ndarray of int
        Position in ``grants`` of each event's grant (-1 when unknown; those
        events are reported elsewhere and skipped here).
    source : str
        Name of the events file or sheet, for problems.

    Returns
    -------
    changes : DataFrame
        One row per (event, tranche) allocation: ``tranche_idx`` (row of
        ``tranches``), ``event_idx`` (row of ``events``), ``date``, ``kind``,
        ``quantity`` (positive).
    problems : list of Problem
    """
    problems: list[Problem] = []
    out_t, out_e, out_d, out_k, out_q = [], [], [], [], []
    if events.empty:
        return _frame(out_t, out_e, out_d, out_k, out_q), problems
    t_grant = tranches["grant_idx"].to_numpy()
    t_start = np.searchsorted(t_grant, np.arange(len(grants)), side="left")
    t_end = np.searchsorted(t_grant, np.arange(len(grants)), side="right")
    vest = tranches["vest_date"].to_numpy("datetime64[D]")
    remaining = tranches["quantity"].to_numpy(np.int64).copy()
    award = grants["award_type"].to_numpy()
    gdate = grants["grant_date"].to_numpy("datetime64[D]")
    edate = grants["expiration_date"].to_numpy("datetime64[D]")
    gid = grants["grant_id"].to_numpy()
    dates = events["event_date"].to_numpy("datetime64[D]")
    kinds = events["event_type"].to_numpy()
    qtys = events["quantity"].to_numpy(float)
    rows = events["_row"].to_numpy()
    order = np.lexsort((np.arange(len(events)), dates, grant_pos))
    for e in order:
        g = grant_pos[e]
        kind = kinds[e]
        d = dates[e]
        if g < 0 or kind is None or np.isnat(d):
            continue
        r = rows[e]
        if d < gdate[g]:
            problems.append(Problem(source, r, "event_date",
                                    f"{d} is before the grant date {gdate[g]} of grant {gid[g]}"))
            continue
        if award[g] == "rsu" and kind in ("exercise", "expire"):
            problems.append(Problem(source, r, "event_type",
                                    f"grant {gid[g]} is an RSU award; RSUs are not exercised and do not expire"))
            continue
        if not np.isnat(edate[g]) and d > edate[g]:
            problems.append(Problem(source, r, "event_date",
                                    f"{kind} on {d} is after the expiration date {edate[g]} of grant {gid[g]}; "
                                    "options still outstanding then expire on that date by themselves"))
            continue
        lo, hi = t_start[g], t_end[g]
        idx = np.arange(lo, hi)
        vested = vest[lo:hi] <= d
        rem = remaining[lo:hi]
        qty = qtys[e]
        if kind == "forfeit":
            pool = idx[~vested][::-1]
        elif kind == "cancel":
            # vested RSUs are settled, so only unvested units can be cancelled
            pool = idx[~vested][::-1] if award[g] == "rsu" else idx[::-1]
        else:
            pool = idx[vested]
        avail = int(remaining[pool].sum())
        if np.isnan(qty):
            if kind == "exercise":
                problems.append(Problem(source, r, "quantity", "is required for an exercise"))
                continue
            qty = avail
        qty = int(qty)
        if qty <= 0 and not (np.isnan(qtys[e]) and avail == 0):
            problems.append(Problem(source, r, "quantity", f"must be a positive whole number; got {qty}"))
            continue
        if qty > avail:
            what = {
                "forfeit": (f"forfeits {qty} but only {avail} of grant {gid[g]} are unvested and outstanding on {d}; "
                            f"vested options cannot be forfeited ({int(rem[vested].sum())} vested: use expire or exercise)"),
                "cancel": f"cancels {qty} but only {avail} of grant {gid[g]} are outstanding on {d}",
                "exercise": f"exercises {qty} but only {avail} of grant {gid[g]} are vested and outstanding on {d}",
                "expire": f"expires {qty} but only {avail} of grant {gid[g]} are vested and outstanding on {d}",
            }[kind]
            problems.append(Problem(source, r, "quantity", what))
            continue
        left = qty
        for t in pool:
            if left == 0:
                break
            take = min(left, int(remaining[t]))
            if take == 0:
                continue
            remaining[t] -= take
            left -= take
            out_t.append(t)
            out_e.append(e)
            out_d.append(d)
            out_k.append(kind)
            out_q.append(take)
    return _frame(out_t, out_e, out_d, out_k, out_q), problems


def _frame(t, e, d, k, q) -> pd.DataFrame:
    return pd.DataFrame({
        "tranche_idx": np.asarray(t, dtype=np.int64),
        "event_idx": np.asarray(e, dtype=np.int64),
        "date": np.asarray(d, dtype="datetime64[D]"),
        "kind": pd.array(k, dtype="object"),
        "quantity": np.asarray(q, dtype=np.int64),
    })
