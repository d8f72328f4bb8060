"""ESPP events: ``withdraw`` (a cancellation of the purchase periods not yet reached) and ``purchase``.

A withdrawal by an employee who stays employed is accounted for as a cancellation, not a
forfeiture, under both standards (ASC 718-50-35-2 disregards decreases in withholdings unless
service ends by termination, and Deloitte's Roadmap, section 8.5, reads a complete withdrawal as
a cancellation: unrecognised cost is recognised at once, ASC 718-20-35-9; IFRS 2.28A: ceasing to
contribute is failing a non-vesting condition the employee can choose to meet, accounted for as a
cancellation under IFRS 2.28(a)).  So each withdrawal becomes ``cancel`` changes of the unvested
tranches, which the expense engine accelerates; no policy is needed to choose the rule.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from grantval.errors import Problem

AWARD_TYPE = "espp"


def _frame(rows: list[tuple]) -> pd.DataFrame:
    t, e, d, k, q = (list(c) for c in zip(*rows)) if rows else ([], [], [], [], [])
    return pd.DataFrame({"tranche_idx": np.asarray(t, dtype=np.int64), "event_idx": np.asarray(e, dtype=np.int64),
                         "date": np.asarray(d, dtype="datetime64[D]"), "kind": pd.array(k, dtype="object"),
                         "quantity": np.asarray(q, dtype=np.int64)})


def _withdraw(e, d, qty, idx, vest, remaining, gid):
    """Cancel rows of one withdrawal, or (column, message)."""
    if not np.isnan(qty):
        return None, ("quantity", "leave blank: a withdrawal ends the whole enrollment")
    open_ = idx[(vest[idx] > d) & (remaining[idx] > 0)]
    if not len(open_):
        return None, ("event_date", (f"{d} is on or after the last purchase date of {gid}: nothing is left to "
                                     "withdraw from"))
    return [(t, e, d, "cancel", int(remaining[t])) for t in open_], None


def _purchase(d, qty, price, idx, vest, bought: set, gp):
    """(column, message) when a purchase event is wrong, else None."""
    if np.isnan(qty) or qty <= 0:
        return "quantity", "is required for a purchase: the whole shares bought (a positive number)"
    if np.isnan(price) or price <= 0:
        return "share_price", "is required for a purchase: the price paid per share (above zero)"
    if not np.any(vest[idx] == d):
        dates = ";".join(str(v) for v in vest[idx])
        return "event_date", f"{d} is not a purchase date of the offering ({dates})"
    if (gp, d) in bought:
        return "event_date", f"a purchase on {d} is already recorded for this enrollment"
    bought.add((gp, d))
    return None


def changes(parts, events: pd.DataFrame, grant_pos: np.ndarray, core: pd.DataFrame):
    """Cancel changes of the withdrawals, and the problems of both event types."""
    g, tr = parts.grants, parts.tranches
    src = parts.sources["events"]
    kinds = events["event_type"].to_numpy(object)
    mine = np.isin(kinds, ("withdraw", "purchase"))
    if not mine.any():
        return _frame([]), []
    t_grant = tr["grant_idx"].to_numpy()
    vest = tr["vest_date"].to_numpy("datetime64[D]")
    t_start = np.searchsorted(t_grant, np.arange(len(g)), side="left")
    t_end = np.searchsorted(t_grant, np.arange(len(g)), side="right")
    award = g["award_type"].to_numpy(object)
    gdate = g["grant_date"].to_numpy("datetime64[D]")
    dates = events["event_date"].to_numpy("datetime64[D]")
    qtys, prices = events["quantity"].to_numpy(float), events["share_price"].to_numpy(float)
    # what the core events left of each tranche (core events after a withdrawal are refused below)
    remaining = tr["quantity"].to_numpy(np.int64) - np.bincount(
        core["tranche_idx"].to_numpy(np.int64), weights=core["quantity"].to_numpy(np.int64),
        minlength=len(tr)).astype(np.int64)
    withdrawn = _withdrawals(events, grant_pos, kinds, dates)
    out: list[tuple] = []
    p: list[Problem] = []
    bought: set = set()
    for e in np.lexsort((np.arange(len(events)), dates, grant_pos)):
        gp, d, row = grant_pos[e], dates[e], int(events["_row"].iat[e])
        if gp < 0 or np.isnat(d):
            continue
        wd = withdrawn.get(gp)
        if wd is not None and e != wd[1] and d > wd[0]:
            p.append(Problem(src, row, "event_date", f"{d} is after the withdrawal on {wd[0]} "
                             f"(row {int(events['_row'].iat[wd[1]])}); the enrollment has ended"))
            continue
        if not mine[e]:
            continue
        problem = _check_grant(g, award, gdate, gp, kinds[e], d, withdrawn, e)
        if problem is None and kinds[e] == "withdraw":
            idx = np.arange(t_start[gp], t_end[gp])
            rows, problem = _withdraw(e, d, qtys[e], idx, vest, remaining, g["grant_id"].iat[gp])
            out += rows or []
        elif problem is None:
            problem = _purchase(d, qtys[e], prices[e], np.arange(t_start[gp], t_end[gp]), vest, bought, gp)
        if problem is not None:
            p.append(Problem(src, row, *problem))
    return _frame(out), p


def _withdrawals(events, grant_pos, kinds, dates) -> dict:
    """Per grant position: (date, event index) of its first withdrawal."""
    out: dict = {}
    for e in np.lexsort((np.arange(len(events)), dates, grant_pos)):
        if kinds[e] == "withdraw" and grant_pos[e] >= 0 and not np.isnat(dates[e]) and grant_pos[e] not in out:
            out[grant_pos[e]] = (dates[e], e)
    return out


def _check_grant(g, award, gdate, gp, kind, d, withdrawn, e):
    """(column, message) when the event cannot apply to its grant at all."""
    if award[gp] != AWARD_TYPE:
        return "event_type", f"{kind} applies to ESPP enrollments only; grant {g['grant_id'].iat[gp]} is an {award[gp]}"
    if d < gdate[gp]:
        return "event_date", f"{d} is before the offering start {gdate[gp]} of {g['grant_id'].iat[gp]}"
    if kind == "withdraw" and withdrawn[gp][1] != e:
        return "event_type", f"{g['grant_id'].iat[gp]} has already withdrawn on {withdrawn[gp][0]}"
    return None
