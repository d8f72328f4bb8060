"""``grantval whatif``."""

from __future__ import annotations

import pathlib
from typing import Annotated, Optional

import typer

from grantval.cli.app import app, check_outputs, command_line, echo_outputs, say
from grantval.cli.options import CsvDir, ForfeituresOpt, Ledger, NoTimestamp, Workbook, choice


@app.command("whatif")
def whatif_cmd(
    ledger: Ledger,
    vary: Annotated[list[str], typer.Option(
        "--vary", metavar="NAME=SPEC", help="NAME is volatility, expected_term_years, risk_free_rate, dividend_yield, "
        "share_price, forfeiture_rate or payout (performance units); SPEC is a comma-separated list of levels (0.45), shifts (+0.05) or "
        "relative shifts (+10%). Repeat for a grid.")],
    grants_from: Annotated[Optional[str], typer.Option(
        "--grants-from", metavar="DATE", help="Re-value only grants dated on or after this.")] = None,
    grants_through: Annotated[Optional[str], typer.Option(
        "--grants-through", metavar="DATE", help="Re-value only grants dated on or before this.")] = None,
    through: Annotated[Optional[str], typer.Option(
        "--through", metavar="DATE", help="Last day of the expense (default: the last vesting date).")] = None,
    forecast_through: Annotated[Optional[str], typer.Option(
        "--forecast-through", metavar="DATE", help="Last day of a forecast.")] = None,
    planned: Annotated[Optional[pathlib.Path], typer.Option(
        "--planned", metavar="PATH", help="Hypothetical grants (grants format, CSV or .xlsx) to add.")] = None,
    forfeitures: ForfeituresOpt = None,
    output: Workbook = None,
    csv_dir: CsvDir = None,
    no_timestamp: NoTimestamp = False,
) -> None:
    """Re-value and re-expense under shifted assumptions; write sensitivity tables and charts."""
    from grantval import api

    check_outputs(output, csv_dir)
    run = api.whatif(ledger, vary=vary, grants_from=grants_from, grants_through=grants_through, through=through,
                     forecast_through=forecast_through, planned=planned, forfeitures=choice(forfeitures))
    written = api.write_whatif(run, output, csv_dir, command=command_line(), timestamp=not no_timestamp)
    revalued = int(run.window_mask.sum())
    if revalued == 0:
        typer.echo("warning: no grant is dated in the --grants-from/--grants-through window, so nothing was "
                   "re-valued: every scenario equals the base", err=True)
    say(f"{len(run.results) - 1} scenarios plus base on {revalued} re-valued grants "
        f"({run.priced} input sets priced)")
    echo_outputs(written)
