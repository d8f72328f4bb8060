"""Purchase-plan resets as cost layers: the incremental value of looking back to a lower price.

A reset (ledger table ``espp_resets``, :mod:`grantval.ledger.ext.espp`) lowers the reference price
of an offering's look-back from the reset date on.  It changes the terms of every purchase right
not yet reached, so it is a modification (ASC 718-20-35-3; IFRS 2.27, B43(a)): each such purchase
period of each enrollment still in the offering takes a cost layer worth the incremental value per
share (:func:`grantval.pricing.espp_reset_increment`, on the reset date's inputs), served from the
reset date to its purchase date; the grant-date cost continues unchanged.  An enrollment withdrawn
or forfeited on or before the reset date takes nothing.  A later reset of the same offering is
measured from the reference price the earlier one set.

Per share counted: the increment is per share the period's withholding buys at the original
start purchase price ``(1 - d) S_0`` (the tranche's quantity).  Under fixed withholding a reset
from a reference price ``K`` (an earlier reset's) is ``S_0 / K`` times the function's value per
share at ``(1 - d) K``.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from grantval.attribution.layers import CostLayers
from grantval.dates import year_fraction


@dataclass
class ResetCosts:
    """Per reset row (in the order of ``table``) and per layer: what the reports show."""

    table: pd.DataFrame        # the espp_resets rows, sorted by offering and date, with reference_before
    layers: CostLayers         # one per purchase period reset
    reset_of_layer: np.ndarray  # per layer: position in ``table``
    units: np.ndarray          # per layer: shares outstanding on the reset date
    incremental: np.ndarray    # per reset row: incremental value x shares outstanding, currency


def _sorted_resets(ledger) -> pd.DataFrame | None:
    r = ledger.tables.get("espp_resets")
    if r is None or not len(r):
        return None
    r = r.sort_values(["offering_id", "reset_date"], kind="stable").reset_index(drop=True)
    o = ledger.tables["espp_offerings"].set_index("offering_id")
    start_price = o["share_price"].reindex(r["offering_id"]).to_numpy(float)
    before = r.groupby("offering_id")["share_price"].shift(1).to_numpy(float)
    r["start_price"] = start_price
    r["reference_before"] = np.where(np.isnan(before), start_price, before)
    r["discount"] = o["discount"].reindex(r["offering_id"]).to_numpy(float)
    r["shares_basis"] = o["shares_basis"].reindex(r["offering_id"]).to_numpy(object)
    return r


def _outstanding_on(inp, tranches: np.ndarray, day: np.datetime64) -> np.ndarray:
    """Shares of each tranche not forfeited or cancelled on or before ``day`` (0 once withdrawn)."""
    c_date = np.asarray(inp.c_date, "datetime64[D]")
    gone = np.isin(inp.c_kind, ("forfeit", "cancel")) & (c_date <= day)
    lost = np.bincount(inp.c_tranche[gone], weights=inp.c_qty[gone], minlength=len(inp.t_qty))
    cancelled = np.zeros(len(inp.t_qty), dtype=bool)
    cancelled[inp.c_tranche[(inp.c_kind == "cancel") & (c_date <= day)]] = True
    return np.where(cancelled[tranches], 0.0, np.maximum(inp.t_qty[tranches] - lost[tranches], 0.0))


def reset_layers(ledger, inp) -> ResetCosts | None:
    """Cost layers of every reset of the ledger (None without resets)."""
    from grantval.pricing import espp_reset_increment

    r = _sorted_resets(ledger)
    if r is None:
        return None
    offering = ledger.grants["_espp_offering"].to_numpy(object)[inp.t_grant]
    vest = np.asarray(inp.t_vest, "datetime64[D]")
    rank = r.groupby("offering_id").cumcount().to_numpy()
    parts = {k: [] for k in ("tranche", "value", "start", "set", "reset", "units")}
    incremental = np.zeros(len(r))
    for k in range(len(r)):
        day = np.datetime64(r["reset_date"].iat[k], "D")
        tr = np.flatnonzero((offering == r["offering_id"].iat[k]) & (vest > day))
        units = _outstanding_on(inp, tr, day)
        tr, units = tr[units > 0], units[units > 0]
        s0, ref = r["start_price"].iat[k], r["reference_before"].iat[k]
        basis = r["shares_basis"].iat[k]
        inc = np.atleast_1d(espp_reset_increment(
            r["share_price"].iat[k], ref, year_fraction(np.full(len(tr), day), vest[tr]), r["risk_free_rate"].iat[k],
            r["volatility"].iat[k], r["dividend_yield"].iat[k], r["discount"].iat[k], basis))
        if basis == "fixed_withholding":
            inc = inc * (s0 / ref)
        incremental[k] = float(np.sum(inc * units))
        for name, v in (("tranche", tr), ("value", inc), ("start", np.full(len(tr), day)),
                        ("set", np.full(len(tr), 1 + rank[k])), ("reset", np.full(len(tr), k)), ("units", units)):
            parts[name].append(v)
    cat = {n: np.concatenate(v) if v else np.zeros(0) for n, v in parts.items()}
    layers = CostLayers(tranche=cat["tranche"].astype(np.int64), fair_value=cat["value"].astype(float),
                        start=cat["start"].astype("datetime64[D]"), set_id=cat["set"].astype(np.int64),
                        kind=np.full(len(cat["tranche"]), "modification", dtype=object))
    return ResetCosts(r, layers, cat["reset"].astype(np.int64), cat["units"].astype(float), incremental)
