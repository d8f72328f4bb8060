"""``grantval expense`` and ``grantval disclose``."""

from __future__ import annotations

import pathlib
from typing import Annotated, Optional

import typer

from grantval.cli.app import app, check_outputs, command_line, output_set, report_outputs, say, usage, writing
from grantval.cli.options import (AttributionOpt, CsvDir, ForfeituresOpt, Ledger, NoTimestamp, PeriodOpt, SharePrice,
                                  StandardOpt, Through, Workbook, choice)


@app.command("expense")
def expense_cmd(
    ledger: Ledger,
    through: Through,
    start: Annotated[Optional[str], typer.Option(
        "--from", metavar="DATE", help="First day of the first period (default: start of the first period "
                                       "with a grant).")] = None,
    forecast_through: Annotated[Optional[str], typer.Option(
        "--forecast-through", metavar="DATE", help="Last day of the forecast.")] = None,
    period: PeriodOpt = None,
    standard: StandardOpt = None,
    attribution: AttributionOpt = None,
    forfeitures: ForfeituresOpt = None,
    output: Workbook = None,
    csv_dir: CsvDir = None,
    share_price: Annotated[Optional[float], typer.Option(
        "--share-price", metavar="PRICE", help="Share price at --through: adds the disclosure sheets.")] = None,
    no_timestamp: NoTimestamp = False,
    no_workbook: Annotated[bool, typer.Option("--no-workbook",
                                              help="Write only the CSV tables (with --csv-dir).")] = False,
    register: Annotated[Optional[pathlib.Path], typer.Option(
        "--register", metavar="FILE", help="Close register: show what was booked per closed period beside the "
                                           "recomputed schedule, and warn when a closed period would change.")] = None,
) -> None:
    """Compute stock-compensation expense by period and write the workbook and CSV tables."""
    from grantval import api

    if no_workbook and (output is not None or csv_dir is None):
        usage("--no-workbook goes with --csv-dir and without -o")
    from grantval.runs.expense import CSV_NAMES, check_share_price

    check_outputs(output, csv_dir)
    check_share_price(share_price)
    names = CSV_NAMES + ["liabilities.csv", "deferred_tax.csv", "tax_rollforward.csv", "tax_journal.csv"] + (
        ["booked_vs_recomputed.csv"] if register is not None else [])
    with output_set({"-o": output}, {"--csv-dir": (csv_dir, names)}, inputs=[ledger, register], ledgers=[ledger],
                    timestamp=not no_timestamp) as plan:
        run = api.expense(ledger, through=through, start=start, forecast_through=forecast_through,
                          period=choice(period), standard=choice(standard), attribution=choice(attribution),
                          forfeitures=choice(forfeitures))
        with writing(plan):
            result = api.write_expense(run, output, csv_dir, command=command_line(), timestamp=not no_timestamp,
                                       share_price=share_price)
            total = run.schedule.expense_cents.sum() / 100.0
            say(f"{run.ledger.n_grants} grants, {len(run.schedule.period_ends)} periods from {run.start} "
                f"through {run.through} ({run.policy.standard}, {run.policy.attribution}, "
                f"{run.policy.forfeitures}); expense {total:,.2f}")
            if register is not None:
                from grantval.cli.close_commands import show_comparison

                show_comparison(run, register, csv_dir)
    report_outputs(result)


@app.command("disclose")
def disclose_cmd(
    ledger: Ledger,
    start: Annotated[str, typer.Option("--from", metavar="DATE", help="First day of the window (ISO date).")],
    through: Annotated[str, typer.Option("--through", metavar="DATE", help="Last day of the window (ISO date).")],
    share_price: SharePrice = None,
    output: Workbook = None,
    csv_dir: CsvDir = None,
    no_timestamp: NoTimestamp = False,
) -> None:
    """Write the disclosure tables (ASC 718-10-50): award activity, grant figures, unrecognised cost."""
    from grantval import api

    from grantval.runs.disclose import CSV_NAMES

    check_outputs(output, csv_dir)
    names = CSV_NAMES + ["performance_unit_activity.csv"]
    with output_set({"-o": output}, {"--csv-dir": (csv_dir, names)}, inputs=[ledger], ledgers=[ledger],
                    timestamp=not no_timestamp) as plan:
        run = api.disclose(ledger, start=start, through=through, share_price=share_price)
        with writing(plan):
            result = api.write_disclosure(run, output, csv_dir, command=command_line(), timestamp=not no_timestamp)
    o = run.disclosure.options
    say(f"options outstanding at {run.disclosure.through}: {o['number'].iloc[5]:,.0f}; "
        f"RSUs nonvested: {run.disclosure.rsus['number'].iloc[4]:,.0f}")
    report_outputs(result)
