"""The purchase-plan table: one row per ESPP enrollment and purchase date, and its worksheet.

Columns: the offering's terms, the shares of each purchase period at the start purchase price
(exact and whole, with what rounding down dropped), the grant-date fair value used for cost, what
happened by the ``through`` date (withdrawn, forfeited, cancelled, purchased, open) and the
purchases recorded (shares bought and price paid).
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from grantval.io.cells import col_letter
from grantval.io.xlsx.sheet import Formula, Sheet

COLUMNS = (
    "offering_id", "holder_id", "grant_id", "group", "start_date", "purchase_date", "discount", "lookback",
    "shares_basis", "start_purchase_price", "exact_shares", "shares", "shares_dropped_by_rounding",
    "fair_value_per_share", "grant_date_fair_value", "status", "shares_bought", "purchase_price")

FORMATS = {
    "discount": "0.00%", "start_purchase_price": "#,##0.0000", "exact_shares": "#,##0.000000",
    "shares": "#,##0", "shares_dropped_by_rounding": "0.000000", "fair_value_per_share": "#,##0.000000",
    "grant_date_fair_value": "#,##0.00", "shares_bought": "#,##0", "purchase_price": "#,##0.0000",
}


def _status(ledger, t_idx: np.ndarray, vest: np.ndarray, through) -> np.ndarray:
    """What happened to each purchase period by ``through``."""
    ch = ledger.changes
    status = np.where(vest <= through, "purchase date reached", "open").astype(object)
    if not len(ch):
        return status
    pos = {t: i for i, t in enumerate(t_idx)}
    ev = ledger.events
    kinds = ev["event_type"].to_numpy(object)
    into = ev["_replaced_by"].to_numpy(object) if "_replaced_by" in ev else np.full(len(ev), None, dtype=object)
    for t, e, d, k in zip(ch["tranche_idx"], ch["event_idx"], ch["date"].to_numpy("datetime64[D]"), ch["kind"]):
        if t in pos and d <= through:
            status[pos[t]] = ("withdrawn" if kinds[e] == "withdraw" else f"rolled over into {into[e]}"
                              if pd.notna(into[e]) else {"forfeit": "forfeited"}.get(k, "cancelled"))
    return status


def _purchases(ledger, gi: np.ndarray, vest: np.ndarray, through):
    """Shares bought and price paid recorded by ``purchase`` events, per row (NaN where none)."""
    ev = ledger.events
    bought, price = np.full(len(gi), np.nan), np.full(len(gi), np.nan)
    if not len(ev):
        return bought, price
    index = {k: i for i, k in enumerate(ledger.grants["grant_id"].to_numpy(dtype=object))}
    key = {(g, v): j for j, (g, v) in enumerate(zip(gi, vest))}
    m = (ev["event_type"] == "purchase").to_numpy()
    for k, d, q, p in zip(ev["grant_id"][m], ev["event_date"][m].to_numpy("datetime64[D]"),
                          ev["quantity"][m].to_numpy(float), ev["share_price"][m].to_numpy(float)):
        j = key.get((index.get(k, -1), d))
        if j is not None and d <= through:
            bought[j], price[j] = q, p
    return bought, price


def espp_table(ledger, fair_values, through) -> pd.DataFrame:
    """One row per ESPP enrollment and purchase date, status and purchases as of ``through``."""
    g, tr = ledger.grants, ledger.tranches
    through = np.datetime64(through, "D")
    if "_espp_offering" not in g.columns:
        return pd.DataFrame({c: [] for c in COLUMNS})
    is_espp = (g["award_type"] == "espp").to_numpy()
    t_all = tr["grant_idx"].to_numpy()
    t_idx = np.flatnonzero(is_espp[t_all])
    gi = t_all[t_idx]
    vest = tr["vest_date"].to_numpy("datetime64[D]")[t_idx]
    a = ledger.assumptions
    price = a["share_price"].to_numpy(float)[ledger.grant_assumption][gi]
    disc = g["_espp_discount"].to_numpy(float)[gi]
    exact = g["_espp_exact_shares"].to_numpy(float)[gi]
    shares = tr["quantity"].to_numpy(np.int64)[t_idx]
    fv = np.asarray(fair_values.tranche_value, float)[t_idx]
    bought, paid = _purchases(ledger, gi, vest, through)
    frame = pd.DataFrame({
        "offering_id": g["_espp_offering"].to_numpy(object)[gi], "holder_id": g["holder_id"].to_numpy(object)[gi],
        "grant_id": g["grant_id"].to_numpy(object)[gi], "group": g["group"].to_numpy(object)[gi],
        "start_date": g["grant_date"].to_numpy("datetime64[D]")[gi], "purchase_date": vest, "discount": disc,
        "lookback": np.where(g["_espp_lookback"].to_numpy(object)[gi].astype(bool), "yes", "no"),
        "shares_basis": g["_espp_basis"].to_numpy(object)[gi], "start_purchase_price": (1 - disc) * price,
        "exact_shares": exact, "shares": shares,
        "shares_dropped_by_rounding": np.maximum(exact - np.floor(np.round(exact, 9)), 0.0),
        "fair_value_per_share": fv, "grant_date_fair_value": fv * shares,
        "status": _status(ledger, t_idx, vest, through), "shares_bought": bought, "purchase_price": paid,
    })
    return frame[list(COLUMNS)]


#: sheet headers and widths: short enough that 18 columns print one page wide and legible, wide
#: enough that each header fits on one line (the writer does not grow the header row for wrapped text)
LABELS = {
    "offering_id": "Offering", "holder_id": "Holder", "start_date": "Start", "lookback": "Look-back",
    "shares_basis": "Basis", "start_purchase_price": "Start buy price", "shares_dropped_by_rounding": "Rounded off",
    "grant_date_fair_value": "Grant-date fair value", "shares_bought": "Bought", "purchase_price": "Price paid",
}
WIDTHS = {
    "offering_id": 14, "holder_id": 10, "grant_id": 20, "group": 12, "start_date": 11, "purchase_date": 14,
    "discount": 10, "lookback": 10, "shares_basis": 18, "start_purchase_price": 16, "exact_shares": 13,
    "shares": 9, "shares_dropped_by_rounding": 12, "fair_value_per_share": 21, "grant_date_fair_value": 22,
    "status": 21, "shares_bought": 9, "purchase_price": 11,
}
#: columns the sheet totals with live SUM formulas (they tie to the activity sheet and the fair values)
TOTALS = ("shares", "grant_date_fair_value", "shares_bought")


def espp_sheet(table: pd.DataFrame) -> Sheet:
    """The ``purchase_plans`` worksheet of :func:`espp_table`, with a ``Total`` row of SUM formulas.

    The totals (shares, grant-date fair value, shares bought) are worksheet formulas over the
    rows above; the table itself carries no total.
    """
    cols, n = list(table.columns), len(table)
    total = {c: None for c in cols}
    total[cols[0]] = "Total"
    for c in TOTALS:
        if c in cols:
            letter = col_letter(cols.index(c) + 1)
            total[c] = Formula(f"=SUM({letter}2:{letter}{n + 1})") if n else 0.0
    frame = pd.concat([table.astype(object), pd.DataFrame([total], dtype=object)], ignore_index=True)
    return Sheet("purchase_plans", frame=frame, formats=FORMATS, widths=WIDTHS, labels=LABELS,
                 text_columns=("offering_id", "holder_id", "grant_id", "group"))


def _flows(ledger, through_lo, through_hi):
    """Per ESPP tranche: shares withdrawn, rolled over and forfeited (or cancelled) with dates in [lo, hi]."""
    ch, tr = ledger.changes, ledger.tranches
    n = len(tr)
    if not len(ch):
        return np.zeros(n, np.int64), np.zeros(n, np.int64), np.zeros(n, np.int64)
    d = ch["date"].to_numpy("datetime64[D]")
    in_win = (d >= through_lo) & (d <= through_hi)
    ev = ledger.events
    e = ch["event_idx"].to_numpy()
    by_withdraw = ev["event_type"].to_numpy(object)[e] == "withdraw"
    by_rollover = pd.notna(ev["_replaced_by"].to_numpy(object)[e]) if "_replaced_by" in ev else np.zeros(len(e), bool)
    t, q = ch["tranche_idx"].to_numpy(), ch["quantity"].to_numpy(np.int64)

    def per_tranche(m):
        return np.bincount(t[in_win & m], weights=q[in_win & m], minlength=n).astype(np.int64)

    return per_tranche(by_withdraw), per_tranche(by_rollover), per_tranche(~by_withdraw & ~by_rollover)


def purchase_plan_activity(ledger, fair_values, start, through) -> tuple[pd.DataFrame, tuple[int, int]]:
    """Roll-forward of ESPP purchase rights (shares at the start purchase price) from ``start`` to ``through``.

    Lines: open at start, granted (enrolled), purchase date reached, withdrawn, rolled over into a new
    offering (a roll-over's replacement), forfeited or cancelled, open at end; then shares bought
    (``purchase`` events) and their weighted-average price.  Returns the table and the tie
    ``(start + granted - reached - withdrawn - rolled over - forfeited, end)``.
    """
    start, through = np.datetime64(start, "D"), np.datetime64(through, "D")
    g, tr = ledger.grants, ledger.tranches
    gi = tr["grant_idx"].to_numpy()
    espp = (g["award_type"] == "espp").to_numpy()[gi]
    qty = tr["quantity"].to_numpy(np.int64)
    vest = tr["vest_date"].to_numpy("datetime64[D]")
    gdate = g["grant_date"].to_numpy("datetime64[D]")[gi]
    early = np.datetime64("1900-01-01")
    before = start - np.timedelta64(1, "D")

    def open_at(d):
        w, r, f = _flows(ledger, early, d)
        return np.where((gdate <= d) & (vest > d), qty - w - r - f, 0)

    w_in, r_in, f_in = _flows(ledger, start, through)
    w_all, r_all, f_all = _flows(ledger, early, through)
    reached = np.where((vest >= start) & (vest <= through), qty - w_all - r_all - f_all, 0)
    granted = np.where((gdate >= start) & (gdate <= through), qty, 0)
    o0, o1 = open_at(before), open_at(through)
    lines = [("Open at start", o0), ("Granted (enrolled)", granted), ("Purchase date reached", reached),
             ("Withdrawn", w_in), ("Rolled over into a new offering", r_in), ("Forfeited or cancelled", f_in),
             ("Open at end", o1)]
    fv = np.asarray(fair_values.tranche_value, float)
    rows = [(name, float(np.sum(x[espp])), _wavg(fv[espp], x[espp])) for name, x in lines]
    ev = ledger.events
    m = ((ev["event_type"] == "purchase").to_numpy() & (ev["event_date"].to_numpy("datetime64[D]") >= start)
         & (ev["event_date"].to_numpy("datetime64[D]") <= through)) if len(ev) else np.zeros(0, bool)
    bought = ev["quantity"].to_numpy(float)[m] if len(ev) else np.zeros(0)
    paid = ev["share_price"].to_numpy(float)[m] if len(ev) else np.zeros(0)
    rows.append(("Shares bought (purchase events)", float(bought.sum()), float("nan")))
    rows.append(("Weighted-average purchase price", _wavg(paid, bought), float("nan")))
    frame = pd.DataFrame(rows, columns=["line", "number", "weighted_average_grant_date_fair_value"])
    tie = (int(np.sum((o0 + granted - reached - w_in - r_in - f_in)[espp])), int(np.sum(o1[espp])))
    return frame, tie


def _wavg(values, weights) -> float:
    w = np.asarray(weights, float)
    return float(np.sum(np.asarray(values, float) * w) / w.sum()) if w.sum() > 0 else float("nan")


def activity_sheet(frame: pd.DataFrame) -> Sheet:
    """The ``purchase_plan_activity`` worksheet of :func:`purchase_plan_activity`.

    One unit per column: the share counts in ``shares`` (whole numbers), the weighted-average
    purchase price in a column of its own on the shares-bought line (the table's last line).
    """
    counts = frame.iloc[:-1].reset_index(drop=True)
    price = float(frame["number"].iloc[-1])
    sheet = pd.DataFrame({
        "line": counts["line"], "shares": counts["number"],
        "weighted_average_grant_date_fair_value": counts["weighted_average_grant_date_fair_value"],
        "weighted_average_purchase_price": [np.nan] * (len(counts) - 1) + [price],
    })
    return Sheet("purchase_plan_activity", frame=sheet,
                 formats={"shares": "#,##0", "weighted_average_grant_date_fair_value": "#,##0.000000",
                          "weighted_average_purchase_price": "#,##0.0000"},
                 labels={"weighted_average_grant_date_fair_value": "Weighted-average fair value",
                         "weighted_average_purchase_price": "Weighted-average price paid"},
                 widths={"line": 36, "shares": 10, "weighted_average_grant_date_fair_value": 29,
                         "weighted_average_purchase_price": 29})


RESET_COLUMNS = ("offering_id", "reset_date", "purchase_date", "years_to_purchase", "reference_price_before",
                 "reference_price_after", "volatility", "risk_free_rate", "dividend_yield", "increment_per_share",
                 "shares", "incremental_cost")
RESET_FORMATS = {
    "years_to_purchase": "0.0000", "reference_price_before": "#,##0.0000", "reference_price_after": "#,##0.0000",
    "volatility": "0.00%", "risk_free_rate": "0.000%", "dividend_yield": "0.00%", "increment_per_share": "#,##0.000000",
    "shares": "#,##0", "incremental_cost": "#,##0.00",
}


def reset_table(inp) -> pd.DataFrame:
    """One row per purchase-plan reset and purchase date it reaches: prices, inputs, increment and shares.

    ``increment_per_share`` is the incremental value per share counted at the original start purchase
    price (:mod:`grantval.attribution.espp_resets`); ``incremental_cost`` = increment x shares outstanding
    on the reset date (before forfeiture estimates), currency.
    """
    rc = getattr(inp, "espp_resets", None)
    if rc is None:
        return pd.DataFrame(columns=list(RESET_COLUMNS))
    r = rc.table
    k = rc.reset_of_layer
    vest = np.asarray(inp.t_vest, "datetime64[D]")[rc.layers.tranche]
    rows = pd.DataFrame({"k": k, "purchase_date": vest, "increment_per_share": rc.layers.fair_value,
                         "shares": rc.units, "incremental_cost": rc.layers.fair_value * rc.units})
    out = rows.groupby(["k", "purchase_date"], sort=True).agg(
        increment_per_share=("increment_per_share", "first"), shares=("shares", "sum"),
        incremental_cost=("incremental_cost", "sum")).reset_index()
    kk = out["k"].to_numpy()
    out["offering_id"] = r["offering_id"].to_numpy(object)[kk]
    out["reset_date"] = r["reset_date"].to_numpy("datetime64[D]")[kk]
    out["years_to_purchase"] = (out["purchase_date"].to_numpy("datetime64[D]") - out["reset_date"].to_numpy(
        "datetime64[D]")).astype(np.int64) / 365.25
    out["reference_price_before"] = r["reference_before"].to_numpy(float)[kk]
    out["reference_price_after"] = r["share_price"].to_numpy(float)[kk]
    for c in ("volatility", "risk_free_rate", "dividend_yield"):
        out[c] = r[c].to_numpy(float)[kk]
    return out[list(RESET_COLUMNS)]


def reset_sheet(table: pd.DataFrame) -> Sheet:
    """The ``purchase_plan_resets`` worksheet, with a ``Total`` row of SUM formulas (shares, incremental cost)."""
    cols, n = list(table.columns), len(table)
    total = {c: None for c in cols}
    total[cols[0]] = "Total"
    for c in ("shares", "incremental_cost"):
        letter = col_letter(cols.index(c) + 1)
        total[c] = Formula(f"=SUM({letter}2:{letter}{n + 1})") if n else 0.0
    frame = pd.concat([table.astype(object), pd.DataFrame([total], dtype=object)], ignore_index=True)
    labels = {"reference_price_before": "Reference before", "reference_price_after": "Reference after",
              "increment_per_share": "Increment per share"}
    return Sheet("purchase_plan_resets", frame=frame, formats=RESET_FORMATS, labels=labels,
                 text_columns=("offering_id",), widths={"offering_id": 14})


def reset_disclosure(inp, ledger) -> pd.DataFrame:
    """Resets by date in the shape of the modifications disclosure: enrollments, holders, shares, cost."""
    cols = ["modification_date", "change", "grants", "holders_affected", "units_affected", "incremental_cost",
            "fair_value_measured"]
    rc = getattr(inp, "espp_resets", None)
    if rc is None:
        return pd.DataFrame(columns=cols)
    grant = np.asarray(inp.t_grant, np.int64)[rc.layers.tranche]
    rows = pd.DataFrame({
        "modification_date": rc.table["reset_date"].to_numpy("datetime64[D]")[rc.reset_of_layer],
        "change": "purchase-plan reset to a lower price",
        "grant_id": ledger.grants["grant_id"].to_numpy(object)[grant],
        "holder_id": ledger.grants["holder_id"].to_numpy(object)[grant],
        "units": rc.units, "cost": rc.layers.fair_value * rc.units})
    out = (rows.groupby(["modification_date", "change"], sort=True)
           .agg(grants=("grant_id", "nunique"), holders_affected=("holder_id", "nunique"),
                units_affected=("units", "sum"), incremental_cost=("cost", "sum")).reset_index())
    out["fair_value_measured"] = "computed: look-back components on the reset date's inputs"
    return out[cols]
