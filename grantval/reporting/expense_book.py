"""Sheets of the expense workbook."""

from __future__ import annotations

from typing import TYPE_CHECKING

import numpy as np

from grantval.io.xlsx.sheet import Chart, Sheet
from grantval.reporting.formats import FORMATS, MONEY, period_labels
from grantval.reporting.run_sheet import RunInfo, notes_sheet, run_sheet
from grantval.reporting.period_tables import with_sum_formulas
from grantval.reporting.checks import CheckRow, checks_sheet
from grantval.reporting.disclosure_book import disclosure_sheets

if TYPE_CHECKING:  # pragma: no cover
    import pandas as pd


def _with_total_row(frame, columns) -> "pd.DataFrame":
    """``frame`` with a Total row of live SUM formulas under ``columns``."""
    import pandas as pd

    from grantval.io.cells import col_letter
    from grantval.io.xlsx.sheet import Formula

    n = len(frame)
    row = {c: None for c in frame.columns}
    row[frame.columns[0]] = "Total"
    for c in columns:
        letter = col_letter(list(frame.columns).index(c) + 1)
        row[c] = Formula(f"=SUM({letter}2:{letter}{n + 1})")
    return pd.concat([frame.astype(object), pd.DataFrame([row])], ignore_index=True)


#: a summary of up to this many rows (with its charts) is printed on one page
SUMMARY_ONE_PAGE = 72


def summary_charts(head: int, n_periods: int, n_groups: int, current_col: int, current: str) -> list[Chart]:
    """The summary's charts: expense by period (its own period table) and the current period by group.

    ``head`` is the 1-based row of the period table's header on the summary; ``current_col`` the
    1-based column of the current (last) period on ``expense_by_group``, whose rows 2.. are the groups.
    """
    by_period = Chart("bar", "Expense by period", (2, head, 2, head + n_periods), (1, head + 1, 1, head + n_periods),
                      "D2", y_title="Expense", x_title="Period ending", legend=None)
    height = min(12.0, max(7.5, 3.0 + 0.8 * n_groups))
    by_group = Chart("bar", f"Expense by group, period ending {current}", (current_col, 1, current_col, n_groups + 1),
                     (1, 2, 1, n_groups + 1), "D21", source="expense_by_group", y_title="Expense", x_title="Group",
                     horizontal=True, first_on_top=True, legend=None, size=(16.0, height))
    return [by_period, by_group] if n_groups else [by_period]


def _money_widths(columns, column_cents) -> dict:
    """Widths of the period and total columns: wide enough for the column's total row (its largest amount).

    ``column_cents`` are the totals of ``columns`` in cents; a column keeps the default width
    (its date label) when its total fits, so the table prints no wider than it needs.
    """
    return {c: max(12, len(f"{abs(int(t)) / 100.0:,.2f}") + 2) for c, t in zip(columns, column_cents)}


def _estimates_in_force(run) -> list[list]:
    """Summary rows: the forfeiture estimates in force at the through date (most specific first)."""
    est = run.ledger.estimates
    if run.policy.forfeitures != "estimate" or not len(est):
        return []
    through = np.datetime64(run.through, "D")
    live = est[est["effective_date"].to_numpy("datetime64[D]") <= through]
    latest = live.sort_values("effective_date").groupby("applies_to", sort=True).tail(1)
    rows = [["Forfeiture estimates in force at the through date", "applies to / effective / rate or fraction"]]
    for k, d, r, f in zip(latest["applies_to"], latest["effective_date"], latest["annual_forfeiture_rate"],
                          latest["expected_vest_fraction"]):
        what = f"annual rate {r:.2%}" if r == r else f"expected to vest {f:.2%}"
        rows.append([str(k), f"effective {np.datetime64(d, 'D')}: {what}"])
    return rows + [[]]


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
        [f"Expense in the current period (ending {run.through})", int(period_totals[-1]) / 100.0],
        ["Expense in the window, all periods", total_cents / 100.0],
        ["Unrecognised cost at the through date", unrec_total],
        ["Weighted-average remaining recognition period (years)", unrec_wa], [],
    ]
    summary += _estimates_in_force(run)
    head = len(summary) + 1  # 1-based row of the period table's header
    summary.append(["Period ending", "Expense"])
    summary += [[lab, int(c) / 100.0] for lab, c in zip(period_labels(sched.period_ends), period_totals)]
    first_total = next(i for i, r in enumerate(summary) if r and str(r[0]).startswith("Expense in the current"))
    sfmt = {(first_total, 1): MONEY, (first_total + 1, 1): MONEY, (first_total + 2, 1): MONEY,
            (first_total + 3, 1): "0.00"}  # 0-based rows of the totals
    sfmt.update({(head + k, 1): MONEY for k in range(p)})
    amount_widths = _money_widths([*period_fmt, "total"], [*period_totals, total_cents])
    charts = summary_charts(head, p, len(by_group), len(by_group.columns) - 1, period_labels(sched.period_ends)[-1])
    sheets = [
        run_sheet(info, info.workbook_time()),
        Sheet("summary", rows=summary, widths={1: 52, 2: 42}, charts=charts, row_formats=sfmt,
              fit_height=1 if len(summary) <= SUMMARY_ONE_PAGE else 0),
        Sheet("fair_values", frame=fv_frame, formats=FORMATS, text_columns=("grant_id",),
              widths={"fair_value_source": 44, "recomputed_fair_value_per_unit": 18, "tool_fair_value_per_unit": 16}),
        Sheet("expense_by_grant", frame=with_sum_formulas(by_grant, 7, "grant_id"), formats={**fmts, "total": MONEY},
              text_columns=("grant_id", "group"), widths=amount_widths),
        Sheet("expense_by_group", frame=with_sum_formulas(by_group, 2, "group"), formats={**fmts, "total": MONEY},
              text_columns=("group",), widths=amount_widths),
        Sheet("tranches", frame=tranches, formats=FORMATS, text_columns=("grant_id",)),
        Sheet("forecast", frame=with_sum_formulas(forecast, 7, "grant_id"),
              formats={**FORMATS, **fperiod_fmt, "total": MONEY}, text_columns=("grant_id", "group")),
        Sheet("unrecognized", frame=_with_total_row(unrec, ("recognised_to_date", "unrecognised_cost")),
              formats=FORMATS, text_columns=("grant_id", "group")),
    ]
    if disclosure is not None:
        sheets += disclosure_sheets(disclosure)
    sheets.append(checks_sheet(checks))
    sheets.append(notes_sheet(rules, run.ledger.warnings))
    return sheets
