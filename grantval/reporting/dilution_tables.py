"""Tables, checks and workbook of a dilution run (treasury stock method)."""

from __future__ import annotations

import pathlib

import numpy as np
import pandas as pd

from grantval.io.cells import col_letter
from grantval.io.xlsx.sheet import Formula, Sheet
from grantval.reporting.checks import CheckRow, checks_sheet

SHARES = "#,##0.00"
FORMATS = {"weighted_units": SHARES, "incremental_shares": SHARES, "antidilutive_options": SHARES,
           "recomputed_incremental_shares": SHARES, "exercise_price": "#,##0.00", "average_share_price": "#,##0.00",
           "unrecognised_per_unit_start": "#,##0.0000", "unrecognised_per_unit_end": "#,##0.0000",
           "average_unrecognised_per_unit": "#,##0.0000", "assumed_proceeds_per_unit": "#,##0.0000",
           "weighted_units_outstanding": SHARES, "contingent_payout": "0.0000"}


def dilution_totals(run) -> pd.DataFrame:
    """``dilution.csv``: period_end, incremental_shares, antidilutive_options (units left out as
    anti-dilutive, time-weighted), then period_start and average_share_price."""
    g = run.grants
    return pd.DataFrame({
        "period_end": run.ends,
        "incremental_shares": g.incremental.sum(axis=0),
        "antidilutive_options": np.where(g.antidilutive, g.weighted_units, 0.0).sum(axis=0),
        "period_start": run.starts,
        "average_share_price": run.average_price,
    })


def _basis(run, n: int, p: int) -> np.ndarray:
    """Per grant x period: the ``contingent_basis`` text."""
    from grantval.attribution import dilution as D

    award = run.ledger.grants["award_type"].to_numpy(dtype=object)
    psu = np.zeros(n, dtype=bool) if run.grants.contingent is None else run.grants.contingent
    text = np.where(np.isin(award, list(D.CONTINGENT_FRACTION)), D.HOOKED, D.NOT_CONTINGENT)
    text = np.where(psu, D.PAYOUT_IN_FORCE, text)
    text = np.where(D.market_condition_grants(run.ledger), D.MARKET_CONDITION, text)
    return np.repeat(text.astype(object), p)


def dilution_by_grant(run) -> pd.DataFrame:
    """``dilution_by_grant.csv``: one row per grant and period in which it had units outstanding.

    ``weighted_units`` are the units counted (performance units: contingently issuable shares);
    ``weighted_units_outstanding`` the units outstanding before the contingency (target units),
    ``contingent_payout`` the shares counted per unit outstanding (1 when not contingent) and
    ``contingent_assessed_on`` the date of the ``performance`` row whose payout was used.
    """
    g, inp = run.grants, run.inputs
    n, p = g.weighted_units.shape
    outstanding = g.weighted_units if g.weighted_outstanding is None else g.weighted_outstanding
    keep = (outstanding > 0).ravel()
    rep = lambda a: np.repeat(np.asarray(a), p)[keep]
    flat = lambda a: np.asarray(a).ravel()[keep]
    payout = np.ones((n, p)) if g.contingent_payout is None else g.contingent_payout
    assessed = np.full((n, p), np.datetime64("NaT", "D")) if g.contingent_assessed is None else g.contingent_assessed
    return pd.DataFrame({
        "grant_id": rep(inp.grant_id), "group": rep(inp.group),
        "award_type": rep(run.ledger.grants["award_type"].to_numpy(dtype=object)),
        "period_end": np.tile(run.ends, n)[keep],
        "weighted_units": flat(g.weighted_units), "exercise_price": flat(g.exercise_price) if np.ndim(g.exercise_price) == 2 else rep(g.exercise_price),
        "unrecognised_per_unit_start": np.nan_to_num(flat(g.unrecognised_start)),
        "unrecognised_per_unit_end": np.nan_to_num(flat(g.unrecognised_end)),
        "average_unrecognised_per_unit": flat(g.unrecognised_average),
        "assumed_proceeds_per_unit": flat(g.proceeds),
        "average_share_price": np.tile(run.average_price, n)[keep],
        "incremental_shares": flat(g.incremental), "antidilutive": flat(g.antidilutive),
        "weighted_units_outstanding": flat(outstanding), "contingent_payout": flat(payout),
        "contingent_assessed_on": flat(assessed), "contingent_basis": _basis(run, n, p)[keep],
    })


def recomputed_incremental(by_grant: pd.DataFrame) -> float:
    """Total incremental shares recomputed row by row from the by-grant table (a second computation)."""
    total = 0.0
    for q, proceeds, price in zip(by_grant["weighted_units"], by_grant["assumed_proceeds_per_unit"],
                                  by_grant["average_share_price"]):
        if proceeds < price:
            total += q * (price - proceeds) / price
    return total


def _overlap(day: np.ndarray, start: int, end: int) -> np.ndarray:
    """Days of [start, end] on or after ``day`` (day numbers)."""
    return np.maximum(end - np.maximum(day, start) + 1, 0)


def _in_force(perf: pd.DataFrame, sets: pd.Series, when: np.ndarray) -> pd.DataFrame:
    """The ``performance`` row of each condition set with the latest ``assessed_on`` on or before ``when``."""
    left = pd.DataFrame({"condition_set": sets.to_numpy(dtype=object), "when": pd.to_datetime(when),
                         "_i": np.arange(len(when))}).sort_values("when")
    got = pd.merge_asof(left, perf, left_on="when", right_on="assessed_on", by="condition_set")
    return got.sort_values("_i").reset_index(drop=True)


def recomputed_contingent_shares(run) -> float:
    """Time-weighted contingently issuable shares of the psu grants, all periods, recomputed from the
    ledger's tranches, changes and ``performance`` table (pandas ``merge_asof``; a second computation).

    Per tranche and period: (quantity from the grant date - each change from its date - what is left
    from the vesting date in force) x days overlapping the period / days, times the payout of the row
    in force on the earlier of the period end and that vesting date.
    """
    from grantval.attribution.dilution import performance_units

    led = run.ledger
    psu = performance_units(led)
    tr = led.tranches[psu[led.tranches["grant_idx"].to_numpy()]]
    if not len(tr):
        return 0.0
    perf = led.tables["performance"][["condition_set", "assessed_on", "payout", "expected_vest_date"]].copy()
    perf["assessed_on"] = pd.to_datetime(perf["assessed_on"])
    perf = perf.sort_values("assessed_on")
    gi = tr["grant_idx"].to_numpy()
    sets = led.grants["condition_set"].iloc[gi].reset_index(drop=True)
    day = lambda a: pd.to_datetime(pd.Series(a)).to_numpy("datetime64[D]").astype(np.int64)  # noqa: E731
    gdate = day(led.grants["grant_date"].iloc[gi])
    ch = led.changes[led.changes["tranche_idx"].isin(tr.index)]
    pos = {t: i for i, t in enumerate(tr.index)}
    c_pos = np.array([pos[t] for t in ch["tranche_idx"]], dtype=np.int64)
    c_day, c_qty = day(ch["date"]), ch["quantity"].to_numpy(float)
    qty = tr["quantity"].to_numpy(float)
    left = qty - np.bincount(c_pos, weights=c_qty, minlength=len(tr))
    total = 0.0
    for s, e in zip(day(run.starts), day(run.ends)):
        now = _in_force(perf, sets, np.full(len(tr), e).astype("datetime64[D]"))
        moved = now["expected_vest_date"].notna().to_numpy()
        vest = np.where(moved, day(now["expected_vest_date"].where(moved, "1970-01-01")), day(tr["vest_date"]))
        pay = _in_force(perf, sets, np.minimum(vest, e).astype("datetime64[D]"))["payout"].fillna(0.0).to_numpy(float)
        units = (qty * _overlap(gdate, s, e) - left * _overlap(vest, s, e)
                 - np.bincount(c_pos, weights=c_qty * _overlap(c_day, s, e), minlength=len(tr))) / (e - s + 1)
        total += float(np.sum(units * pay))
    return total


def dilution_checks(run, totals: pd.DataFrame, by_grant: pd.DataFrame) -> list[CheckRow]:
    """Tie-outs: the engine's total incremental shares against the row-by-row recomputation, the
    weighted units, and (ledgers with psu grants) the contingently issuable shares against a
    recomputation from the ledger's tables."""
    a = float(totals["incremental_shares"].sum())
    b = recomputed_incremental(by_grant)
    tol = 1e-6 * max(1.0, abs(b))
    units = float(run.grants.weighted_units.sum())
    counted = float(by_grant["weighted_units"].sum())
    rows = [
        CheckRow("Incremental shares, all periods: engine vs row-by-row recomputation", a, b, tol, abs(a - b) <= tol),
        CheckRow("Weighted units: engine vs by-grant table", units, counted, 1e-6 * max(1.0, units),
                 abs(units - counted) <= 1e-6 * max(1.0, units)),
    ]
    from grantval.attribution.dilution import performance_units

    psu = performance_units(run.ledger)  # the performance table's units (market-condition units: not this check)
    if psu.any():
        engine = float(run.grants.weighted_units[psu].sum())
        again = recomputed_contingent_shares(run)
        t = 1e-6 * max(1.0, abs(again))
        rows.append(CheckRow("Contingently issuable shares (psu), all periods: engine vs recomputation from the "
                             "tranches, events and performance table", engine, again, t, abs(engine - again) <= t))
    return rows


def _with_formulas(by_grant: pd.DataFrame) -> pd.DataFrame:
    """The by-grant table with a live recomputation of each row's incremental shares."""
    cols = list(by_grant.columns)
    q, pr, px = (col_letter(cols.index(c) + 1) for c in ("weighted_units", "assumed_proceeds_per_unit",
                                                         "average_share_price"))
    out = by_grant.copy()
    out["recomputed_incremental_shares"] = [Formula(f"=IF({pr}{r}<{px}{r},{q}{r}*(1-{pr}{r}/{px}{r}),0)")
                                            for r in range(2, len(by_grant) + 2)]
    return out


def live_check(by_grant: pd.DataFrame, total: float) -> CheckRow:
    """Check row comparing the total with the SUM of the live recomputation column of dilution_by_grant.

    The workbook's verdict follows the recalculated SUM; the tool's verdict compares the total with
    the same row-by-row recomputation in Python (:func:`recomputed_incremental`), so either can fail.
    """
    col = col_letter(len(by_grant.columns) + 1)
    formula = Formula(f"=SUM(dilution_by_grant!{col}2:{col}{len(by_grant) + 1})") if len(by_grant) else 0.0
    tol = 1e-6 * max(1.0, abs(total))
    return CheckRow("Incremental shares: total vs live recomputation in dilution_by_grant", total, formula,
                    tol, abs(total - recomputed_incremental(by_grant)) <= tol)


#: former private name
_live_check = live_check


def write_dilution_book(run, xlsx: pathlib.Path, totals, by_grant, checks, command: str, timestamp: bool) -> None:
    """The dilution workbook: run, dilution, dilution_by_grant, checks and notes sheets."""
    from grantval.io.xlsx.write import write_workbook
    from grantval.reporting.run_sheet import RunInfo, notes_sheet, run_sheet

    files = list(run.ledger.files) + ([run.prices_digest] if run.prices_digest else [])
    info = RunInfo("grantval dilution: incremental shares by the treasury stock method", command or "(Python API)",
                   run.ledger.location, files, [("from", run.start), ("through", run.through),
                                                ("average prices", run.prices_file)],
                   run.policy.describe(), timestamp)
    rows = checks + [live_check(by_grant, float(totals["incremental_shares"].sum()))]
    sheets = [
        run_sheet(info, info.workbook_time()),
        Sheet("dilution", frame=totals, formats=FORMATS),
        Sheet("dilution_by_grant", frame=_with_formulas(by_grant), formats=FORMATS,
              text_columns=("grant_id", "group")),
        checks_sheet(rows),
        notes_sheet(DILUTION_NOTES, run.ledger.warnings),
    ]
    write_workbook(xlsx, sheets, fixed_time=info.workbook_time(), footer=info.footer())


DILUTION_NOTES = [
    ("Method", ("Treasury stock method (ASC 260-10-45-23, ASC 718-10-45-2; IAS 33.45-47A): assumed proceeds per "
               "unit = exercise price + average unrecognised compensation cost per unit (mean of the period's "
               "start and end); incremental shares = units x (1 - proceeds / average price); none when "
               "proceeds >= average price (anti-dilutive).")),
    ("Units counted", ("Granted and not yet forfeited, cancelled, exercised, expired or vested (share units), "
                      "weighted by days outstanding in the period (ASC 718-10-45-1; IAS 33.38), whatever the "
                      "forfeiture policy.")),
    ("Periods", ("Each period is computed on its own with its own average price; year-to-date figures need "
                "their own run with the longer period.")),
    ("Performance units", ("Contingently issuable shares (ASC 718-10-45-1, ASC 260-10-45-48; IAS 33.48, 33.52): "
                          "target units outstanding (time-weighted) x contingent_payout, the payout in force in the "
                          "performance table at the period end (contingent_assessed_on), taken as the number "
                          "issuable if the period end were the end of the contingency period. The ledger's payout "
                          "is the probable outcome (ASC 718) or best estimate (IFRS 2), which may differ from the "
                          "outcome on the results to date: this is a stated policy for an accountant to review. "
                          "The treasury stock method then applies to the shares counted; a payout of 0 adds none.")),
    ("Tax", "No tax benefit is included in the assumed proceeds (ASU 2016-09)."),
]
