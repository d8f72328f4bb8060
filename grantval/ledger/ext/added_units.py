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
    m_sub = mods[np.isin(mods["grant_id"].to_numpy(dtype=object), sub["grant_id"].to_numpy(dtype=object))]
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
    exact = added * weights / weights.sum()
    whole = np.floor(exact).astype(np.int64)
    left = added - int(whole.sum())
    order = np.lexsort((-np.arange(len(exact)), -(exact - whole)))
    whole[order[:left]] += 1
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
    up = np.flatnonzero(~np.isnan(q) & ~np.isnan(live) & (q > live) & (live > 0))
    if not len(up):
        return empty
    return _children(tables, sources, g, mods, up, (q[up] - live[up]).astype(np.int64))


def _children(tables, sources, g, mods, up, added):
    """Grants, tranches and assumption rows of the added units of modification rows ``up``."""
    from grantval.ledger.extensions import Contribution
    from grantval.ledger.ext.modifications import grant_positions, terms, vesting
    from grantval.ledger.load import _tranches

    t = terms(g, mods)
    pos = np.empty(len(mods), dtype=np.int64)
    pos[t.order] = np.arange(len(t.order))
    ok, tr, _ = _tranches(g, tables["tranches"], sources["tranches"])
    vs = vesting(g, tr, mods, t)
    gp = grant_positions(g, mods)
    a = tables["assumptions"]
    rows, tranches, assumptions, problems = [], [], [], []
    for n, (r, k) in enumerate(zip(up, added)):
        i = pos[r]
        d = t.date[i]
        pair = vs.p_mod == i
        unvested = pair & (vs.vest_after > d)
        if unvested.any():
            w = np.maximum(tr["quantity"].to_numpy(float)[vs.p_tranche[unvested]], 1.0)
            qty, dates = _split(int(k), w), vs.vest_after[unvested]
        else:
            qty, dates = np.array([k], dtype=np.int64), np.array([d], dtype="datetime64[D]")
        tranches.append(pd.DataFrame({"grant": n, "vest_date": dates[qty > 0], "quantity": qty[qty > 0]}))
        assumptions.append(_assumption_row(a, mods.iloc[r], d))
        parent = g.iloc[gp[r]]
        rows.append({
            "grant_id": child_id(parent["grant_id"], d), "holder_id": parent["holder_id"], "group": parent["group"],
            "award_type": parent["award_type"], "grant_date": d, "quantity": float(k),
            "exercise_price": t.strike_after[i], "expiration_date": t.expiry_after[i], "vest_start_date": d,
            "vest_months": 0.0, "vest_every_months": 1.0, "cliff_months": 0.0, "assumption_set": None,
            "_row": int(mods["_row"].iat[r]), "_source": sources["modifications"], "planned": False,
            "assumption_row": n, "_added_to": parent["grant_id"], "_added_on": d})
    grants = pd.DataFrame(rows)
    grants["grant_date"] = grants["grant_date"].to_numpy("datetime64[D]")
    grants["expiration_date"] = grants["expiration_date"].to_numpy("datetime64[D]")
    grants["vest_start_date"] = grants["vest_start_date"].to_numpy("datetime64[D]")
    grants["_added_on"] = grants["_added_on"].to_numpy("datetime64[D]")
    return Contribution(grants, pd.concat(tranches, ignore_index=True), pd.concat(assumptions, ignore_index=True),
                        problems)


def _assumption_row(a: pd.DataFrame, mod: pd.Series, day) -> pd.DataFrame:
    """The valuation inputs of the added units: the row's assumption set, or its outside value after."""
    if pd.notna(mod["assumption_set"]):
        hit = a[a["assumption_set"] == mod["assumption_set"]]
        if len(hit):
            row = hit.iloc[:1].copy()
            row["grant_date"] = np.datetime64(day, "D")
            return row.reset_index(drop=True)
    row = a.iloc[:0].reindex(range(1))
    row["assumption_set"] = None
    row["grant_date"] = np.datetime64(day, "D")
    row["fair_value"] = float(mod["fair_value_after"]) if pd.notna(mod["fair_value_after"]) else np.nan
    row["model"] = "bsm"
    return row


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
