"""``assumptions``: valuation assumptions per grant date derived from market data."""

from __future__ import annotations

import pathlib

from grantval.io.csv import write_csv
from grantval.io.files import refuse_overwriting_inputs
from grantval.io.xlsx.sheet import Sheet
from grantval.io.xlsx.write import write_workbook


def assumptions(prices, curve, *, ledger=None, dates=None, dividends=None, peers=None, **options):
    """Derive an assumptions table from market data; see :mod:`grantval.market.derive`.

    ``options`` are the fields of :class:`grantval.market.derive.MarketOptions`.
    """
    from grantval.market.derive import MarketOptions, derive_assumptions

    return derive_assumptions(prices, curve, dates=dates, ledger=ledger, dividends=dividends, peers=peers,
                              options=MarketOptions(**options))


def peer_tables(prices, ledger, *, dividends=None, peer_sets=None, **options):
    """Derive the ledger tables ``peers`` and ``correlations`` of ``ledger``'s peer sets from daily closes.

    See :mod:`grantval.market.peer_tables`; ``options`` are the fields of
    :class:`grantval.market.derive.MarketOptions` (``ticker``, ``max_gap_days``,
    ``allow_short_history``, ``peer_dates``).
    """
    from grantval.market.derive import MarketOptions
    from grantval.market.peer_tables import derive_peer_tables

    return derive_peer_tables(prices, ledger, dividends=dividends, peer_sets=peer_sets,
                              options=MarketOptions(**options))


def write_peer_tables(tables, folder, inputs: list[str], ledger=None) -> list[pathlib.Path]:
    """Write ``peers.csv`` and ``correlations.csv`` into ``folder`` (none may replace an input)."""
    folder = pathlib.Path(folder)
    outputs = [folder / "peers.csv", folder / "correlations.csv"]
    refuse_overwriting_inputs(outputs, list(inputs) + _ledger_files(ledger))
    write_csv(outputs[0], tables.peers)
    write_csv(outputs[1], tables.correlations)
    return outputs


def _ledger_files(ledger) -> list[str]:
    """The ledger location and, for a folder, every file in it (none may be replaced by an output)."""
    if ledger is None:
        return []
    path = pathlib.Path(ledger)
    return [str(path)] + ([str(p) for p in sorted(path.iterdir()) if p.is_file()] if path.is_dir() else [])


def write_assumptions(derived, csv_path: pathlib.Path, xlsx: pathlib.Path | None, inputs: list[str],
                      command: str = "", timestamp: bool = True, ledger=None, peers=None) -> list[pathlib.Path]:
    """Write the derived assumptions as CSV (a ledger ``assumptions`` table) and optionally a workbook.

    ``inputs`` are the market-data files read; with ``ledger`` (the ledger the grant
    dates came from) its files are inputs too, and no output may replace any input.
    ``peers`` (the result of :func:`peer_tables`) adds its two tables to the workbook.
    """
    from grantval.io.tables import sha256_of
    from grantval.reporting.notes import MARKET_NOTES
    from grantval.market.peer_tables import PEER_NOTES
    from grantval.reporting.run_sheet import RunInfo, notes_sheet, run_sheet

    outputs = [pathlib.Path(csv_path)] + ([pathlib.Path(xlsx)] if xlsx is not None else [])
    refuse_overwriting_inputs(outputs, list(inputs) + _ledger_files(ledger))
    write_csv(pathlib.Path(csv_path), derived.table)
    if xlsx is not None:
        info = RunInfo("grantval assumptions: valuation assumptions from market data", command or "(Python API)",
                       "", [(p, sha256_of(pathlib.Path(p))) for p in inputs], [],
                       list(derived.notes) + (list(peers.notes) if peers is not None else []), timestamp)
        fmts = {"share_price": "#,##0.00", "volatility": "0.00%", "risk_free_rate": "0.000%", "dividend_yield": "0.00%",
                "expected_term_years": "0.0000"}
        sheets = [run_sheet(info, info.workbook_time()), Sheet("assumptions", frame=derived.table, formats=fmts)]
        if peers is not None:
            sheets += [Sheet("peers", frame=peers.peers, formats={"volatility": "0.00%", "dividend_yield": "0.00%"}),
                       Sheet("correlations", frame=peers.correlations, formats={"correlation": "0.0000"})]
        sheets.append(notes_sheet(MARKET_NOTES + (PEER_NOTES if peers is not None else []), []))
        write_workbook(pathlib.Path(xlsx), sheets, fixed_time=info.workbook_time(), footer=info.footer())
    return outputs
