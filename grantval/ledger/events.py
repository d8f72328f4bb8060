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

from grantval.awards.registry import flag
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
    out: list[tuple] = []
    if events.empty:
        return _frame(out), problems
    t_grant = tranches["grant_idx"].to_numpy()
    g = _GrantFacts(grants, t_grant)
    # plain Python numbers: each event touches a handful of tranches, where numpy's per-call cost dominates
    vest = tranches["vest_date"].to_numpy("datetime64[D]").view(np.int64).tolist()
    remaining = tranches["quantity"].to_numpy(np.int64).tolist()
    dates = events["event_date"].to_numpy("datetime64[D]")
    kinds = events["event_type"].to_numpy()
    qtys = events["quantity"].to_numpy(float)
    rows = events["_row"].to_numpy()
    # rows added by a ledger extension (a modification's reduction in quantity) name their own table
    sources = events["_source"].to_numpy() if "_source" in events else np.full(len(events), source, dtype=object)
    for e in np.lexsort((np.arange(len(events)), dates, grant_pos)).tolist():
        gp, kind, d = int(grant_pos[e]), kinds[e], dates[e]
        if gp < 0 or kind not in KINDS or np.isnat(d):
            continue  # unknown grants are reported elsewhere; extension events are handled by their feature
        problem = _event_problem(g, gp, kind, d)
        if problem is None:
            idx = range(g.t_start[gp], g.t_end[gp])
            day = int(d.view(np.int64))
            vested = [vest[t] <= day for t in idx]
            pool = _pool(kind, idx, vested, g.exercisable[gp])
            problem = _allocate(out, remaining, pool, e, d, day, kind, qtys[e], g.ids[gp], vested, idx)
        if problem is not None:
            problems.append(Problem(sources[e], rows[e], *problem))
    return _frame(out), problems


class _GrantFacts:
    """Per-grant arrays the allocation needs."""

    def __init__(self, grants: pd.DataFrame, t_grant: np.ndarray):
        n = np.arange(len(grants))
        self.t_start = np.searchsorted(t_grant, n, side="left").tolist()
        self.t_end = np.searchsorted(t_grant, n, side="right").tolist()
        self.award = grants["award_type"].to_numpy()
        self.exercisable = flag(self.award, "exercisable")
        self.gdate = grants["grant_date"].to_numpy("datetime64[D]")
        self.edate = grants["expiration_date"].to_numpy("datetime64[D]")
        self.ids = grants["grant_id"].to_numpy()


def _event_problem(g: _GrantFacts, gp: int, kind: str, d) -> tuple[str, str] | None:
    """(column, message) when the event cannot apply to its grant at all, else None."""
    if d < g.gdate[gp]:
        return "event_date", f"{d} is before the grant date {g.gdate[gp]} of grant {g.ids[gp]}"
    if not g.exercisable[gp] and kind in ("exercise", "expire"):
        kind_name = str(g.award[gp]).upper()
        return ("event_type", f"grant {g.ids[gp]} is an {kind_name} award; {kind_name}s are not exercised "
                "and do not expire")
    if not np.isnat(g.edate[gp]) and d > g.edate[gp]:
        return ("event_date", f"{kind} on {d} is after the expiration date {g.edate[gp]} of grant {g.ids[gp]}; "
                "options still outstanding then expire on that date by themselves")
    return None


def _pool(kind: str, idx: range, vested: list[bool], exercisable: bool) -> list[int]:
    """Tranches an event draws on, in the order it takes from them."""
    unvested = [t for t, v in zip(idx, vested) if not v]
    if kind == "forfeit":
        return unvested[::-1]
    if kind == "cancel":
        # vested units are settled, so only unvested units can be cancelled
        return unvested[::-1] if not exercisable else list(idx)[::-1]
    return [t for t, v in zip(idx, vested) if v]


def _shortfall(kind: str, qty: int, avail: int, gid, d, vested_left: int) -> str:
    return {
        "forfeit": (f"forfeits {qty} but only {avail} of grant {gid} are unvested and outstanding on {d}; "
                    f"vested options cannot be forfeited ({vested_left} vested: use expire or exercise)"),
        "cancel": f"cancels {qty} but only {avail} of grant {gid} are outstanding on {d}",
        "exercise": f"exercises {qty} but only {avail} of grant {gid} are vested and outstanding on {d}",
        "expire": f"expires {qty} but only {avail} of grant {gid} are vested and outstanding on {d}",
    }[kind]


def _allocate(out: list, remaining: list[int], pool: list[int], e, d, day: int, kind, given_qty, gid, vested, idx):
    """Take the event's quantity from ``pool`` (appending allocations to ``out``); (column, message) on a problem.

    ``d`` is the event date (for messages), ``day`` its day number.  Each allocation is appended as
    whole numbers: (tranche, event, day number, position of the kind in :data:`KINDS`, quantity).
    """
    avail = sum(remaining[t] for t in pool)
    if np.isnan(given_qty):
        if kind == "exercise":
            return "quantity", "is required for an exercise"
        qty = avail
    else:
        qty = int(given_qty)
    if qty <= 0 and not (np.isnan(given_qty) and avail == 0):
        return "quantity", f"must be a positive whole number; got {qty}"
    if qty > avail:
        return "quantity", _shortfall(kind, qty, avail, gid, d, sum(remaining[t] for t, v in zip(idx, vested) if v))
    left = qty
    for t in pool:
        if left == 0:
            break
        take = min(left, remaining[t])
        if take:
            remaining[t] -= take
            left -= take
            out.append((t, e, day, KINDS.index(kind), take))
    return None


def _frame(out: list[tuple]) -> pd.DataFrame:
    """The allocations (tuples of whole numbers, see :func:`_allocate`) as the changes table."""
    a = np.array(out, dtype=np.int64).reshape(-1, 5)
    return pd.DataFrame({
        "tranche_idx": a[:, 0].copy(),
        "event_idx": a[:, 1].copy(),
        "date": a[:, 2].view("datetime64[D]"),
        "kind": pd.array(np.array(KINDS, dtype=object)[a[:, 3]], dtype="object"),
        "quantity": a[:, 4].copy(),
    }, copy=False)
