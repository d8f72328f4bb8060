"""The Python API behind the ``grantval`` commands.

Each function takes paths and options, returns result objects, and raises
:class:`~grantval.errors.GrantvalError` subclasses for problems the user can
fix.  The command layer only formats what these return.
"""

from __future__ import annotations

import pathlib
from dataclasses import dataclass
from typing import TYPE_CHECKING

from grantval import __version__
from grantval.errors import Problem
from grantval.fairvalue import FairValues, compute_fair_values
from grantval.io.write import Sheet, refuse_overwriting_inputs, write_csv, write_workbook
from grantval.ledger import Ledger, load_ledger, read_ledger
from grantval.notes import REVIEW, VALUATION_METHODS
from grantval.policy import Policy, resolve_policy

if TYPE_CHECKING:  # pragma: no cover
    from grantval.expense.inputs import ExpenseInputs
    from grantval.expense.periods import ExpenseSchedule


@dataclass
class CheckReport:
    """Outcome of checking a ledger."""

    location: str
    problems: list[Problem]
    ledger: Ledger | None

    @property
    def errors(self) -> list[Problem]:
        return [p for p in self.problems if p.severity == "error"]

    @property
    def warnings(self) -> list[Problem]:
        return [p for p in self.problems if p.severity == "warning"]

    @property
    def ok(self) -> bool:
        return not self.errors


def check(location) -> CheckReport:
    """Read and check a ledger, returning every problem found (never raises for data problems)."""
    ledger, problems = read_ledger(location)
    return CheckReport(str(location), problems, ledger)


@dataclass
class ValueRun:
    """Fair values of a ledger under a policy."""

    ledger: Ledger
    policy: Policy
    fair_values: FairValues


def value(location, *, valuation_unit: str | None = None, lattice_steps: int | None = None) -> ValueRun:
    """Load, check and value a ledger.

    Parameters
    ----------
    location : path
        A folder of CSV files or an .xlsx workbook.
    valuation_unit, lattice_steps : optional
        Override the ledger's policy table.

    Raises
    ------
    LedgerError
        Listing every error in the ledger; nothing is valued then.
    """
    ledger = load_ledger(location)
    policy = resolve_policy(ledger.policy_values, valuation_unit=valuation_unit, lattice_steps=lattice_steps)
    return ValueRun(ledger, policy, compute_fair_values(ledger, policy))


FAIR_VALUE_FORMATS = {
    "exercise_price": "#,##0.00",
    "share_price": "#,##0.00",
    "volatility": "0.00%",
    "risk_free_rate": "0.000%",
    "dividend_yield": "0.00%",
    "post_vest_exit_rate": "0.00%",
    "contractual_term_years": "0.0000",
    "expected_term_years": "0.0000",
    "fair_value_per_unit": "#,##0.0000",
    "grant_date_fair_value": "#,##0.00",
    "quantity": "#,##0",
    "grant_date": "yyyy-mm-dd",
    "expiration_date": "yyyy-mm-dd",
    "vest_date": "yyyy-mm-dd",
}
LEDGER_TEXT = ("grant_id", "holder_id", "group", "assumption_key")


def notes_rows(run_title: str, ledger: Ledger, policy: Policy, extra: list[tuple[str, str]] = ()) -> list[list]:
    """Rows of the notes sheet: what was run, on what, with which policies and methods."""
    rows: list[list] = [[run_title], [], ["Review", REVIEW], [], ["Tool", f"grantval {__version__}"],
                        ["Ledger", ledger.location]]
    for path, digest in ledger.files:
        rows.append(["Input file", path, digest])
    rows.append([])
    rows.append(["Policies"])
    for k, v in policy.describe():
        rows.append([k, v])
    rows += [[k, v] for k, v in extra]
    rows.append([])
    rows.append(["Methods"])
    rows += [[k, v] for k, v in VALUATION_METHODS]
    if ledger.warnings:
        rows.append([])
        rows.append(["Warnings from the ledger check"])
        rows += [[str(w)] for w in ledger.warnings]
    return rows


def write_fair_values(run: ValueRun, xlsx: pathlib.Path | None, csv_dir: pathlib.Path | None) -> list[pathlib.Path]:
    """Write the fair-value table to a workbook and/or ``fair_values.csv``; returns the paths written."""
    outputs = []
    if xlsx is not None:
        outputs.append(pathlib.Path(xlsx))
    csv_path = pathlib.Path(csv_dir) / "fair_values.csv" if csv_dir is not None else None
    if csv_path is not None:
        outputs.append(csv_path)
    refuse_overwriting_inputs(outputs, [p for p, _ in run.ledger.files] + [run.ledger.location])
    table = run.fair_values.table
    if csv_path is not None:
        if not pathlib.Path(csv_dir).is_dir():
            pathlib.Path(csv_dir).mkdir(parents=True, exist_ok=True)
        write_csv(csv_path, table)
    if xlsx is not None:
        sheets = [
            Sheet("fair_values", frame=table, formats=FAIR_VALUE_FORMATS, text_columns=LEDGER_TEXT,
                  widths={"grant_id": 14, "expected_term_method": 34, "fair_value_source": 28}),
            Sheet("notes", rows=notes_rows("grantval value: grant-date fair values", run.ledger, run.policy,
                                           [("distinct valuations", str(run.fair_values.distinct_valuations))]),
                  widths={1: 28, 2: 100, 3: 66}),
        ]
        write_workbook(pathlib.Path(xlsx), sheets)
    return outputs


@dataclass
class ExpenseRun:
    """An expense run: ledger, policy, fair values and the schedule by period."""

    ledger: Ledger
    policy: Policy
    fair_values: FairValues
    inputs: "ExpenseInputs"
    schedule: "ExpenseSchedule"
    through: str
    start: str
    forecast_through: str | None


def expense(location, *, through, start=None, forecast_through=None, period=None, standard=None,
            attribution=None, forfeitures=None, fiscal_year_end_month=None) -> ExpenseRun:
    """Load, check, value and expense a ledger.

    Parameters
    ----------
    location : path
        Ledger folder or workbook.
    through : date or ISO text
        Last day of the run.
    start, forecast_through : date or ISO text, optional
        First day of the first period (default: start of the first period
        with a grant); last day of the forecast.
    period, standard, attribution, forfeitures, fiscal_year_end_month : optional
        Override the ledger's policy table.
    """
    from grantval.expense.inputs import build_inputs
    from grantval.expense.periods import compute_schedule

    ledger = load_ledger(location)
    policy = resolve_policy(ledger.policy_values, period=period, standard=standard, attribution=attribution,
                            forfeitures=forfeitures, fiscal_year_end_month=fiscal_year_end_month)
    fv = compute_fair_values(ledger, policy)
    inp = build_inputs(ledger, fv)
    sched = compute_schedule(inp, policy, _day(through, "--through"), _day(start, "--from"),
                             _day(forecast_through, "--forecast-through"))
    return ExpenseRun(ledger, policy, fv, inp, sched, str(sched.period_ends[-1]), str(sched.window_start),
                      None if forecast_through is None else str(_day(forecast_through, "--forecast-through")))


def _day(value, option: str):
    import datetime as _dt

    import numpy as np

    from grantval.errors import UsageError

    if value is None:
        return None
    if isinstance(value, (_dt.date, np.datetime64)):
        return np.datetime64(value, "D")
    try:
        return np.datetime64(_dt.date.fromisoformat(str(value).strip()), "D")
    except ValueError:
        raise UsageError(f"{option} {value!r} is not an ISO date (write 2027-03-31)") from None


EXPENSE_FORMATS = {"fair_value_per_unit": "#,##0.0000", "quantity": "#,##0", "grant_date": "yyyy-mm-dd",
                   "vest_date": "yyyy-mm-dd", "quantity_granted": "#,##0", "forfeited": "#,##0",
                   "cancelled_unvested": "#,##0", "quantity_expensed": "#,##0.00",
                   "grant_date_fair_value": "#,##0.00", "service_elapsed": "0.00%",
                   "recognised_to_date": "#,##0.00", "unrecognised_cost": "#,##0.00", "remaining_years": "0.00",
                   "total": "#,##0.00"}
MONEY = "#,##0.00;[Red]-#,##0.00"


def write_expense(run: ExpenseRun, xlsx: pathlib.Path | None, csv_dir: pathlib.Path | None,
                  command: str = "") -> list[pathlib.Path]:
    """Write the expense workbook and/or the CSV files; returns the paths written."""
    import numpy as np

    from grantval.expense import tables as T

    inp, sched = run.inputs, run.schedule
    outputs: list[pathlib.Path] = []
    names = ["expense.csv", "expense_by_group.csv", "tranches.csv", "forecast.csv", "unrecognized.csv"]
    csv_paths = [pathlib.Path(csv_dir) / n for n in names] if csv_dir is not None else []
    outputs += csv_paths
    if xlsx is not None:
        outputs.append(pathlib.Path(xlsx))
    refuse_overwriting_inputs(outputs, [p for p, _ in run.ledger.files] + [run.ledger.location])

    award = run.ledger.grants["award_type"].to_numpy()
    qty = run.ledger.grants["quantity"].to_numpy(np.int64)
    by_grant = T.wide_by_grant(inp, award, run.fair_values.grant_value, qty, sched.period_ends, sched.expense_cents)
    by_group, group_sums = T.wide_by_group(inp, sched.period_ends, sched.expense_cents)
    tranches = T.tranche_table(inp, sched, run.ledger.tranches["tranche"].to_numpy())
    unrec, unrec_total, unrec_wa = T.unrecognised_table(inp, sched)
    forecast = T.wide_by_grant(inp, award, run.fair_values.grant_value, qty, sched.forecast_ends,
                               sched.forecast_cents)

    if csv_paths:
        pathlib.Path(csv_dir).mkdir(parents=True, exist_ok=True)
        write_csv(csv_paths[0], T.long_expense(inp, sched), money=("expense", "cumulative_expense"))
        names_g = by_group["group"].to_numpy()
        write_csv(csv_paths[1], T.long_by_group(sched.period_ends, names_g, group_sums), money=("expense",))
        write_csv(csv_paths[2], tranches)
        write_csv(csv_paths[3], T.long_forecast(inp, sched), money=("expense",))
        write_csv(csv_paths[4], unrec, money=("recognised_to_date", "unrecognised_cost"))
    if xlsx is not None:
        total_cents = int(sched.expense_cents.sum())
        period_totals = sched.expense_cents.sum(axis=0)
        summary = [
            ["grantval expense: stock-based compensation expense"], [],
            ["Review", REVIEW], [],
            ["Ledger", run.ledger.location], ["Command", command or "(Python API)"],
            ["From", run.start], ["Through", run.through], ["Forecast through", run.forecast_through or "(none)"],
            ["Grants", run.ledger.n_grants], ["Tranches", len(inp.t_qty)], [],
            ["Policies"], *[[k, v] for k, v in run.policy.describe()], [],
            ["Expense in the window", total_cents / 100.0],
            ["Unrecognised cost at the through date", unrec_total],
            ["Weighted-average remaining recognition period (years)", unrec_wa], [],
            ["Period end", "Expense"],
            *[[str(d), int(c) / 100.0] for d, c in zip(sched.period_ends, period_totals)],
        ]
        period_fmt = {label: MONEY for label in T.period_labels(sched.period_ends)}
        fperiod_fmt = {label: MONEY for label in T.period_labels(sched.forecast_ends)}
        fmts = {**EXPENSE_FORMATS, **period_fmt, "total": MONEY}
        sheets = [
            Sheet("summary", rows=summary, widths={1: 52, 2: 60}),
            Sheet("expense_by_grant", frame=_with_total_row(by_grant, "grant_id"), formats=fmts,
                  text_columns=("grant_id", "group")),
            Sheet("expense_by_group", frame=_with_total_row(by_group, "group"), formats=fmts,
                  text_columns=("group",)),
            Sheet("tranches", frame=tranches, formats=EXPENSE_FORMATS, text_columns=("grant_id",)),
            Sheet("forecast", frame=_with_total_row(forecast, "grant_id"), formats={**EXPENSE_FORMATS, **fperiod_fmt,
                                                                                     "total": MONEY},
                  text_columns=("grant_id", "group")),
            Sheet("unrecognized", frame=unrec, formats=EXPENSE_FORMATS, text_columns=("grant_id", "group")),
            Sheet("notes", rows=notes_rows("grantval expense", run.ledger, run.policy, expense_notes(run)),
                  widths={1: 28, 2: 100, 3: 66}),
        ]
        write_workbook(pathlib.Path(xlsx), sheets)
    return outputs


def _with_total_row(frame, label_column: str):
    import pandas as pd

    total = {c: (frame[c].sum() if (c.startswith(("1", "2")) or c == "total") else None) for c in frame.columns}
    total[label_column] = "Total"
    return pd.concat([frame, pd.DataFrame([total])], ignore_index=True)


def expense_notes(run: ExpenseRun) -> list[tuple[str, str]]:
    """Statements of the attribution and forfeiture rules applied."""
    from grantval.notes import EXPENSE_RULES

    rules = [("attribution", EXPENSE_RULES[run.policy.attribution]),
             ("forfeitures", EXPENSE_RULES[run.policy.forfeitures])]
    return rules + [(k, EXPENSE_RULES[k]) for k in ("service", "cancel", "rounding", "forecast")]
