"""``grantval dilution``."""

from __future__ import annotations

import pathlib
from typing import Annotated

import typer

from grantval.cli.app import app, check_outputs, command_line, report_outputs, say
from grantval.cli.options import (
    CsvDir,
    Ledger,
    NoTimestamp,
    PeriodOpt,
    StandardOpt,
    Workbook,
    choice,
)


@app.command("dilution")
def dilution_cmd(
    ledger: Ledger,
    average_prices: Annotated[pathlib.Path, typer.Option(
        "--average-prices", metavar="FILE", help="CSV file with period_end and average_share_price for every "
                                                 "period.")],
    start: Annotated[str, typer.Option("--from", metavar="DATE", help="First day of the first period (ISO date).")],
    through: Annotated[str, typer.Option("--through", metavar="DATE", help="Last day of the last period (ISO date).")],
    period: PeriodOpt = None,
    standard: StandardOpt = None,
    output: Workbook = None,
    csv_dir: CsvDir = None,
    no_timestamp: NoTimestamp = False,
) -> None:
    """Incremental shares of the awards for diluted EPS (treasury stock method), by period."""
    from grantval import api

    check_outputs(output, csv_dir)
    run = api.dilution(ledger, average_prices=average_prices, start=start, through=through, period=choice(period),
                       standard=choice(standard))
    result = api.write_dilution(run, output, csv_dir, command=command_line(), timestamp=not no_timestamp)
    total = run.grants.incremental.sum(axis=0)
    say(f"{run.ledger.n_grants} grants, {len(run.ends)} periods from {run.start} through {run.through}; "
        f"incremental shares in the last period {total[-1]:,.2f}")
    from grantval.attribution.dilution import market_condition_grants, performance_units

    perf, market = performance_units(run.ledger), market_condition_grants(run.ledger)
    if perf.any():
        say(f"{int(perf.sum())} grants with performance conditions counted at the payout in force at "
            "each period end, taken as the outcome if the period ended now (a policy to review: see the notes)")
    if market.any():
        say(f"{int(market.sum())} grants with market conditions counted at the payout the results to date would earn "
            "if the period ended at each period end (market_returns, share_prices)")
    report_outputs(result)
