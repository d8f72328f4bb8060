"""Vesting tranches of each grant, generated from its schedule or taken from the ledger."""

from __future__ import annotations

import numpy as np
import pandas as pd

from grantval.dates import from_month_and_day, month_and_day


def generate_tranches(grants: pd.DataFrame) -> pd.DataFrame:
    """Tranches of every grant from ``vest_months``, ``vest_every_months`` and ``cliff_months``.

    Tranche k (k = 1..n, n = vest_months / vest_every_months) vests
    ``vest_every_months * k`` months after ``vest_start_date`` (same day of
    month, clamped to the month's end) with quantity
    ``floor(q k / n) - floor(q (k - 1) / n)``, so the tranches sum to q.
    Tranches falling before the cliff (``cliff_months`` after the vesting
    start) vest together at the cliff.  ``vest_months == 0`` is one tranche
    at the vesting start.  Vectorised over grants.

    Parameters
    ----------
    grants : DataFrame
        Valid grants with integer ``quantity``, ``vest_months``,
        ``vest_every_months``, ``cliff_months`` and date ``vest_start_date``.

    Returns
    -------
    DataFrame
        ``grant_idx`` (position in ``grants``), ``tranche`` (1-based),
        ``vest_date`` (datetime64[D]), ``quantity`` (int64), sorted by grant
        then vest date.
    """
    cols = [grants["quantity"].to_numpy(np.int64), grants["vest_months"].to_numpy(np.int64),
            grants["vest_every_months"].to_numpy(np.int64), grants["cliff_months"].to_numpy(np.int64),
            grants["vest_start_date"].to_numpy("datetime64[D]")]
    # a block of grants at a time: the temporaries stay small (twice as fast at ten million tranches)
    parts = [_block_tranches(*(c[at : at + GRANTS_PER_BLOCK] for c in cols), at)
             for at in range(0, max(len(grants), 1), GRANTS_PER_BLOCK)]
    g, tranche, vest, qty = (np.concatenate(p) for p in zip(*parts))
    # copy=False: the arrays are this function's own; without it pandas copies them into one block
    return pd.DataFrame({"grant_idx": g, "tranche": tranche, "vest_date": vest, "quantity": qty}, copy=False)


#: grants whose tranches are generated together (up to 48 tranches each before merging)
GRANTS_PER_BLOCK = 16_384


def _block_tranches(q, months, every, cliff, start, first_grant: int) -> tuple:
    """Merged, numbered tranches of one block of grants: (grant_idx, tranche, vest_date, quantity) arrays."""
    n = np.where(months == 0, 1, months // np.maximum(every, 1))
    gidx = np.repeat(np.arange(len(q)), n)
    first = np.cumsum(n) - n
    k = np.arange(gidx.size) - np.repeat(first, n) + 1
    nn = n[gidx]
    qq = q[gidx]
    qty = (qq * k) // nn - (qq * (k - 1)) // nn
    offset = np.where(months[gidx] == 0, 0, every[gidx] * k)
    month, day = month_and_day(start)  # once per grant; each tranche's date is then gathered
    vest = from_month_and_day(month[gidx] + offset, day[gidx])
    cliff_date = from_month_and_day(month + cliff, day)[gidx]
    vest = np.maximum(vest, cliff_date)
    g, tranche, d, total = _merged_runs(gidx, vest, qty)
    return g + first_grant, tranche, d, total


def _merged_runs(gidx: np.ndarray, vest: np.ndarray, qty: np.ndarray) -> tuple:
    """Tranches of the same grant and vest date added together, empty ones dropped, numbered per grant.

    The generated tranches come sorted by grant and, within a grant, by vest
    date (the offsets grow with k and the cliff only raises early dates to one
    date), so equal (grant, date) pairs are adjacent runs: summed with numpy,
    the same table as grouping and sorting them.  Returns the arrays
    (grant_idx, tranche, vest_date, quantity).
    """
    start = np.ones(gidx.size, dtype=bool)
    start[1:] = (gidx[1:] != gidx[:-1]) | (vest[1:] != vest[:-1])
    heads = np.flatnonzero(start)
    total = np.add.reduceat(qty, heads) if heads.size else qty[:0]
    keep = total > 0
    g, d, q = gidx[heads][keep], vest[heads][keep], total[keep].astype(np.int64)
    first = np.ones(g.size, dtype=bool)
    first[1:] = g[1:] != g[:-1]
    at = np.flatnonzero(first)
    tranche = np.arange(g.size) - np.repeat(at, np.diff(np.append(at, g.size))) + 1
    return g.astype(np.int64), tranche.astype(np.int64), d.astype("datetime64[D]"), q


def _number(frame: pd.DataFrame) -> pd.DataFrame:
    frame = frame.sort_values(["grant_idx", "vest_date"], kind="stable").reset_index(drop=True)
    frame["tranche"] = frame.groupby("grant_idx").cumcount() + 1
    frame["quantity"] = frame["quantity"].astype(np.int64)
    frame["vest_date"] = frame["vest_date"].to_numpy("datetime64[D]")
    return frame[["grant_idx", "tranche", "vest_date", "quantity"]]


def combine_schedules(generated: pd.DataFrame, given: pd.DataFrame | None) -> pd.DataFrame:
    """Replace the generated tranches of grants that the ledger's ``tranches`` table names.

    ``given`` has ``grant_idx``, ``vest_date`` and ``quantity``; rows of the
    same grant and date are added together.
    """
    if given is None or given.empty:
        return generated
    named = np.unique(given["grant_idx"].to_numpy())
    kept = generated[~generated["grant_idx"].isin(named)]
    g = given.groupby(["grant_idx", "vest_date"], as_index=False)["quantity"].sum()
    return _number(pd.concat([kept, g[["grant_idx", "vest_date", "quantity"]]], ignore_index=True))
