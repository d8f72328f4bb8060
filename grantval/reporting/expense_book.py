"""Sheets of the expense workbook."""

from __future__ import annotations

import numpy as np
from grantval.io.xlsx.sheet import Chart, Sheet
from grantval.reporting.formats import FORMATS, MONEY
from grantval.reporting.run_sheet import RunInfo, notes_sheet, run_sheet
from grantval.reporting.period_tables import with_sum_formulas
from grantval.reporting.checks import CheckRow, checks_sheet
from grantval.reporting.disclosure_book import disclosure_sheets


def expense_sheets(run, info: RunInfo, fv_frame, by_grant, by_group, tranches, unrec, unrec_total, unrec_wa, forecast,
                   disclosure, checks: list[CheckRow], rules: list[tuple[str, str]]) -> list[Sheet]:
    """Sheets of the expense workbook, in order."""
    sched = run.schedule
    p = len(sched.period_ends)
    period_fmt = {str(d): MONEY for d in np.asarray(sched.period_ends, dtype="datetime64[D]")}
    fperiod_fmt = {str(d): MONEY for d in np.asarray(sched.forecast_ends, dtype="datetime64[D]")}
    fmts = {**FORMATS, **period_fmt}
    total_cents = int(sched.expense_cents.sum())
    period_totals = sched.expense_cents.sum(axis=0)
    summary = [
        ["Summary"], [],
        ["Ledger", run.ledger.location], ["From", run.start], ["Through", run.through],
        ["Forecast through", run.forecast_through or "(none)"],
        ["Grants", run.ledger.n_grants], ["Tranches", len(run.inputs.t_qty)], [],
        ["Policies"], *[[k, v] for k, v in run.policy.describe()], [],
        ["Expense in the window", total_cents / 100.0],
        ["Unrecognised cost at the through date", unrec_total],
        ["Weighted-average remaining recognition period (years)", unrec_wa], [],
    ]
    head = len(summary) + 1  # 1-based row of the period table's header
    summary.append(["Period end", "Expense"])
    summary += [[str(d), int(c) / 100.0] for d, c in zip(sched.period_ends, period_totals)]
    sfmt = {(head - 5, 1): MONEY, (head - 4, 1): MONEY, (head - 3, 1): "0.00"}  # 0-based rows of the totals
    sfmt.update({(head + k, 1): MONEY for k in range(p)})
    charts = [Chart("bar", "Expense by period", (2, head, 2, head + p), (1, head + 1, 1, head + p), "D2",
                    y_title="Expense", x_title="Period end")]
    n_groups = len(by_group)
    group_chart = Chart("bar", "Expense by group", (len(by_group.columns), 1, len(by_group.columns), n_groups + 1),
                        (1, 2, 1, n_groups + 1), f"A{n_groups + 5}", y_title="Expense")
    sheets = [
        run_sheet(info, info.workbook_time()),
        Sheet("summary", rows=summary, widths={1: 52, 2: 22}, charts=charts, row_formats=sfmt),
        Sheet("fair_values", frame=fv_frame, formats=FORMATS, text_columns=("grant_id",),
              widths={"fair_value_source": 44, "recomputed_fair_value_per_unit": 18, "tool_fair_value_per_unit": 16}),
        Sheet("expense_by_grant", frame=with_sum_formulas(by_grant, 7, "grant_id"), formats={**fmts, "total": MONEY},
              text_columns=("grant_id", "group")),
        Sheet("expense_by_group", frame=with_sum_formulas(by_group, 2, "group"), formats={**fmts, "total": MONEY},
              text_columns=("group",), charts=[group_chart]),
        Sheet("tranches", frame=tranches, formats=FORMATS, text_columns=("grant_id",)),
        Sheet("forecast", frame=with_sum_formulas(forecast, 7, "grant_id"),
              formats={**FORMATS, **fperiod_fmt, "total": MONEY}, text_columns=("grant_id", "group")),
        Sheet("unrecognized", frame=unrec, formats=FORMATS, text_columns=("grant_id", "group")),
    ]
    if disclosure is not None:
        sheets += disclosure_sheets(disclosure)
    sheets.append(checks_sheet(checks))
    sheets.append(notes_sheet(rules, run.ledger.warnings))
    return sheets
