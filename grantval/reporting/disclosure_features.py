"""Feature sections of ``disclose``: modifications, cash-settled liabilities, purchase-plan activity.

Each section is a table written as a CSV and a workbook sheet, with a tie-out check computed
two ways.  Sections of features the ledger does not use are left out (no file, no check).
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from grantval.reporting.checks import CheckRow
from grantval.reporting.formats import COUNT, MONEY, PRICE, UNIT


@dataclass
class FeatureSections:
    """Tables (CSV name -> frame) and checks of the feature sections of one disclosure window."""

    tables: dict = field(default_factory=dict)
    checks: list = field(default_factory=list)


def modification_section(inputs, ledger, start, through, out: FeatureSections) -> None:
    """``modification_disclosure.csv``: modifications in the window by date and change.

    Incremental cost, grants and holders affected (ASC 718-10-50-2(h)(2); IFRS 2.47(c), paragraph
    letters from memory).  Check: the table's incremental cost = the per-modification rows
    (modifications and replacements tables) dated in the window, summed on their own.
    """
    from grantval.reporting import espp_tables as E
    from grantval.reporting import modification_tables as M

    report, resets = getattr(inputs, "modifications", None), getattr(inputs, "espp_resets", None)
    if report is None and resets is None:
        return
    s, t = np.datetime64(start, "D"), np.datetime64(through, "D")
    parts = [M.disclosure_table(report, ledger)] if report is not None else []
    if resets is not None:  # purchase-plan resets are modifications too (grantval.attribution.espp_resets)
        parts.append(E.reset_disclosure(inputs, ledger))
    table = pd.concat([p for p in parts if len(p)], ignore_index=True) if any(len(p) for p in parts) else parts[0]
    d = pd.to_datetime(table["modification_date"]).to_numpy("datetime64[D]")
    table = table[(d >= s) & (d <= t)].reset_index(drop=True)
    total = 0.0
    frames = [(M.modification_table(report, ledger), "modification_date"),
              (M.replacement_table(report, ledger), "replacement_date")] if report is not None else []
    for frame, col in frames:
        if len(frame):
            dd = pd.to_datetime(frame[col]).to_numpy("datetime64[D]")
            total += float(frame["incremental_cost"].to_numpy(float)[(dd >= s) & (dd <= t)].sum())
    if resets is not None:  # the per-reset totals of the attribution, summed on their own
        rd = resets.table["reset_date"].to_numpy("datetime64[D]")
        total += float(resets.incremental[(rd >= s) & (rd <= t)].sum())
    out.tables["modification_disclosure.csv"] = table
    a, b = round(float(table["incremental_cost"].sum()), 2), round(total, 2)
    out.checks.append(CheckRow("Modifications: disclosed incremental cost = sum of the modifications in the window",
                               a, b, 0.01, abs(a - b) <= 0.01))


def liability_section(run, out: FeatureSections) -> None:
    """``liability_disclosure.csv``: liability at start and end, expense, cash paid (IFRS 2.51(b); from memory).

    Checks: the roll-forward lines tie (start + expense - cash paid = end), and the liability
    checks of the expense run (cash paid recomputed from the events).
    """
    from grantval.reporting import liability_tables as LT

    f = LT.liability_figures(run)
    if f is None:
        return
    table = LT.liability_disclosure(run, f)
    out.tables["liability_disclosure.csv"] = table
    v = table["value"].to_numpy(float)
    a, b = round(v[0] + v[1] - v[2], 2), round(v[3], 2)
    out.checks.append(CheckRow("Cash-settled disclosure: start + expense - cash paid = end liability", a, b, 0.01,
                               abs(a - b) <= 0.01))
    out.checks += LT.liability_checks(run, f)


def espp_section(ledger, fair_values, start, through, out: FeatureSections) -> None:
    """``purchase_plan_activity.csv``: purchase rights open, enrolled, reached, withdrawn; shares bought.

    Check: start + granted - reached - withdrawn - rolled over - forfeited = end, the end counted on its own.
    """
    from grantval.reporting import espp_tables as E

    if not (ledger.grants["award_type"] == "espp").any():
        return
    frame, (a, b) = E.purchase_plan_activity(ledger, fair_values, str(start), str(through))
    out.tables["purchase_plan_activity.csv"] = frame
    out.checks.append(CheckRow("Purchase-plan disclosure: start + granted - reached - withdrawn - rolled over - forfeited = end",
                               a, b, 0, a == b))


def feature_sections(ledger, policy, fair_values, inputs, start, through) -> FeatureSections:
    """All feature sections of the window ``start``..``through``."""
    out = FeatureSections()
    modification_section(inputs, ledger, start, through, out)
    from grantval.attribution.liability import liability_engine

    if liability_engine(inputs) is not None:
        from grantval.attribution.periods import compute_schedule
        from grantval.runs.expense import ExpenseRun

        sched = compute_schedule(inputs, policy, str(through), str(start))
        run = ExpenseRun(ledger, policy, fair_values, inputs, sched, str(sched.period_ends[-1]),
                         str(sched.window_start), None)
        liability_section(run, out)
    espp_section(ledger, fair_values, start, through, out)
    return out


#: number formats and column widths of each section's sheet (dates as dates, counts whole, money to cents)
SHEET_LAYOUT = {
    "modification_disclosure": ({"modification_date": "yyyy-mm-dd", "grants": COUNT, "holders_affected": COUNT,
                                 "units_affected": COUNT, "incremental_cost": MONEY},
                                {"modification_date": 14, "change": 34, "grants": 10, "holders_affected": 12,
                                 "units_affected": 12, "incremental_cost": 18, "fair_value_measured": 60}),
    "liability_disclosure": ({"value": MONEY}, {"item": 64, "value": 20}),
}


FEATURE_LABELS = {"weighted_average_grant_date_fair_value": "Weighted-average grant-date fair value",
                  "fair_value_measured": "Fair value measured by", "units_affected": "Units affected",
                  "holders_affected": "Holders affected"}


def purchase_plan_sheet(frame):
    """The purchase-plan lines, one format per line: numbers of rights and shares whole, the price to cents.

    The ``number`` column holds counts and, on its last line, the weighted-average purchase price,
    so the sheet is written as rows with a format per cell (like ``grant_disclosures``).
    """
    from grantval.io.xlsx.sheet import Sheet

    rows: list[list] = [["Line", "Number", "Weighted-average grant-date fair value"]]
    fmts = {}
    for i, (line, number, fv) in enumerate(zip(frame["line"], frame["number"],
                                               frame["weighted_average_grant_date_fair_value"]), start=1):
        rows.append([str(line), None if number != number else float(number), None if fv != fv else float(fv)])
        fmts[(i, 1)] = PRICE if "price" in str(line) else COUNT
        fmts[(i, 2)] = UNIT
    return Sheet("purchase_plan_activity", rows=rows, row_formats=fmts, widths={1: 36, 2: 14, 3: 40})


def feature_sheets(sections: FeatureSections) -> list:
    """One workbook sheet per section table (the CSV name without ``.csv``), formatted by what each column holds."""
    from grantval.io.xlsx.sheet import Sheet

    out = []
    for name, frame in sections.tables.items():
        if name == "purchase_plan_activity.csv":
            out.append(purchase_plan_sheet(frame))
            continue
        formats, widths = SHEET_LAYOUT.get(name[:-4], ({}, {"item": 60, "line": 36, "change": 30}))
        out.append(Sheet(name[:-4], frame=frame, formats=formats, widths=widths, labels=FEATURE_LABELS,
                         text_columns=tuple(c for c in ("change", "fair_value_measured", "item", "line")
                                            if c in frame.columns)))
    return out
