"""``expense``: stock-compensation expense by period, with its workbook and CSV tables."""

from __future__ import annotations

import pathlib
from dataclasses import dataclass

import numpy as np

from grantval.attribution.inputs import ExpenseInputs, build_inputs
from grantval.attribution.periods import ExpenseSchedule, compute_schedule
from grantval.io.csv import BLOCK_ROWS, write_csv, write_csv_blocks
from grantval.io.files import refuse_overwriting_inputs
from grantval.io.xlsx.write import write_workbook
from grantval.ledger import Ledger, load_ledger
from grantval.measurement.fairvalue import FairValues, compute_fair_values
from grantval.policy import Policy, resolve_policy
from grantval.progress import stage
from grantval.reporting import expense_tables as T
from grantval.runs.common import as_day, csv_paths, ledger_inputs, reconcile

#: the CSV tables of an expense run, in the order written
CSV_NAMES = ["expense.csv", "expense_by_group.csv", "tranches.csv", "forecast.csv", "unrecognized.csv"]


@dataclass
class ExpenseRun:
    """An expense run: ledger, policy, fair values and the schedule by period."""

    ledger: Ledger
    policy: Policy
    fair_values: FairValues
    inputs: ExpenseInputs
    schedule: ExpenseSchedule
    through: str
    start: str
    forecast_through: str | None


@dataclass
class ExpenseOutputs:
    """Paths a run wrote and its tie-out checks."""

    paths: list[pathlib.Path]
    checks: list

    @property
    def failed(self) -> list:
        return [c for c in self.checks if not c.tool_pass]


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
    through_d, start_d = as_day(through, "through"), as_day(start, "start")
    forecast_d = as_day(forecast_through, "forecast_through")
    with stage("read+check"):
        ledger = load_ledger(location)
    policy = resolve_policy(ledger.policy_values, period=period, standard=standard, attribution=attribution,
                            forfeitures=forfeitures, fiscal_year_end_month=fiscal_year_end_month)
    with stage("value"):
        fv = compute_fair_values(ledger, policy)
    with stage("schedule"):
        inp = build_inputs(ledger, fv, policy)
        if forecast_d is not None:
            from grantval.attribution.liability import hold_values_after

            hold_values_after(inp, through_d)  # liabilities: the through date's fair values after it
        sched = compute_schedule(inp, policy, through_d, start_d, forecast_d)
    reconcile(ledger, fv, sched)
    return ExpenseRun(ledger, policy, fv, inp, sched, str(sched.period_ends[-1]), str(sched.window_start),
                      None if forecast_d is None else str(forecast_d))


def _write_csvs(run: ExpenseRun, paths, by_group, group_sums, tranches, unrec, liabilities=None,
                extra: dict | None = None) -> None:
    inp, sched = run.inputs, run.schedule
    pathlib.Path(paths[0]).parent.mkdir(parents=True, exist_ok=True)
    # the per-period tables (grants x periods rows) are written a block of grants at a time
    write_csv_blocks(paths[0], *T.long_expense_blocks(inp, sched, BLOCK_ROWS), money=("expense", "cumulative_expense"))
    write_csv(paths[1], T.long_by_group(sched.period_ends, by_group["group"].to_numpy(), group_sums),
              money=("expense",))
    write_csv(paths[2], tranches)
    write_csv_blocks(paths[3], *T.long_forecast_blocks(inp, sched, BLOCK_ROWS), money=("expense",))
    write_csv(paths[4], unrec, money=("recognised_to_date", "unrecognised_cost"))
    if liabilities is not None:
        write_csv(paths[5], liabilities, money=("liability", "cash_paid"))
    for name, (frame, money) in (extra or {}).items():  # tax tables, by file name
        write_csv(pathlib.Path(paths[0]).parent / name, frame, money=money)


def _write_book(run: ExpenseRun, xlsx, tables: dict, disc, checks, command, timestamp, share_price) -> None:
    from grantval.reporting import expense_book, fair_value_sheet
    from grantval.reporting.notes import expense_notes
    from grantval.reporting.run_sheet import RunInfo

    info = RunInfo(
        "grantval expense: stock-based compensation expense", command or "(Python API)", run.ledger.location,
        run.ledger.files,
        [("from", run.start), ("through", run.through), ("forecast through", run.forecast_through or "(none)"),
         ("share price for intrinsic values", "(not given)" if share_price is None else repr(share_price))],
        run.policy.describe(), timestamp)
    fv_frame, _ = fair_value_sheet.fair_value_audit(run.fair_values.table)
    sheets = expense_book.expense_sheets(run, info, fv_frame, tables["by_grant"], tables["by_group"],
                                         tables["tranches"], tables["unrec"], tables["unrec_total"],
                                         tables["unrec_wa"], tables["forecast"],
                                         disc if share_price is not None else None, checks, expense_notes(run.policy, run.ledger))
    if tables.get("liability_sheets"):
        at = next(i for i, sh in enumerate(sheets) if sh.name == "checks")
        sheets[at:at] = tables["liability_sheets"]
    write_workbook(pathlib.Path(xlsx), sheets, fixed_time=info.workbook_time(), footer=info.footer())


def _espp_parts(run: ExpenseRun) -> tuple[list, list]:
    """The purchase-plan sheets and the roll-forward tie (flows against the end balance counted on its own)."""
    from grantval.reporting import espp_tables as E
    from grantval.reporting.checks import CheckRow

    if not (run.ledger.grants["award_type"] == "espp").any():
        return [], []
    activity, (a, b) = E.purchase_plan_activity(run.ledger, run.fair_values, run.start, run.through)
    sheets = [E.espp_sheet(E.espp_table(run.ledger, run.fair_values, run.through)), E.activity_sheet(activity)]
    if getattr(run.inputs, "espp_resets", None) is not None:
        sheets.append(E.reset_sheet(E.reset_table(run.inputs)))
    check = CheckRow("Purchase-plan roll-forward: start + granted - reached - withdrawn - rolled over - forfeited = end", a, b, 0,
                     a == b)
    return sheets, [check]


def _modification_sheets(run: ExpenseRun) -> list:
    """Each modification's terms, fair values and incremental cost (none when the ledger has none)."""
    from grantval.reporting.modification_tables import modification_sheets

    report = getattr(run.inputs, "modifications", None)
    return modification_sheets(report, run.ledger, run.policy.attribution) if report is not None else []


def _wide_tables(run: ExpenseRun) -> tuple:
    """The by-grant expense and forecast tables of the workbook."""
    inp, sched = run.inputs, run.schedule
    award = run.ledger.grants["award_type"].to_numpy()
    qty = run.ledger.grants["quantity"].to_numpy(np.int64)
    by_grant = T.wide_by_grant(inp, award, run.fair_values.grant_value, qty, sched.period_ends, sched.expense_cents)
    forecast = T.wide_by_grant(inp, award, run.fair_values.grant_value, qty, sched.forecast_ends,
                               sched.forecast_cents)
    return by_grant, forecast


def check_share_price(share_price) -> None:
    """A share price for intrinsic values must be a positive, finite price within the limits."""
    from grantval import plausibility
    from grantval.errors import UsageError

    if share_price is not None and bool(plausibility.bad("share_price", share_price) | (share_price != share_price)):
        raise UsageError(f"{{share_price}} {share_price} {plausibility.LIMITS['share_price'].words}", ("share_price",))


def write_expense(run: ExpenseRun, xlsx: pathlib.Path | None, csv_dir: pathlib.Path | None,
                  command: str = "", timestamp: bool = True, share_price: float | None = None) -> ExpenseOutputs:
    """Write the expense workbook and/or the CSV files.

    The workbook carries a run sheet, the auditor's fair-value sheet with live
    BSM formulas, expense sheets whose totals are SUM formulas, a checks sheet
    and charts; with ``share_price`` also the disclosure sheets.

    Returns
    -------
    ExpenseOutputs
        The paths written and the tie-out checks (the command exits 1 when any fails).
    """
    from grantval.reporting import checks as C
    from grantval.reporting.disclosure import compute_disclosure
    from grantval.reporting.fair_value_sheet import recomputed_column

    from grantval.reporting import liability_tables as LT

    check_share_price(share_price)
    inp, sched = run.inputs, run.schedule
    from grantval.reporting import tax_tables as TX
    from grantval.runs.tax import tax_effects

    lf = LT.liability_figures(run)
    tax = tax_effects(run)
    tax_csvs = TX.tax_csv_tables(inp, tax) if tax is not None else {}
    paths = csv_paths(csv_dir, CSV_NAMES + (["liabilities.csv"] if lf is not None else []) + list(tax_csvs))
    outputs = paths + ([pathlib.Path(xlsx)] if xlsx is not None else [])
    refuse_overwriting_inputs(outputs, ledger_inputs(run.ledger))
    with stage("tables"):
        by_group, group_sums = T.wide_by_group(inp, sched.period_ends, sched.expense_cents)
        # the schedule's measurement at the through date (the same figures as measuring again); made before
        # the tranche table, so that the two tables' working arrays are not held at once
        disc = compute_disclosure(run.ledger, run.fair_values, inp, run.policy, run.start, run.through, share_price,
                                  sched.at_through)
        tranches = T.with_kept_units(T.tranche_table(inp, sched, run.ledger.tranches["tranche"].to_numpy()), inp, sched)
        unrec, unrec_total, unrec_wa = T.unrecognised_table(inp, sched)
        by_grant, forecast = _wide_tables(run) if xlsx is not None else (None, None)
        cells = T.money(sched.expense_cents)
        figures = C.ExpenseFigures(
            period_cells=cells, row_totals=by_grant["total"].to_numpy() if by_grant is not None
            else T.money(sched.expense_cents.sum(axis=1)), group_cells=T.money(group_sums),
            engine_total_cents=C.engine_total_cents(inp, run.policy, run.start, run.through),
            table_rows=len(by_grant) if by_grant is not None else cells.shape[0])
        checks = C.expense_checks(run, figures, tranches, unrec, disc, recomputed_column(run.fair_values.table))
        del cells, figures  # the written cells as currency (a million grants: 320 MB) are not needed for writing
        checks += LT.liability_checks(run, lf) if lf is not None else []
        tax_sheets, tax_checks = TX.tax_sheets(inp, tax) if tax is not None else ([], [])
        espp_sheets, espp_checks = _espp_parts(run)
        checks += tax_checks + espp_checks
    with stage("write csv"):
        if paths:
            _write_csvs(run, paths, by_group, group_sums, tranches, unrec,
                        LT.liability_table(run, lf) if lf is not None else None, tax_csvs)
    with stage("write workbook"):
        if xlsx is not None:
            tables = dict(by_grant=by_grant, by_group=by_group, tranches=tranches, unrec=unrec,
                          unrec_total=unrec_total, unrec_wa=unrec_wa, forecast=forecast,
                          liability_sheets=(LT.liability_sheets(run, lf) if lf is not None else []) + tax_sheets
                          + _modification_sheets(run) + espp_sheets)
            _write_book(run, xlsx, tables, disc, checks, command, timestamp, share_price)
    return ExpenseOutputs(outputs, checks)
