"""The ``grantval`` command: a thin layer over the Python API.

Each command parses options, calls one API function and turns
:class:`~grantval.errors.GrantvalError` into a message on standard error and
an exit code (1 for a data problem, 2 for a usage problem).  No command
contains accounting or pricing logic of its own.
"""

from __future__ import annotations

import pathlib
import sys
from typing import Optional

import typer

from grantval import __version__
from grantval.errors import GrantvalError

app = typer.Typer(
    add_completion=False,
    pretty_exceptions_enable=False,
    no_args_is_help=True,
    help="Grant-date fair values and expense schedules for stock-based compensation. "
    "Results inform accounting judgements; they must be reviewed by qualified accounting staff.",
)


def _version(value: bool) -> None:
    if value:
        typer.echo(f"grantval {__version__}")
        raise typer.Exit()


@app.callback()
def _root(
    version: bool = typer.Option(
        False, "--version", callback=_version, is_eager=True, help="Print the version and exit."
    ),
    quiet: bool = typer.Option(False, "--quiet", "-q", help="Show no progress."),
    verbose: bool = typer.Option(False, "--verbose", "-v", help="Print the time of each stage."),
) -> None:
    """grantval command line."""
    from grantval.progress import Reporter, install

    install(Reporter(show=sys.stderr.isatty() and not quiet and not verbose, verbose=verbose))


def fail(err: GrantvalError) -> None:
    """Print a grantval error for the user and exit with its code."""
    typer.echo(f"error: {err}", err=True)
    raise typer.Exit(err.exit_code)


@app.command("price-option")
def price_option(
    share_price: float = typer.Option(..., help="Share price, currency per share."),
    strike: float = typer.Option(..., help="Exercise price, currency per share."),
    term: float = typer.Option(..., help="Expected term (BSM) or contractual term (lattice), years."),
    rate: float = typer.Option(..., help="Risk-free rate, continuously compounded decimal (0.04)."),
    volatility: float = typer.Option(..., help="Volatility, decimal (0.35)."),
    dividend_yield: float = typer.Option(0.0, help="Continuous dividend yield, decimal."),
    model: str = typer.Option("bsm", help="bsm or lattice."),
    vesting: float = typer.Option(0.0, help="Lattice: years until the option vests."),
    exercise_multiple: Optional[float] = typer.Option(None, help="Lattice: suboptimal exercise factor."),
    exit_rate: float = typer.Option(0.0, help="Lattice: post-vesting exit rate per year."),
) -> None:
    """Value one option with the stated assumptions and print the value per option."""
    from grantval.pricing import bsm_value, lattice_value

    try:
        if model == "bsm":
            value = bsm_value(share_price, strike, term, rate, volatility, dividend_yield)
        elif model == "lattice":
            value = lattice_value(
                share_price, strike, term, rate, volatility, dividend_yield,
                vesting=vesting, exercise_multiple=exercise_multiple, exit_rate=exit_rate,
            )
        else:
            raise typer.BadParameter("model must be bsm or lattice", param_hint="--model")
    except GrantvalError as err:
        fail(err)
    typer.echo(f"{value:.6f}")


@app.command("check")
def check_cmd(
    ledger: pathlib.Path = typer.Argument(..., help="Ledger: a folder of CSV files or an .xlsx workbook."),
) -> None:
    """Check a ledger and list every problem; exit 0 when there are no errors, 1 otherwise."""
    from grantval import api

    try:
        report = api.check(ledger)
    except GrantvalError as err:
        fail(err)
    for p in report.problems:
        typer.echo(str(p), err=p.severity == "error")
    if not report.ok:
        typer.echo(f"{ledger}: {len(report.errors)} error(s), {len(report.warnings)} warning(s)", err=True)
        raise typer.Exit(1)
    n = report.ledger.n_grants
    typer.echo(f"{ledger}: {n} grants, {len(report.ledger.tranches)} tranches, "
               f"{len(report.ledger.events)} events; no errors, {len(report.warnings)} warning(s)")


@app.command("value")
def value_cmd(
    ledger: pathlib.Path = typer.Argument(..., help="Ledger: a folder of CSV files or an .xlsx workbook."),
    output: Optional[pathlib.Path] = typer.Option(None, "-o", "--output", help="Workbook to write (.xlsx)."),
    csv_dir: Optional[pathlib.Path] = typer.Option(None, "--csv-dir", help="Also write fair_values.csv here."),
    valuation_unit: Optional[str] = typer.Option(None, help="award or tranche (overrides the ledger's policy)."),
    lattice_steps: Optional[int] = typer.Option(None, help="Lattice time steps (overrides the ledger's policy)."),
) -> None:
    """Value every grant at its grant date and write the fair-value table."""
    from grantval import api

    check_outputs(output, csv_dir)
    try:
        run = api.value(ledger, valuation_unit=valuation_unit, lattice_steps=lattice_steps)
        written = api.write_fair_values(run, output, csv_dir)
    except GrantvalError as err:
        fail(err)
    fv = run.fair_values
    total = float(fv.table["grant_date_fair_value"].sum())
    typer.echo(f"grants read {run.ledger.n_grants}, valued {fv.table['grant_id'].nunique()} "
               f"({fv.distinct_valuations} distinct valuations); total grant-date fair value {total:,.2f}")
    for path in written:
        typer.echo(f"wrote {path}")


@app.command("expense")
def expense_cmd(
    ledger: pathlib.Path = typer.Argument(..., help="Ledger: a folder of CSV files or an .xlsx workbook."),
    through: str = typer.Option(..., "--through", help="Last day of the run (ISO date)."),
    start: Optional[str] = typer.Option(None, "--from", help="First day of the first period (default: start of the first period with a grant)."),
    forecast_through: Optional[str] = typer.Option(None, "--forecast-through", help="Last day of the forecast."),
    period: Optional[str] = typer.Option(None, "--period", help="month, quarter or year."),
    standard: Optional[str] = typer.Option(None, "--standard", help="asc718 or ifrs2."),
    attribution: Optional[str] = typer.Option(None, "--attribution", help="straight-line or graded."),
    forfeitures: Optional[str] = typer.Option(None, "--forfeitures", help="estimate or as-occur."),
    output: Optional[pathlib.Path] = typer.Option(None, "-o", "--output", help="Workbook to write (.xlsx)."),
    csv_dir: Optional[pathlib.Path] = typer.Option(None, "--csv-dir", help="Also write the CSV tables here."),
    share_price: Optional[float] = typer.Option(None, "--share-price", help="Share price at --through: adds the disclosure sheets."),
    no_timestamp: bool = typer.Option(False, "--no-timestamp", help="Record no run time, for byte-identical reruns."),
    no_workbook: bool = typer.Option(False, "--no-workbook", help="Write only the CSV tables (with --csv-dir)."),
) -> None:
    """Compute stock-compensation expense by period and write the workbook and CSV tables."""
    from grantval import api

    if no_workbook and (output is not None or csv_dir is None):
        usage("--no-workbook goes with --csv-dir and without -o")
    check_outputs(output, csv_dir)
    try:
        run = api.expense(ledger, through=through, start=start, forecast_through=forecast_through, period=period,
                          standard=standard, attribution=attribution, forfeitures=forfeitures)
        result = api.write_expense(run, output, csv_dir, command=_command_line(), timestamp=not no_timestamp,
                                   share_price=share_price)
    except GrantvalError as err:
        fail(err)
    total = run.schedule.expense_cents.sum() / 100.0
    typer.echo(f"{run.ledger.n_grants} grants, {len(run.schedule.period_ends)} periods from {run.start} "
               f"through {run.through} ({run.policy.standard}, {run.policy.attribution}, {run.policy.forfeitures}); "
               f"expense {total:,.2f}")
    report_outputs(result)


@app.command("disclose")
def disclose_cmd(
    ledger: pathlib.Path = typer.Argument(..., help="Ledger: a folder of CSV files or an .xlsx workbook."),
    start: str = typer.Option(..., "--from", help="First day of the window (ISO date)."),
    through: str = typer.Option(..., "--through", help="Last day of the window (ISO date)."),
    share_price: Optional[float] = typer.Option(None, "--share-price", help="Share price at --through, for intrinsic values."),
    output: Optional[pathlib.Path] = typer.Option(None, "-o", "--output", help="Workbook to write (.xlsx)."),
    csv_dir: Optional[pathlib.Path] = typer.Option(None, "--csv-dir", help="Also write the CSV tables here."),
    no_timestamp: bool = typer.Option(False, "--no-timestamp", help="Record no run time, for byte-identical reruns."),
) -> None:
    """Write the disclosure tables (ASC 718-10-50): award activity, grant figures, unrecognised cost."""
    from grantval import api

    check_outputs(output, csv_dir)
    try:
        run = api.disclose(ledger, start=start, through=through, share_price=share_price)
        result = api.write_disclosure(run, output, csv_dir, command=_command_line(), timestamp=not no_timestamp)
    except GrantvalError as err:
        fail(err)
    o = run.disclosure.options
    typer.echo(f"options outstanding at {run.disclosure.through}: {o['number'].iloc[5]:,.0f}; "
               f"RSUs nonvested: {run.disclosure.rsus['number'].iloc[4]:,.0f}")
    report_outputs(result)


@app.command("whatif")
def whatif_cmd(
    ledger: pathlib.Path = typer.Argument(..., help="Ledger: a folder of CSV files or an .xlsx workbook."),
    vary: list[str] = typer.Option(..., "--vary", help="NAME=SPEC[,SPEC]: volatility, expected_term_years, "
                                   "risk_free_rate, dividend_yield, share_price or forfeiture_rate; SPEC is a level "
                                   "(0.45), a shift (+0.05) or a relative shift (+10%). Repeat for a grid."),
    grants_from: Optional[str] = typer.Option(None, "--grants-from", help="Re-value only grants dated on or after this."),
    grants_through: Optional[str] = typer.Option(None, "--grants-through", help="Re-value only grants dated on or before this."),
    through: Optional[str] = typer.Option(None, "--through", help="Last day of the expense (default: the last vesting date)."),
    forecast_through: Optional[str] = typer.Option(None, "--forecast-through", help="Last day of a forecast."),
    planned: Optional[pathlib.Path] = typer.Option(None, "--planned", help="Hypothetical grants (grants format) to add."),
    forfeitures: Optional[str] = typer.Option(None, "--forfeitures", help="estimate or as-occur."),
    output: Optional[pathlib.Path] = typer.Option(None, "-o", "--output", help="Workbook to write (.xlsx)."),
    csv_dir: Optional[pathlib.Path] = typer.Option(None, "--csv-dir", help="Also write the CSV tables here."),
    no_timestamp: bool = typer.Option(False, "--no-timestamp", help="Record no run time, for byte-identical reruns."),
) -> None:
    """Re-value and re-expense under shifted assumptions; write sensitivity tables and charts."""
    from grantval import api

    check_outputs(output, csv_dir)
    try:
        run = api.whatif(ledger, vary=vary, grants_from=grants_from, grants_through=grants_through, through=through,
                         forecast_through=forecast_through, planned=planned, forfeitures=forfeitures)
        written = api.write_whatif(run, output, csv_dir, command=_command_line(), timestamp=not no_timestamp)
    except GrantvalError as err:
        fail(err)
    typer.echo(f"{len(run.results) - 1} scenarios plus base on {int(run.window_mask.sum())} re-valued grants "
               f"({run.priced} input sets priced)")
    for path in written:
        typer.echo(f"wrote {path}")


@app.command("assumptions")
def assumptions_cmd(
    prices: pathlib.Path = typer.Option(..., "--prices", help="CSV: date, close[, ticker]."),
    curve: pathlib.Path = typer.Option(..., "--curve", help="CSV: date, then one column per tenor (1m, 3m, 1y, 10y...)."),
    dividends: Optional[pathlib.Path] = typer.Option(None, "--dividends", help="CSV: ex_date, amount[, ticker]."),
    peers: Optional[pathlib.Path] = typer.Option(None, "--peers", help="CSV: ticker, weight (peer-group volatility)."),
    ledger: Optional[pathlib.Path] = typer.Option(None, "--ledger", help="Take the grant dates and terms from this ledger."),
    dates: Optional[str] = typer.Option(None, "--dates", help="Or: grant dates, comma-separated."),
    lookback: str = typer.Option("expected-term", "--lookback", help="expected-term, contractual-term or YEARS."),
    frequency: str = typer.Option("daily", "--frequency", help="daily, weekly or monthly returns."),
    ticker: Optional[str] = typer.Option(None, "--ticker", help="The company's ticker when PRICES holds several."),
    peer_weight: float = typer.Option(0.5, "--peer-weight", help="Weight of the peer volatility in the blend (0-1)."),
    max_gap_days: int = typer.Option(7, "--max-gap-days", help="Longest gap allowed between closes, days."),
    curve_units: str = typer.Option("auto", "--curve-units", help="auto, percent or decimal."),
    curve_fallback: bool = typer.Option(False, "--curve-fallback", help="Use the nearest earlier curve date when a grant date has none."),
    allow_short_history: bool = typer.Option(False, "--allow-short-history", help="Accept (and flag) a lookback longer than the history."),
    expected_term: Optional[float] = typer.Option(None, "--expected-term", help="With --dates: expected term, years."),
    contractual_term: Optional[float] = typer.Option(None, "--contractual-term", help="With --dates: contractual term, years."),
    output: pathlib.Path = typer.Option(..., "-o", "--output", help="assumptions CSV to write."),
    xlsx: Optional[pathlib.Path] = typer.Option(None, "--xlsx", help="Also write a workbook."),
    no_timestamp: bool = typer.Option(False, "--no-timestamp", help="Record no run time."),
) -> None:
    """Derive share price, volatility, risk-free rate and dividend yield per grant date, with provenance."""
    from grantval import api

    if (ledger is None) == (dates is None):
        usage("give either --ledger LEDGER or --dates DATE,...")
    if lookback not in ("expected-term", "contractual-term"):
        try:
            lb: object = float(lookback)
        except ValueError:
            usage(f"--lookback {lookback!r}: write expected-term, contractual-term or a number of years")
        if not lb > 0:
            usage("--lookback must be a positive number of years")
    else:
        lb = lookback
    if curve_units not in ("auto", "percent", "decimal"):
        usage("--curve-units must be auto, percent or decimal")
    try:
        derived = api.assumptions(
            prices, curve, ledger=ledger, dates=None if dates is None else dates.split(","), dividends=dividends,
            peers=peers, lookback=lb, frequency=frequency, ticker=ticker, peer_weight=peer_weight,
            max_gap_days=max_gap_days, curve_units=curve_units, curve_fallback=curve_fallback,
            allow_short_history=allow_short_history, expected_term=expected_term, contractual_term=contractual_term)
        inputs = [str(p) for p in (prices, curve, dividends, peers) if p is not None]
        written = api.write_assumptions(derived, output, xlsx, inputs, command=_command_line(),
                                        timestamp=not no_timestamp)
    except GrantvalError as err:
        fail(err)
    typer.echo(f"{len(derived.table)} grant dates")
    for path in written:
        typer.echo(f"wrote {path}")


def _command_line() -> str:
    return " ".join(["grantval"] + sys.argv[1:])


def report_outputs(result) -> None:
    """Print the paths written and any failed tie-out check; exit 1 when one failed."""
    for path in result.paths:
        typer.echo(f"wrote {path}")
    for c in result.failed:
        typer.echo(f"check failed: {c.name}: {c.a} vs {c.b}", err=True)
    if result.failed:
        raise typer.Exit(1)


def check_outputs(output: Optional[pathlib.Path], csv_dir: Optional[pathlib.Path]) -> None:
    """Exit 2 unless a workbook (.xlsx), a CSV folder or both were asked for."""
    if output is None and csv_dir is None:
        usage("give -o WORKBOOK.xlsx, --csv-dir DIR, or both")
    if output is not None and output.suffix.lower() != ".xlsx":
        usage(f"-o {output}: the workbook name must end in .xlsx")


def usage(message: str) -> None:
    """Report a usage problem and exit 2."""
    typer.echo(f"error: {message}", err=True)
    raise typer.Exit(2)


def main(argv: Optional[list[str]] = None) -> None:
    """Entry point of the console script.

    An unexpected exception is a bug in grantval: it is reported in one line
    (exit code 70) instead of a traceback, unless GRANTVAL_DEBUG=1.
    """
    import os

    try:
        app(args=argv, prog_name="grantval")
    except GrantvalError as err:
        typer.echo(f"error: {err}", err=True)
        sys.exit(err.exit_code)
    except Exception as exc:  # noqa: BLE001 - the last line of defence
        if os.environ.get("GRANTVAL_DEBUG") == "1":
            raise
        typer.echo(f"internal error (a bug in grantval; please report it with the input that caused it): "
                   f"{type(exc).__name__}: {exc}", err=True)
        sys.exit(70)


if __name__ == "__main__":  # pragma: no cover
    main(sys.argv[1:])
