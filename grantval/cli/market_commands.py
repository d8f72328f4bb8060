"""``grantval assumptions``: valuation assumptions from market data."""

from __future__ import annotations

import enum
import pathlib
from typing import Annotated, List, Optional

import typer

from grantval.cli.app import app, command_line, echo_outputs, output_set, say, usage, writing
from grantval.cli.options import CurveUnits, Frequency, NoTimestamp

Path = pathlib.Path
PEER_FILES = ["peers.csv", "correlations.csv"]


class PeerDates(str, enum.Enum):
    pairwise = "pairwise"
    common = "common"


PeerTablesOption = Annotated[Optional[Path], typer.Option(
    "--peer-tables", metavar="DIR", help="Also derive the ledger's peer sets from PRICES (daily closes of the "
    "company and of every peer_id): write DIR/peers.csv and DIR/correlations.csv.")]
PeerSetOption = Annotated[Optional[List[str]], typer.Option(
    "--peer-set", metavar="NAME", help="With --peer-tables: only this peer set (repeatable).")]
PeerDatesOption = Annotated[PeerDates, typer.Option(
    "--peer-dates", help="Correlation dates: pairwise (both members have a close) or common (all do).")]


def _lookback(text: str):
    """``expected-term``, ``contractual-term`` or a positive number of years."""
    if text in ("expected-term", "contractual-term"):
        return text
    try:
        years = float(text)
    except ValueError:
        usage(f"--lookback {text!r}: write expected-term, contractual-term or a number of years")
    if not years > 0:
        usage("--lookback must be a positive number of years")
    return years


@app.command("assumptions")
def assumptions_cmd(
    prices: Annotated[Path, typer.Option("--prices", metavar="PATH", help="CSV: date, close[, ticker].")],
    curve: Annotated[Path, typer.Option("--curve", metavar="PATH",
                                        help="CSV: date, then one column per tenor (1m, 3m, 1y, 10y...).")],
    output: Annotated[Path, typer.Option("-o", "--output", metavar="PATH", help="assumptions CSV to write.")],
    dividends: Annotated[Optional[Path], typer.Option("--dividends", metavar="PATH",
                                                      help="CSV: ex_date, amount[, ticker].")] = None,
    peers: Annotated[Optional[Path], typer.Option("--peers", metavar="PATH",
                                                  help="CSV: ticker, weight (peer-group volatility).")] = None,
    ledger: Annotated[Optional[Path], typer.Option("--ledger", metavar="LEDGER",
                                                   help="Take the grant dates and terms from this ledger.")] = None,
    dates: Annotated[Optional[str], typer.Option("--dates", metavar="DATE,...",
                                                 help="Or: grant dates, comma-separated.")] = None,
    lookback: Annotated[str, typer.Option("--lookback", metavar="expected-term|contractual-term|YEARS",
                                          help="Volatility lookback.")] = "expected-term",
    frequency: Annotated[Frequency, typer.Option("--frequency", help="Return frequency.")] = Frequency.daily,
    ticker: Annotated[Optional[str], typer.Option("--ticker", metavar="TICKER",
                                                  help="The company's ticker when PRICES holds several.")] = None,
    peer_weight: Annotated[float, typer.Option("--peer-weight", metavar="WEIGHT",
                                               help="Weight of the peer volatility in the blend (0-1).")] = 0.5,
    max_gap_days: Annotated[int, typer.Option("--max-gap-days", metavar="DAYS",
                                              help="Longest gap allowed between closes, days.")] = 7,
    curve_units: Annotated[CurveUnits, typer.Option("--curve-units", help="Units of the curve's yields.")]
    = CurveUnits.auto,
    curve_fallback: Annotated[bool, typer.Option(
        "--curve-fallback", help="Use the nearest earlier curve date when a grant date has none.")] = False,
    allow_short_history: Annotated[bool, typer.Option(
        "--allow-short-history", help="Accept (and flag) a lookback longer than the history.")] = False,
    expected_term: Annotated[Optional[float], typer.Option(
        "--expected-term", metavar="YEARS", help="With --dates: expected term, years.")] = None,
    contractual_term: Annotated[Optional[float], typer.Option(
        "--contractual-term", metavar="YEARS", help="With --dates: contractual term, years.")] = None,
    xlsx: Annotated[Optional[Path], typer.Option("--xlsx", metavar="PATH", help="Also write a workbook.")] = None,
    peer_tables: PeerTablesOption = None,
    peer_set: PeerSetOption = None,
    peer_dates: PeerDatesOption = PeerDates.pairwise,
    no_timestamp: NoTimestamp = False,
) -> None:
    """Derive share price, volatility, risk-free rate and dividend yield per grant date, with provenance."""
    from grantval import api

    if (ledger is None) == (dates is None):
        usage("give either --ledger LEDGER or --dates DATE,...")
    _check_peer_options(peer_tables, peer_set, ledger)
    plan_cm = output_set({"-o": output, "--xlsx": xlsx}, {"--peer-tables": (peer_tables, PEER_FILES)},
                         inputs=[prices, curve, dividends, peers, ledger], ledgers=[ledger],
                         timestamp=not no_timestamp)
    with plan_cm as plan:
        derived = _derive(api, prices, curve, ledger, dates, dividends, peers, lookback, frequency, ticker, peer_weight,
                          max_gap_days, curve_units, curve_fallback, allow_short_history, expected_term,
                          contractual_term)
        derived_peers = _derive_peers(api, peer_tables, prices, ledger, dividends, peer_set, ticker, max_gap_days,
                                      allow_short_history, peer_dates)
        inputs = [str(p) for p in (prices, curve, dividends, peers) if p is not None]
        with writing(plan):
            written = api.write_assumptions(derived, output, xlsx, inputs, command=command_line(),
                                            timestamp=not no_timestamp, ledger=ledger, peers=derived_peers)
            if derived_peers is not None:
                written += api.write_peer_tables(derived_peers, peer_tables, inputs, ledger=ledger)
    say(f"{len(derived.table)} grant dates")
    if derived_peers is not None:
        say(f"peer sets derived: {dict(derived_peers.notes)['peer sets derived']}")
        for line in derived_peers.warnings:
            typer.echo(f"warning: {line}", err=True)
    echo_outputs(written)


def _check_peer_options(peer_tables, peer_set, ledger) -> None:
    if peer_tables is None and peer_set:
        usage("--peer-set needs --peer-tables DIR")
    if peer_tables is not None and ledger is None:
        usage("--peer-tables needs --ledger LEDGER (the peer sets and market conditions are read from it)")


def _derive_peers(api, peer_tables, prices, ledger, dividends, peer_set, ticker, max_gap_days, allow_short_history,
                  peer_dates):
    """The derived peer tables, or None without --peer-tables."""
    if peer_tables is None:
        return None
    return api.peer_tables(prices, ledger, dividends=dividends, peer_sets=peer_set, ticker=ticker,
                           max_gap_days=max_gap_days, allow_short_history=allow_short_history,
                           peer_dates=peer_dates.value)


def _derive(api, prices, curve, ledger, dates, dividends, peers, lookback, frequency, ticker, peer_weight,
            max_gap_days, curve_units, curve_fallback, allow_short_history, expected_term, contractual_term):
    """Call the API with the command's options."""
    return api.assumptions(
        prices, curve, ledger=ledger, dates=None if dates is None else dates.split(","), dividends=dividends,
        peers=peers, lookback=_lookback(lookback), frequency=frequency.value, ticker=ticker, peer_weight=peer_weight,
        max_gap_days=max_gap_days, curve_units=curve_units.value, curve_fallback=curve_fallback,
        allow_short_history=allow_short_history, expected_term=expected_term, contractual_term=contractual_term)
