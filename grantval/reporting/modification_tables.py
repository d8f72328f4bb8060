"""Tables of the ledger's modifications: one row per modification (workbook) and a disclosure summary.

The disclosure follows ASC 718-10-50-2(h)(2) (from memory: a description of significant
modifications, their terms, the number of employees affected and the total incremental
compensation cost) and IFRS 2.47(c) (from memory: an explanation of the modifications, the
incremental fair value granted and how it was measured).
"""

from __future__ import annotations

import numpy as np
import pandas as pd

#: columns of :func:`modification_table`
COLUMNS = (
    "grant_id", "holder_id", "modification_date", "change", "exercise_price_before", "exercise_price_after",
    "expiration_date_before", "expiration_date_after", "vesting_before", "vesting_after", "last_vest_date_before",
    "last_vest_date_after", "units_before", "units_after", "units_added", "units_accelerated", "units_vesting_later",
    "fair_value_before", "fair_value_after", "fair_value_source", "treatment", "incremental_cost",
    "recognised_on_modification_date", "attributed_over_service", "attribution")


def _changes(t, i: int, agg: dict) -> str:
    """The changes of modification ``i`` in words."""
    words = []
    if not (np.isnan(t.strike_before[i]) and np.isnan(t.strike_after[i])) and t.strike_before[i] != t.strike_after[i]:
        words.append("repricing")
    no_expiry = np.isnat(t.expiry_before[i]) and np.isnat(t.expiry_after[i])  # units have no expiration
    if not no_expiry and t.expiry_before[i] != t.expiry_after[i]:
        words.append("extended expiration" if t.expiry_after[i] > t.expiry_before[i] else "shortened expiration")
    if t.accelerate[i] and agg["acc"][i] > 0:
        words.append("accelerated vesting")
    if t.reschedule is not None and t.reschedule[i]:
        moved = [w for w, n in (("earlier", agg["acc"][i]), ("later", agg["later_units"][i])) if n > 0]
        words.append("vesting schedule" + (f" ({' and '.join(moved)})" if moved else " (no tranche moved)"))
    if agg["ua"][i] < agg["ub"][i]:
        words.append("reduced quantity")
    if agg["added"][i] > 0:
        words.append("increased quantity")
    return ", ".join(words) or "no change of terms"


def _schedule_words(months: np.ndarray) -> list[str]:
    """Per modification: a schedule (rows of vest_months, vest_every_months, cliff_months) in words."""
    return [f"{int(m)} months, every {int(e)}, cliff {int(c)}" if not np.isnan([m, e, c]).any() else ""
            for m, e, c in months]


def _per_mod(report):
    """Per modification: sums and units-weighted means over its tranches."""
    v, c = report.values, report.costs
    n = len(v.terms.gp)
    s = lambda w: np.bincount(v.p_mod, weights=w, minlength=n)  # noqa: E731
    ub, ua = s(v.units_before), s(v.units_after)
    accelerated = s(np.where(v.vest_after < v.vest_before, v.units_after, 0.0))
    later_units = s(np.where(v.vest_after > v.vest_before, v.units_after, 0.0))
    zero = np.zeros(n)
    added = zero if getattr(report, "added_units", None) is None else report.added_units
    added_cost = zero if getattr(report, "added_cost", None) is None else report.added_cost
    added_now = zero if getattr(report, "added_at_once", None) is None else report.added_at_once
    wmean = lambda x: s(x * v.units_before) / np.where(ub > 0, ub, 1)  # noqa: E731
    at_once = v.vest_after <= v.terms.date[v.p_mod]
    return dict(ub=ub, ua=ua, acc=accelerated, later_units=later_units, added=added, fb=wmean(v.before),
                fa=wmean(v.after), inc=s(c.incremental) + added_cost,
                now=s(np.where(at_once, c.incremental, 0.0)) + added_now,
                later=s(np.where(at_once, 0.0, c.incremental)) + added_cost - added_now,
                last_vest=_max_by(v.p_mod, v.vest_after, n), last_before=_max_by(v.p_mod, v.vest_before, n))


def _max_by(p, dates, n):
    out = np.full(n, np.datetime64("NaT"), dtype="datetime64[D]")
    for i, d in zip(p, dates):
        if np.isnat(out[i]) or d > out[i]:
            out[i] = d
    return out


def _treatments(report) -> list[str]:
    v, c = report.values, report.costs
    out = [[] for _ in range(len(v.terms.gp))]
    for i, lab in zip(v.p_mod, c.treatment):  # clauses of the tranches' labels, each once, in order
        for clause in str(lab).split("; "):
            if clause not in out[i]:
                out[i].append(clause)
    return ["; ".join(x) for x in out]


def modification_table(report, ledger, attribution: str = "graded") -> pd.DataFrame:
    """One row per modification: dates, terms before and after, both fair values, incremental cost.

    Money columns are currency (``incremental_cost`` = incremental value per unit x original units
    outstanding after the modification, plus the grant-date value of the units a quantity increase adds
    (``units_added``, a grant of their own); the part for tranches vested by then is recognised on the modification
    date, the rest over the remaining service to each tranche's vesting date, or to the award's last
    vesting date under straight-line ``attribution``).
    """
    if report is None or report.values is None:
        return pd.DataFrame(columns=list(COLUMNS))
    v, t = report.values, report.values.terms
    g = ledger.grants
    agg = _per_mod(report)
    d = t.date
    words = [_changes(t, i, agg) for i in range(len(d))]
    span = "the award's last vesting date" if attribution == "straight-line" else "each tranche's vesting date"
    how = [("on the modification date" if agg["later"][i] == 0 else
            f"{agg['now'][i]:,.2f} on the modification date, the rest from {d[i]} to {span} "
            f"(last {agg['last_vest'][i]})")
           for i in range(len(d))]
    frame = pd.DataFrame({
        "grant_id": g["grant_id"].to_numpy()[t.gp], "holder_id": g["holder_id"].to_numpy()[t.gp],
        "modification_date": d, "change": words,
        "exercise_price_before": t.strike_before, "exercise_price_after": t.strike_after,
        "expiration_date_before": t.expiry_before, "expiration_date_after": t.expiry_after,
        "vesting_before": _schedule_words(t.schedule_before), "vesting_after": _schedule_words(t.schedule_after),
        "last_vest_date_before": agg["last_before"], "last_vest_date_after": agg["last_vest"],
        "units_before": agg["ub"].astype(np.int64), "units_after": (agg["ua"] + agg["added"]).astype(np.int64),
        "units_added": agg["added"].astype(np.int64), "units_accelerated": agg["acc"].astype(np.int64),
        "units_vesting_later": agg["later_units"].astype(np.int64), "fair_value_before": agg["fb"],
        "fair_value_after": agg["fa"], "fair_value_source": v.source, "treatment": _treatments(report),
        "incremental_cost": agg["inc"], "recognised_on_modification_date": agg["now"],
        "attributed_over_service": agg["later"], "attribution": how,
    })
    return frame[list(COLUMNS)]


#: columns of :func:`replacement_table`
REPLACEMENT_COLUMNS = (
    "grant_id", "replaces_grant_id", "holder_id", "replacement_date", "units_cancelled",
    "fair_value_cancelled_per_unit", "value_cancelled", "units_granted", "replacement_fair_value",
    "incremental_cost", "attribution")


def replacement_table(report, ledger) -> pd.DataFrame:
    """One row per cancellation with replacement: both fair values on the replacement date and the increment.

    ``value_cancelled`` is the cancelled grant's fair value immediately before (units outstanding x value
    per unit); ``replacement_fair_value`` the replacement's grant-date fair value (units granted x value
    per unit); ``incremental_cost`` the excess, never below zero.
    """
    rc = None if report is None else report.replacements
    if rc is None:
        return pd.DataFrame(columns=list(REPLACEMENT_COLUMNS))
    rv, g = rc.values, ledger.grants
    qty = g["quantity"].to_numpy(np.int64)[rv.new]
    frame = pd.DataFrame({
        "grant_id": g["grant_id"].to_numpy()[rv.new], "replaces_grant_id": g["grant_id"].to_numpy()[rv.old],
        "holder_id": g["holder_id"].to_numpy()[rv.new], "replacement_date": rv.date,
        "units_cancelled": rv.units.astype(np.int64), "fair_value_cancelled_per_unit": rv.per_unit_before,
        "value_cancelled": rv.value_before, "units_granted": qty, "replacement_fair_value": rc.replacement_value,
        "incremental_cost": rc.incremental,
        "attribution": "incremental over the replacement's service from its grant date; the cancelled grant's "
                       "cost continues on its original schedule",
    })
    return frame[list(REPLACEMENT_COLUMNS)]


def disclosure_table(report, ledger) -> pd.DataFrame:
    """Modifications by date and change: grants and holders affected, units, total incremental cost."""
    cols = ["modification_date", "change", "grants", "holders_affected", "units_affected", "incremental_cost",
            "fair_value_measured"]
    table = modification_table(report, ledger)
    rep = replacement_table(report, ledger)
    if len(rep):
        rows = pd.DataFrame({"grant_id": rep["replaces_grant_id"], "holder_id": rep["holder_id"],
                             "modification_date": rep["replacement_date"], "change": "cancellation with replacement",
                             "units_after": rep["units_granted"], "incremental_cost": rep["incremental_cost"],
                             "fair_value_source": "computed: cancelled grant on the replacement's assumptions"})
        table = pd.concat([table[rows.columns], rows], ignore_index=True) if len(table) else rows
    if not len(table):
        return pd.DataFrame(columns=cols)
    out = (table.groupby(["modification_date", "change"], sort=True)
           .agg(grants=("grant_id", "nunique"), holders_affected=("holder_id", "nunique"),
                units_affected=("units_after", "sum"), incremental_cost=("incremental_cost", "sum"),
                fair_value_measured=("fair_value_source", lambda s: ", ".join(sorted(set(s)))))
           .reset_index())
    return out[cols]


def modification_sheets(report, ledger, attribution: str = "graded") -> list:
    """Workbook sheets ``modifications`` and ``modification_disclosure`` (and ``replacements`` when any).

    Empty list when the ledger has no modification or replacement.
    """
    from grantval.io.xlsx.sheet import Sheet
    from grantval.reporting.formats import MONEY, UNIT

    if report is None:
        return []
    day, price = "yyyy-mm-dd", "#,##0.00"
    fmt = {"modification_date": day, "expiration_date_before": day, "expiration_date_after": day,
           "last_vest_date_before": day, "last_vest_date_after": day, "units_added": "#,##0",
           "units_vesting_later": "#,##0",
           "replacement_date": day, "exercise_price_before": price, "exercise_price_after": price,
           "fair_value_before": UNIT, "fair_value_after": UNIT, "fair_value_cancelled_per_unit": UNIT,
           "incremental_cost": MONEY, "recognised_on_modification_date": MONEY, "attributed_over_service": MONEY,
           "value_cancelled": MONEY, "replacement_fair_value": MONEY, "units_before": "#,##0",
           "units_after": "#,##0", "units_accelerated": "#,##0", "units_affected": "#,##0"}
    text = ("grant_id", "holder_id", "replaces_grant_id")
    sheets = []
    mods = modification_table(report, ledger, attribution)
    if len(mods):
        sheets.append(Sheet("modifications", frame=mods, formats=fmt, text_columns=text,
                            widths={"change": 30, "vesting_before": 26, "vesting_after": 26, "treatment": 60,
                                    "attribution": 70, "fair_value_source": 30},
                            wrap_text_columns=("change", "vesting_before", "vesting_after", "treatment",
                                               "attribution", "fair_value_source")))
    rep = replacement_table(report, ledger)
    if len(rep):
        sheets.append(Sheet("replacements", frame=rep, formats=fmt, text_columns=text, widths={"attribution": 70},
                            wrap_text_columns=("attribution",)))
    sheets.append(Sheet("modification_disclosure", frame=disclosure_table(report, ledger), formats=fmt,
                        widths={"change": 30, "fair_value_measured": 40}))
    return sheets
