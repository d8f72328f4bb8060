"""Deriving an assumptions table from market files (invented data)."""

import csv
import pathlib
import shutil

import numpy as np
import pytest

from grantval import api
from grantval.errors import LedgerError, UsageError
from grantval.market.derive import MarketOptions, derive_assumptions
from grantval.pricing import bsm_value
from tests.factory import tables, write_ledger

MARKET = pathlib.Path(__file__).resolve().parents[2] / "sample_grants" / "market"
SAMPLE = MARKET.parent


def _derive(**kw):
    opts = {k: kw.pop(k) for k in list(kw) if k in MarketOptions.__dataclass_fields__}
    opts.setdefault("ticker", "CRVN")
    return derive_assumptions(MARKET / "prices.csv", MARKET / "curve.csv", dividends=MARKET / "dividends.csv",
                              options=MarketOptions(**opts), **kw)


def test_sample_dates_and_provenance():
    d = _derive(ledger=SAMPLE).table
    assert len(d) == 12  # 11 grant dates and the named set exec-2025 kept from the ledger
    assert list(d["assumption_set"].fillna(""))[-1] == "exec-2025"
    row = d.iloc[0]
    assert row["share_price"] == 18.40 and row["source_price_note"] == "close on the grant date"
    assert row["source_return_count"] > 1000 and row["source_lookback_end"] == "2024-02-15"
    assert row["source_curve_units"] == "percent"
    par = row["source_par_yield"]
    assert row["risk_free_rate"] == pytest.approx(2 * np.log1p(par / 2))
    lo, hi = row["source_yield_low"], row["source_yield_high"]
    assert min(lo, hi) <= par <= max(lo, hi)


def test_volatility_matches_a_direct_computation():
    d = _derive(dates=["2026-05-15"], lookback=2.0, expected_term=6.0).table
    with open(MARKET / "prices.csv") as fh:
        rows = [r for r in csv.DictReader(fh) if r["ticker"] == "CRVN"]
    days = np.array([np.datetime64(r["date"]) for r in rows])
    close = np.array([float(r["close"]) for r in rows])
    start = np.datetime64("2026-05-15") - int(round(2.0 * 365.25))
    m = (days >= start) & (days <= np.datetime64("2026-05-15"))
    ret = np.diff(np.log(close[m]))
    assert d["volatility"].iloc[0] == pytest.approx(np.std(ret, ddof=1) * np.sqrt(252), rel=1e-12)
    assert d["source_return_count"].iloc[0] == ret.size


def test_previous_close_is_flagged_and_dividends_counted():
    d = _derive(dates=["2026-11-28"], lookback=1.0, expected_term=5.0, curve_fallback=True).table
    assert d["source_price_note"].iloc[0].startswith("last close before")
    assert d["source_dividends_counted"].iloc[0] == 4
    assert d["dividend_yield"].iloc[0] == pytest.approx(0.20 / d["share_price"].iloc[0])


def test_output_is_accepted_unchanged_as_the_assumptions_table(tmp_path):
    data = tables()
    data["grants"][2]["assumption_set"] = ""
    data["grants"][2]["grant_date"] = "2026-05-15"
    data["grants"][2]["expiration_date"] = "2036-05-15"
    for g in data["grants"][:2]:
        g["grant_date"] = "2026-02-17"
        if g["expiration_date"]:
            g["expiration_date"] = "2036-02-17"
    del data["assumptions"]
    ledger = write_ledger(tmp_path / "l", data)
    derived = _derive(ledger=ledger)
    api.write_assumptions(derived, ledger / "assumptions.csv", None, [])
    report = api.check(ledger)
    assert report.ok and not report.warnings, [str(p) for p in report.problems]
    run = api.value(ledger)
    t = run.fair_values.table.set_index("grant_id")
    a = derived.table.set_index("grant_date")
    r = a.loc["2026-05-15"]
    expected = bsm_value(r["share_price"], 12.0, t.at["G3", "expected_term_years"], r["risk_free_rate"],
                         r["volatility"], r["dividend_yield"])
    assert t.at["G3", "fair_value_per_unit"] == pytest.approx(expected, rel=1e-12)


def _copy_market(tmp_path, edit=None, name="prices.csv"):
    folder = tmp_path / "m"
    shutil.copytree(MARKET, folder)
    if edit:
        path = folder / name
        lines = path.read_text().splitlines()
        lines = edit(lines)
        path.write_text("\n".join(lines) + "\n")
    return folder


def _errors(folder, **kw):
    opts = dict(ticker="CRVN", lookback=2.0, expected_term=6.0)
    opts.update(kw)
    with pytest.raises(LedgerError) as err:
        derive_assumptions(folder / "prices.csv", folder / "curve.csv", dates=["2026-05-15"],
                           options=MarketOptions(**opts))
    return err.value.problems


def test_non_positive_price_is_an_error(tmp_path):
    folder = _copy_market(tmp_path, lambda ls: ls[:100] + [ls[100].rsplit(",", 1)[0] + ",0"] + ls[101:])
    assert any(p.row == 101 and p.column == "close" and "greater than zero" in p.message for p in _errors(folder))


def test_gap_in_prices_is_an_error(tmp_path):
    folder = _copy_market(tmp_path, lambda ls: ls[:200] + ls[215:])
    assert any(p.column == "date" and "days since the previous close" in p.message for p in _errors(folder))


def test_missing_curve_date_needs_fallback(tmp_path):
    folder = _copy_market(tmp_path, lambda ls: [l for l in ls if not l.startswith("2026-05-15")], "curve.csv")
    assert any("no curve row for 2026-05-15" in p.message for p in _errors(folder))
    d = derive_assumptions(folder / "prices.csv", folder / "curve.csv", dates=["2026-05-15"],
                           options=MarketOptions(ticker="CRVN", lookback=2.0, expected_term=6.0, curve_fallback=True))
    assert d.table["source_curve_date"].iloc[0] < "2026-05-15"


def test_short_history_error_or_flag():
    with pytest.raises(LedgerError, match="allow-short-history"):
        _derive(dates=["2014-01-10"], lookback=5.0, expected_term=5.0, curve_fallback=True)


def test_ambiguous_curve_units_are_refused(tmp_path):
    folder = _copy_market(tmp_path, lambda ls: [ls[0]] + [l.split(",")[0] + "," + ",".join(["0.5"] * 11)
                                                          for l in ls[1:]], "curve.csv")
    assert any("percent or decimals" in p.message for p in _errors(folder))


def test_usage_errors():
    with pytest.raises(UsageError, match="either"):
        derive_assumptions(MARKET / "prices.csv", MARKET / "curve.csv")
    with pytest.raises(UsageError, match="--expected-term"):
        _derive(dates=["2026-05-15"])


def test_ledger_mode_keeps_named_sets_so_the_table_is_accepted_unchanged(tmp_path):
    # close-ready issue, item 9: the demo's named set exec-2025 was dropped, so the derived table could
    # not replace the ledger's assumptions; now it keeps it and the ledger checks clean (common practice)
    import shutil

    from grantval.io.csv import write_csv

    sample = pathlib.Path(__file__).resolve().parents[2] / "sample_grants"
    derived = api.assumptions(sample / "market" / "prices.csv", sample / "market" / "curve.csv",
                              ledger=sample, dividends=sample / "market" / "dividends.csv", ticker="CRVN")
    assert "exec-2025" in set(derived.table["assumption_set"])
    ledger = tmp_path / "l"
    shutil.copytree(sample, ledger, ignore=shutil.ignore_patterns("*.xlsx", "*.py", "market"))
    write_csv(ledger / "assumptions.csv", derived.table)
    report = api.check(ledger)
    assert report.ok, report.errors


def test_missing_ticker_names_the_tickers_found():
    sample = pathlib.Path(__file__).resolve().parents[2] / "sample_grants"
    with pytest.raises(LedgerError) as info:
        api.assumptions(sample / "market" / "prices.csv", sample / "market" / "curve.csv", ledger=sample)
    assert "name the company's own with --ticker" in str(info.value.problems[0])
