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
           "average_unrecognised_per_unit": "#,##0.0000", "assumed_proceeds_per_unit": "#,##0.0000"}


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


def dilution_by_grant(run) -> pd.DataFrame:
    """``dilution_by_grant.csv``: one row per grant and period in which it had units outstanding."""
    g, inp = run.grants, run.inputs
    n, p = g.weighted_units.shape
    keep = (g.weighted_units > 0).ravel()
    rep = lambda a: np.repeat(np.asarray(a), p)[keep]
    flat = lambda a: np.asarray(a).ravel()[keep]
    return pd.DataFrame({
        "grant_id": rep(inp.grant_id), "group": rep(inp.group),
        "award_type": rep(run.ledger.grants["award_type"].to_numpy(dtype=object)),
        "period_end": np.tile(run.ends, n)[keep],
        "weighted_units": flat(g.weighted_units), "exercise_price": rep(g.exercise_price),
        "unrecognised_per_unit_start": np.nan_to_num(flat(g.unrecognised_start)),
        "unrecognised_per_unit_end": np.nan_to_num(flat(g.unrecognised_end)),
        "average_unrecognised_per_unit": flat(g.unrecognised_average),
        "assumed_proceeds_per_unit": flat(g.proceeds),
        "average_share_price": np.tile(run.average_price, n)[keep],
        "incremental_shares": flat(g.incremental), "antidilutive": flat(g.antidilutive),
    })


def recomputed_incremental(by_grant: pd.DataFrame) -> float:
    """Total incremental shares recomputed row by row from the by-grant table (a second computation)."""
    total = 0.0
    for q, proceeds, price in zip(by_grant["weighted_units"], by_grant["assumed_proceeds_per_unit"],
                                  by_grant["average_share_price"]):
        if proceeds < price:
            total += q * (price - proceeds) / price
    return total


def dilution_checks(run, totals: pd.DataFrame, by_grant: pd.DataFrame) -> list[CheckRow]:
    """Tie-outs: the engine's total incremental shares against the row-by-row recomputation."""
    a = float(totals["incremental_shares"].sum())
    b = recomputed_incremental(by_grant)
    tol = 1e-6 * max(1.0, abs(b))
    units = float(run.grants.weighted_units.sum())
    counted = float(by_grant["weighted_units"].sum())
    return [
        CheckRow("Incremental shares, all periods: engine vs row-by-row recomputation", a, b, tol, abs(a - b) <= tol),
        CheckRow("Weighted units: engine vs by-grant table", units, counted, 1e-6 * max(1.0, units),
                 abs(units - counted) <= 1e-6 * max(1.0, units)),
    ]


def _with_formulas(by_grant: pd.DataFrame) -> pd.DataFrame:
    """The by-grant table with a live recomputation of each row's incremental shares."""
    cols = list(by_grant.columns)
    q, pr, px = (col_letter(cols.index(c) + 1) for c in ("weighted_units", "assumed_proceeds_per_unit",
                                                         "average_share_price"))
    out = by_grant.copy()
    out["recomputed_incremental_shares"] = [Formula(f"=IF({pr}{r}<{px}{r},{q}{r}*(1-{pr}{r}/{px}{r}),0)")
                                            for r in range(2, len(by_grant) + 2)]
    return out


def _live_check(by_grant: pd.DataFrame, total: float) -> CheckRow:
    """Check row comparing the total with the SUM of the live recomputation column."""
    col = col_letter(len(by_grant.columns) + 1)
    formula = Formula(f"=SUM(dilution_by_grant!{col}2:{col}{len(by_grant) + 1})") if len(by_grant) else 0.0
    return CheckRow("Incremental shares: total vs live recomputation in dilution_by_grant", total, formula,
                    1e-6 * max(1.0, abs(total)), True)


def write_dilution_book(run, xlsx: pathlib.Path, totals, by_grant, checks, command: str, timestamp: bool) -> None:
    """The dilution workbook: run, dilution, dilution_by_grant, checks and notes sheets."""
    from grantval.io.xlsx.write import write_workbook
    from grantval.reporting.run_sheet import RunInfo, notes_sheet, run_sheet

    files = list(run.ledger.files) + ([run.prices_digest] if run.prices_digest else [])
    info = RunInfo("grantval dilution: incremental shares by the treasury stock method", command or "(Python API)",
                   run.ledger.location, files, [("from", run.start), ("through", run.through),
                                                ("average prices", run.prices_file)],
                   run.policy.describe(), timestamp)
    rows = checks + [_live_check(by_grant, float(totals["incremental_shares"].sum()))]
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
    ("Tax", "No tax benefit is included in the assumed proceeds (ASU 2016-09)."),
]
