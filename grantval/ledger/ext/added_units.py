"""Quantity increases of a modification: the added units as a grant of their own on the modification date.

A modification row whose ``quantity`` is above the units outstanding immediately before adds
units.  They are measured at the modification-date fair value of the modified award and recognised
from the modification date to their vesting (IFRS 2 B43(b), from memory; under ASC 718-20-35-3 the
incremental cost is the fair value after of all units less the fair value before of the original
units = original units x (after - before) + added units x after: the same total).  The ledger keeps
a grant's units as granted on its grant date, so the added units are a grant synthesized from the
modification row (:class:`grantval.ledger.extensions.Contribution`):

- ``grant_id`` ``<grant_id>+<modification_date>`` (for example ``G1+2026-01-01``), the holder,
  group and award type of the grant, ``grant_date`` = the modification date, the exercise price and
  expiration date in force after the modification, valued with the row's ``assumption_set`` (or at
  ``fair_value_after`` per unit when the row gives outside values);
- its tranches vest on the vesting dates in force after the modification of the grant's tranches
  not vested by then, the added units split in proportion to their units outstanding (largest
  remainders to the latest tranches); on the modification date when every tranche has vested;
- a ``forfeit`` or ``cancel`` event of the grant with a blank quantity (every unit) dated after the
  modification applies to the added units too (the ledger adds the same event for them); events
  with a quantity name the grant they concern (the added units' grant by its id).

The units outstanding immediately before are counted here, before the ledger's own allocation of
the events, by the same allocation (:func:`grantval.ledger.events.apply_events`) on the grant's
tranches as granted (as the ledger's first allocation, which the modifications' ``adjust`` counts
from); ``adjust`` compares the two counts and reports a difference.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from grantval.errors import Problem


def child_id(grant_id, day) -> str:
    """Id of the grant holding the units a modification on ``day`` adds to ``grant_id``."""
    return f"{grant_id}+{np.datetime64(day, 'D')}"


def _outstanding_before(tables: dict, sources: dict, g: pd.DataFrame, mods: pd.DataFrame):
    """Per modification row (all rows): units of its grant outstanding immediately before (NaN if unknown)."""
    from grantval.ledger.events import apply_events
    from grantval.ledger.ext._cumulative import sum_through
    from grantval.ledger.ext.modifications import grant_positions, terms
    from grantval.ledger.load import _tranches

    out = np.full(len(mods), np.nan)
    gp = grant_positions(g, mods)
    parents = np.unique(gp[(gp >= 0) & mods["quantity"].notna().to_numpy()])
    if not len(parents):
        return out
    sub = g.iloc[parents].reset_index(drop=True)
    ok, tr, _ = _tranches(sub, tables["tranches"], sources["tranches"])
    tr = tr[ok[tr["grant_idx"].to_numpy()]].reset_index(drop=True)
    m_sub = mods[mods["grant_id"].isin(set(sub["grant_id"])).to_numpy()]
    t = terms(sub, m_sub)
    if not len(t.gp):
        return out
    in_force, g_force = tr, sub  # the first allocation, under the terms as granted (as the ledger's adjust)
    ev = tables["events"]
    index = {k: i for i, k in enumerate(sub["grant_id"])}
    epos = np.array([index.get(k, -1) for k in ev["grant_id"]], dtype=np.int64)
    valid = epos >= 0
    valid[valid] = ok[epos[valid]]
    changes, _ = apply_events(g_force, in_force, ev, np.where(valid, epos, -1), sources["events"])
    granted = np.bincount(in_force["grant_idx"].to_numpy(), weights=in_force["quantity"].to_numpy(float),
                          minlength=len(sub))
    live = granted[t.gp].copy()
    if len(changes):
        c_grant = in_force["grant_idx"].to_numpy()[changes["tranche_idx"].to_numpy()]
        live -= sum_through(c_grant, changes["date"].to_numpy("datetime64[D]"), changes["quantity"].to_numpy(float),
                            t.gp, t.date)
    # earlier reductions of a grant's quantity leave fewer units for its later modifications
    q = m_sub["quantity"].to_numpy(float)[t.order]
    cut = np.zeros(len(t.gp))
    for i in range(len(t.gp)):
        if t.rank[i] > 0:
            cut[i] = cut[i - 1]
        live[i] -= cut[i]
        if not np.isnan(q[i]) and q[i] < live[i]:
            cut[i] += live[i] - q[i]
    rows = np.flatnonzero(np.isin(mods.index.to_numpy(), m_sub.index.to_numpy()))
    out[rows[t.order]] = live
    return out


def _split(added: int, weights: np.ndarray) -> np.ndarray:
    """Whole units per tranche in proportion to ``weights``, largest remainders first (later tranches on ties)."""
    return _split_groups(np.array([added]), np.zeros(len(weights), np.int64), np.asarray(weights, float))


def _split_groups(added: np.ndarray, group: np.ndarray, weights: np.ndarray) -> np.ndarray:
    """``added[g]`` whole units over the rows of each group ``g`` in proportion to ``weights`` (rows by group).

    Largest remainders take the units left; on equal remainders the later row first.
    """
    total = np.bincount(group, weights=weights, minlength=len(added))
    exact = added[group] * weights / total[group]
    whole = np.floor(exact + 1e-9).astype(np.int64)
    left = added - np.bincount(group, weights=whole, minlength=len(added)).astype(np.int64)
    order = np.lexsort((-np.arange(len(exact)), -(exact - whole), group))
    first = np.searchsorted(group[order], np.arange(len(added)))
    rank = np.arange(len(order)) - first[group[order]]
    whole[order[rank < left[group[order]]]] += 1
    return whole


def contribute(tables: dict, sources: dict):
    """The grants of the units added by quantity increases (see the module docstring)."""
    from grantval.ledger.extensions import Contribution
    from grantval.ledger.validate import fill_grant_defaults

    mods = tables["modifications"]
    empty = Contribution(pd.DataFrame(), pd.DataFrame({"grant": [], "vest_date": [], "quantity": []}),
                         pd.DataFrame(), [])
    if not len(mods) or not mods["quantity"].notna().any():
        return empty
    g = fill_grant_defaults(tables["grants"])
    live = _outstanding_before(tables, sources, g, mods)
    q = mods["quantity"].to_numpy(float)
    names = set(tables["assumptions"]["assumption_set"].dropna())
    valued = mods["assumption_set"].isin(names).to_numpy() | mods["fair_value_after"].notna().to_numpy()
    kinds = dict(zip(g["grant_id"].to_numpy(dtype=object), g["award_type"].to_numpy(dtype=object)))
    valued &= np.array([kinds.get(k) in ("option", "rsu") for k in mods["grant_id"]], dtype=bool)  # others refused
    # rows without valuation inputs get no grant: their own checks say what is missing
    up = np.flatnonzero(~np.isnan(q) & ~np.isnan(live) & (q > live) & (live > 0) & valued)
    if not len(up):
        return empty
    return _children(tables, sources, g, mods, up, (q[up] - live[up]).astype(np.int64))


def _children(tables, sources, g, mods, up, added):
    """Grants, tranches and assumption rows of the added units of modification rows ``up`` (vectorised)."""
    from grantval.ledger.extensions import Contribution
    from grantval.ledger.ext.modifications import grant_positions, terms, vesting
    from grantval.ledger.load import _tranches

    t = terms(g, mods)
    pos = np.empty(len(mods), dtype=np.int64)
    pos[t.order] = np.arange(len(t.order))
    sub = np.flatnonzero(g["grant_id"].isin(set(mods["grant_id"].iloc[up])).to_numpy())
    ok, tr, _ = _tranches(g.iloc[sub].reset_index(drop=True), tables["tranches"], sources["tranches"])
    tr = tr[ok[tr["grant_idx"].to_numpy()]].reset_index(drop=True)
    tr["grant_idx"] = sub[tr["grant_idx"].to_numpy()]
    vs = vesting(g, tr, mods, t)
    i, d = pos[up], t.date[pos[up]]
    child_of = np.full(len(t.gp), -1, dtype=np.int64)
    child_of[i] = np.arange(len(up))
    c = child_of[vs.p_mod]
    take = (c >= 0) & (vs.vest_after > t.date[vs.p_mod])
    has = np.bincount(c[take], minlength=len(up)) > 0
    group = c[take]
    weights = np.maximum(tr["quantity"].to_numpy(float)[vs.p_tranche[take]], 1.0)
    qty = _split_groups(added, group, weights) if take.any() else np.zeros(0, np.int64)
    tranches = pd.DataFrame({"grant": np.r_[group, np.flatnonzero(~has)],
                             "vest_date": np.r_[vs.vest_after[take], d[~has]].astype("datetime64[D]"),
                             "quantity": np.r_[qty, added[~has]].astype(np.int64)})
    tranches = tranches[tranches["quantity"] > 0].sort_values(["grant", "vest_date"], kind="stable")
    parent = grant_positions(g, mods)[up]
    col = lambda name: g[name].to_numpy(dtype=object)[parent]  # noqa: E731
    grants = pd.DataFrame({
        "grant_id": [child_id(k, x) for k, x in zip(col("grant_id"), d)], "holder_id": col("holder_id"),
        "group": col("group"), "award_type": col("award_type"), "grant_date": d, "quantity": added.astype(float),
        "exercise_price": t.strike_after[i], "expiration_date": t.expiry_after[i], "vest_start_date": d,
        "vest_months": 0.0, "vest_every_months": 1.0, "cliff_months": 0.0, "assumption_set": None,
        "_row": mods["_row"].to_numpy()[up].astype(np.int64), "_source": sources["modifications"], "planned": False,
        "assumption_row": np.arange(len(up)), "_added_to": col("grant_id"), "_added_on": d})
    return Contribution(grants, tranches.reset_index(drop=True), _assumption_rows(tables["assumptions"],
                                                                                 mods.iloc[up], d), [])


def _assumption_rows(a: pd.DataFrame, mods: pd.DataFrame, day: np.ndarray) -> pd.DataFrame:
    """The valuation inputs of the added units: each row's assumption set, or its outside value after."""
    first = {}
    for j, k in enumerate(a["assumption_set"].to_numpy(dtype=object)):
        if k is not None and k not in first:
            first[k] = j
    names = mods["assumption_set"].to_numpy(dtype=object)
    at = np.array([first.get(k, -1) if pd.notna(k) else -1 for k in names], dtype=np.int64)
    outside = at < 0
    inside = a.iloc[at[~outside]].set_axis(np.flatnonzero(~outside))
    blank = a.iloc[:0].reindex(range(int(outside.sum()))).set_axis(np.flatnonzero(outside))
    blank["fair_value"] = mods["fair_value_after"].to_numpy(float)[outside]
    blank["model"] = "bsm"
    rows = pd.concat([x for x in (inside, blank) if len(x)] or [blank]).sort_index().reset_index(drop=True)
    rows["assumption_set"] = None
    rows["grant_date"] = np.asarray(day, dtype="datetime64[D]")
    return rows


def mirrored_events(grants: pd.DataFrame, events: pd.DataFrame, source: str) -> pd.DataFrame:
    """Blank-quantity ``forfeit`` and ``cancel`` events of a grant after an increase, for its added units."""
    if "_added_to" not in grants:
        return events.iloc[:0]
    kids = grants[grants["_added_to"].notna()]
    if not len(kids) or not len(events):
        return events.iloc[:0]
    out = []
    every = events["quantity"].isna().to_numpy() & events["event_type"].isin(("forfeit", "cancel")).to_numpy()
    for kid, parent, day in zip(kids["grant_id"], kids["_added_to"], kids["_added_on"].to_numpy("datetime64[D]")):
        hit = every & (events["grant_id"].to_numpy(dtype=object) == parent) & (
            events["event_date"].to_numpy("datetime64[D]") > day)
        if hit.any():
            out.append(events[hit].assign(grant_id=kid))
    return pd.concat(out, ignore_index=True) if out else events.iloc[:0]


def problems_of_children(grants: pd.DataFrame, live_real: dict, src: str) -> list[Problem]:
    """The count of units outstanding made before allocation against the ledger's own (should agree)."""
    p = []
    for (kid, row), (expected, got) in live_real.items():
        if expected != got:
            p.append(Problem(src, int(row), "quantity", f"{got:g} units were added as grant {kid}, but the ledger "
                             f"counts {expected:g} added units after allocating the events: report this"))
    return p
