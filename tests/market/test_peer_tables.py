"""Deriving the ledger tables peers and correlations from daily closes (assumptions --peer-tables).

Outside values: a hand computation on a tiny series (exact), an independent pandas
computation and the known parameters of a seeded correlated GBM (within sampling error).
"""

import csv
import math
import pathlib

import numpy as np
import pandas as pd
import pytest
from typer.testing import CliRunner

from grantval import api
from grantval.cli.app import app
from grantval.errors import LedgerError, UsageError
from grantval.market.derive import MarketOptions
from grantval.market.peer_tables import derive_peer_tables
from tests.factory import tables, write_ledger

MARKET = pathlib.Path(__file__).resolve().parents[2] / "sample_grants" / "market"
CURVE = "25:0.5;50:1;75:2"


def _prices(path: pathlib.Path, closes: dict[str, dict[str, float]]) -> pathlib.Path:
    """A long prices file date,ticker,close; closes written with every digit (repr)."""
    with open(path, "w", newline="") as fh:
        w = csv.writer(fh, lineterminator="\n")
        w.writerow(["date", "ticker", "close"])
        for t, by_day in closes.items():
            w.writerows([[d, t, repr(c)] for d, c in by_day.items()])
    return path


def _ledger(folder, sets: dict[str, list[str]], conditions: list[tuple[str, str, str, str]], grants=None):
    """A factory ledger with market_conditions (condition_set, start, end, peer_set) and peers members only."""
    data = tables(
        market_conditions=[{"condition_set": c, "metric": "relative_tsr", "start_date": s, "end_date": e,
                            "peer_set": ps, "payout_curve": CURVE} for c, s, e, ps in conditions],
        peers=[{"peer_set": ps, "peer_id": p, "volatility": "", "dividend_yield": ""}
               for ps, members in sets.items() for p in members])
    if grants:
        for g, (gd, cs) in zip(data["grants"], grants):
            g["grant_date"], g["condition_set"] = gd, cs
    return write_ledger(folder, data)


# ------------------------------------------------------------------ hand computation on five days

HAND_DAYS = ["2026-01-05", "2026-01-06", "2026-01-07", "2026-01-08", "2026-01-09"]
#: log prices: self returns 0.01, -0.01, 0.02, 0.00; PEERA 0.02, 0.00, 0.01, -0.01;
#: PEERB has no close on 2026-01-07, its returns are 0.01, -0.03 (two days), 0.02
HAND_LOG = {"CO": [0, 0.01, 0.00, 0.02, 0.02], "PEERA": [0, 0.02, 0.02, 0.03, 0.02],
            "PEERB": [0, 0.01, None, -0.02, 0.00]}


def _hand_case(tmp_path, **opts):
    closes = {t: {d: 100 * math.exp(x) for d, x in zip(HAND_DAYS, xs) if x is not None} for t, xs in HAND_LOG.items()}
    prices = _prices(tmp_path / "prices.csv", closes)
    ledger = _ledger(tmp_path / "l", {"hand": ["PEERA", "PEERB"]}, [("c1", "2026-01-09", "2026-01-13", "hand")])
    return derive_peer_tables(prices, ledger, options=MarketOptions(ticker="CO", **opts), **{})


def test_hand_computation_on_a_tiny_series(tmp_path):
    # By hand (common practice: sample standard deviation, ddof 1, times sqrt(252); sample correlation):
    # PEERA: deviations from the mean 0.005 are 0.015, -0.005, 0.005, -0.015, sum of squares 0.0005,
    #   variance 0.0005/3, annualised 0.0005/3*252 = 0.042: volatility sqrt(0.042).
    # PEERB: returns 0.01, -0.03, 0.02 (mean 0), sum of squares 0.0014, variance 0.0007, 0.1764 a year: 0.42.
    # self/PEERA (all five dates): cross products 4 x 0.000075 = 0.0003 over sqrt(0.0005 x 0.0005): 0.6.
    # self/PEERB on the four common dates: self's returns 0.01, 0.01, 0.00 (deviations 1, 1, -2 / 300),
    #   PEERB's 0.01, -0.03, 0.02: covariance sum -0.06/300, squares 6/90000 and 0.0014: -sqrt(3/7).
    # PEERA/PEERB: PEERA's returns 0.02, 0.01, -0.01 (deviations 4, 1, -5 / 300): sum -9/30000,
    #   squares 42/90000 and 0.0014: -sqrt(27/196).
    t = _hand_case(tmp_path)
    p = t.peers.set_index("peer_id")
    assert p.at["PEERA", "volatility"] == pytest.approx(math.sqrt(0.042), rel=1e-12)
    assert p.at["PEERB", "volatility"] == pytest.approx(0.42, rel=1e-12)
    assert p.at["PEERB", "source_return_count"] == 3 and p.at["PEERA", "source_return_count"] == 4
    assert p.at["PEERB", "source_missing_dates"] == 1 and p.at["PEERB", "source_missing_listed"] == "2026-01-07"
    assert p.at["PEERA", "source_first_date"] == "2026-01-05" and p.at["PEERA", "source_last_date"] == "2026-01-09"
    c = t.correlations.set_index(["first", "second"])["correlation"]
    assert c[("self", "PEERA")] == pytest.approx(0.6, rel=1e-12)
    assert c[("self", "PEERB")] == pytest.approx(-math.sqrt(3 / 7), rel=1e-12)
    assert c[("PEERA", "PEERB")] == pytest.approx(-math.sqrt(27 / 196), rel=1e-12)
    skipped = t.correlations.set_index(["first", "second"])["source_dates_skipped"]
    assert skipped[("self", "PEERA")] == 0 and skipped[("self", "PEERB")] == 1
    assert set(t.correlations["source_valuation_date"]) == {"2026-01-09"}
    assert t.warnings == ["peer set hand: PEERB has no close on 1 of the 5 dates of the lookback (2026-01-07); "
                          "its correlations use the dates both have (source_dates_skipped)"]


def test_common_dates_by_hand(tmp_path):
    # --peer-dates common drops 2026-01-07 for every pair: self 0.01, 0.01, 0.00 and PEERA 0.02, 0.01, -0.01,
    # deviations (1, 1, -2) and (4, 1, -5) / 300: 15 / sqrt(6 x 42) (by hand).
    c = _hand_case(tmp_path, peer_dates="common").correlations.set_index(["first", "second"])["correlation"]
    assert c[("self", "PEERA")] == pytest.approx(15 / math.sqrt(252), rel=1e-12)
    assert c[("self", "PEERB")] == pytest.approx(-math.sqrt(3 / 7), rel=1e-12)


def test_peer_dividend_yield_trailing_twelve_months(tmp_path):
    t = _hand_case(tmp_path)
    divs = tmp_path / "dividends.csv"
    divs.write_text("ex_date,ticker,amount\n2024-12-01,PEERA,1.0\n2025-06-01,PEERA,0.5\n2026-01-02,PEERA,0.5\n")
    ledger = tmp_path / "l"
    d = derive_peer_tables(tmp_path / "prices.csv", ledger, dividends=divs, options=MarketOptions(ticker="CO"))
    p = d.peers.set_index("peer_id")
    # ex-dates in the 365 days up to 2026-01-09: 0.5 + 0.5, over PEERA's close 100 e^0.02 (by hand)
    assert p.at["PEERA", "dividend_yield"] == pytest.approx(1.0 / (100 * math.exp(0.02)), rel=1e-12)
    assert p.at["PEERA", "source_dividends_counted"] == 2 and p.at["PEERB", "dividend_yield"] == 0
    assert t.peers["dividend_yield"].isna().all()  # without a dividends file the ledger's (blank) value is kept
    assert t.peers["source_dividend_note"].str.contains("ledger's value kept").all()


# ------------------------------------------------------------------ seeded GBM with known parameters

VOLS = np.array([0.30, 0.25, 0.40, 0.55])           # self, P1, P2, P3
RHO = np.array([[1.0, 0.5, 0.3, 0.1], [0.5, 1.0, 0.4, 0.2], [0.3, 0.4, 1.0, -0.2], [0.1, 0.2, -0.2, 1.0]])
TICKERS = ["CO", "P1", "P2", "P3"]


def _gbm(tmp_path, years=8):
    rng = np.random.default_rng(20261202)
    days = np.arange(np.datetime64("2018-01-01"), np.datetime64("2018-01-01") + int(years * 365.25))
    days = days[np.is_busday(days)]
    z = rng.standard_normal((days.size - 1, 4)) @ np.linalg.cholesky(RHO).T
    dt = 1 / 252
    logp = np.log(50.0) + np.vstack([np.zeros(4), np.cumsum((0.05 - VOLS ** 2 / 2) * dt + VOLS * np.sqrt(dt) * z, 0)])
    closes = {t: {str(d): float(np.exp(x)) for d, x in zip(days, logp[:, i])} for i, t in enumerate(TICKERS)}
    return _prices(tmp_path / "gbm.csv", closes)


def test_gbm_against_pandas_and_the_known_parameters(tmp_path):
    prices = _gbm(tmp_path)
    # a 6-year performance period valued on its start date 2025-12-01: lookback from 2019-12-01
    ledger = _ledger(tmp_path / "l", {"gbm": TICKERS[1:]}, [("c", "2025-12-01", "2031-12-01", "gbm")])
    t = derive_peer_tables(prices, ledger, options=MarketOptions(ticker="CO"))
    # independent computation with pandas (pandas.DataFrame.pivot, .diff, .std, .corr)
    f = pd.read_csv(prices, parse_dates=["date"]).pivot(index="date", columns="ticker", values="close")
    start = pd.Timestamp("2025-12-01") - pd.Timedelta(days=(pd.Timestamp("2031-12-01") - pd.Timestamp("2025-12-01")).days)
    r = np.log(f.loc[start:"2025-12-01"]).diff().dropna()
    want_vol = r.std(ddof=1) * np.sqrt(252)
    want_cor = r.corr()
    n = len(r)
    p = t.peers.set_index("peer_id")
    c = t.correlations.assign(first=lambda x: x["first"].replace("self", "CO")).set_index(["first", "second"])
    for i, tk in enumerate(TICKERS):
        if i:
            assert p.at[tk, "volatility"] == pytest.approx(want_vol[tk], rel=1e-12)
            assert p.at[tk, "source_return_count"] == n
            # sampling error of a volatility estimate: sigma / sqrt(2n) (normal returns; common practice)
            assert abs(p.at[tk, "volatility"] - VOLS[i]) < 4 * VOLS[i] / math.sqrt(2 * n)
        for j in range(i + 1, 4):
            got = c.at[(tk, TICKERS[j]), "correlation"]
            assert got == pytest.approx(want_cor.at[tk, TICKERS[j]], rel=1e-12, abs=1e-14)
            # sampling error of a correlation: (1 - rho^2) / sqrt(n) (Fisher; from memory)
            assert abs(got - RHO[i, j]) < 4 * (1 - RHO[i, j] ** 2) / math.sqrt(n)
    assert n > 1400 and set(t.correlations["source_return_count"]) == {n}


def test_derived_tables_pass_the_ledger_check_unchanged(tmp_path):
    sectors = ["PEERA", "PEERB", "PEERC", "PEERD", "PEERE", "PEERF"]
    ledger = _ledger(tmp_path / "l", {"sector_peers": sectors}, [("tsr", "2026-06-01", "2029-06-01", "sector_peers")])
    before = api.check(ledger)
    assert not before.ok  # the members alone (blank volatilities, no correlations) are refused
    t = api.peer_tables(MARKET / "prices.csv", ledger, ticker="CRVN")
    (tmp_path / "derived").mkdir()
    api.write_peer_tables(t, tmp_path / "derived", [])
    for name in ("peers.csv", "correlations.csv"):
        (ledger / name).write_bytes((tmp_path / "derived" / name).read_bytes())
    report = api.check(ledger)
    assert report.ok and not report.warnings, [str(p) for p in report.problems]
    assert len(t.correlations) == 21 and list(t.peers["peer_id"]) == sectors
    assert set(t.peers["source_lookback_days"]) == {(pd.Timestamp("2029-06-01") - pd.Timestamp("2026-06-01")).days}


def test_the_valuation_date_is_the_grant_date_of_the_grants_on_the_condition(tmp_path):
    ledger = _ledger(tmp_path / "l", {"sp": ["PEERA"]}, [("tsr", "2026-03-01", "2029-03-01", "sp")],
                     grants=[("2026-02-17", "tsr"), ("2026-02-17", "tsr")])
    t = api.peer_tables(MARKET / "prices.csv", ledger, ticker="CRVN")
    row = t.peers.iloc[0]
    assert row["source_valuation_date"] == "2026-02-17" and row["source_last_date"] == "2026-02-17"
    assert row["source_valuation_basis"] == "grant date of G1, G2 (condition tsr)"
    assert row["source_first_date"] >= str(np.datetime64("2026-02-17") - 1096)


def test_several_valuation_dates_for_one_peer_set_are_refused(tmp_path):
    ledger = _ledger(tmp_path / "l", {"sp": ["PEERA"]}, [("tsr", "2026-03-01", "2029-03-01", "sp")],
                     grants=[("2026-02-17", "tsr"), ("2026-05-15", "tsr")])
    with pytest.raises(LedgerError) as err:
        api.peer_tables(MARKET / "prices.csv", ledger, ticker="CRVN")
    assert "several valuation dates" in str(err.value) and "G1" in str(err.value) and "G2" in str(err.value)


def test_lookback_longer_than_the_data_names_the_ticker_and_its_dates(tmp_path):
    ledger = _ledger(tmp_path / "l", {"sp": ["PEERA"]}, [("tsr", "2021-01-04", "2024-01-04", "sp")])
    with pytest.raises(LedgerError) as err:
        api.peer_tables(MARKET / "prices.csv", ledger, ticker="CRVN")
    msg = [str(p) for p in err.value.problems]
    assert any("PEERA:" in m and "from 2018-01-05 to 2021-01-04" in m and "from 2020-01-02 to 2026-11-30" in m for m in msg), msg
    t = api.peer_tables(MARKET / "prices.csv", ledger, ticker="CRVN", allow_short_history=True)
    assert t.peers["source_short_history"].iloc[0] == "yes"


def test_valuation_date_after_the_closes_is_refused(tmp_path):
    ledger = _ledger(tmp_path / "l", {"sp": ["PEERA"]}, [("tsr", "2027-03-01", "2030-03-01", "sp")])
    with pytest.raises(LedgerError, match="no close in the 7 days .* up to the valuation date 2027-03-01"):
        api.peer_tables(MARKET / "prices.csv", ledger, ticker="CRVN")


def test_bad_inputs_name_file_row_and_column(tmp_path):
    closes = {t: {d: 100 * math.exp(x) for d, x in zip(HAND_DAYS, xs) if x is not None} for t, xs in HAND_LOG.items()}
    prices = _prices(tmp_path / "prices.csv", closes)
    lines = prices.read_text().splitlines()
    lines[3] = lines[3].rsplit(",", 1)[0] + ","  # a blank close on row 4
    prices.write_text("\n".join(lines) + "\n")
    ledger = _ledger(tmp_path / "l", {"hand": ["PEERA", "PEERX"]}, [("c1", "2026-01-09", "2026-01-13", "hand")])
    with pytest.raises(LedgerError) as err:
        derive_peer_tables(prices, ledger, options=MarketOptions(ticker="CO"))
    got = {(p.source, p.row, p.column) for p in err.value.problems}
    assert ("prices.csv", 4, "close") in got
    assert ("peers.csv", 3, "peer_id") in got  # PEERX has no closes
    assert any("'PEERX' has no closes in prices.csv" in str(p) for p in err.value.problems)


def test_pairwise_deletion_that_breaks_semi_definiteness_is_refused(tmp_path):
    # every third business day one of A, B, C has no close, so each pair sees its own dates:
    # A and B move together on theirs, B and C too, but A and C opposite: no correlation matrix does that
    days = np.arange(np.datetime64("2025-01-06"), np.datetime64("2026-01-06"))
    days = [str(d) for d in days[np.is_busday(days)]]
    rng = np.random.default_rng(3)
    walk = {k: np.cumsum(rng.normal(0, 0.02, len(days))) for k in "xyz"}
    kinds = np.arange(len(days)) % 3   # 0: C missing, 1: A missing, 2: B missing
    closes = {"CO": {d: 100 * math.exp(rng.normal(0, 0.01)) for d in days}, "A": {}, "B": {}, "C": {}}
    for i, d in enumerate(days):
        if kinds[i] == 0:
            closes["A"][d] = closes["B"][d] = 100 * math.exp(walk["x"][i])
        elif kinds[i] == 1:
            closes["B"][d] = closes["C"][d] = 100 * math.exp(walk["y"][i])
        else:
            closes["A"][d], closes["C"][d] = 100 * math.exp(walk["z"][i]), 100 * math.exp(-walk["z"][i])
    prices = _prices(tmp_path / "prices.csv", closes)
    ledger = _ledger(tmp_path / "l", {"odd": ["A", "B", "C"]}, [("c", "2026-01-05", "2026-07-05", "odd")])
    with pytest.raises(LedgerError) as err:
        derive_peer_tables(prices, ledger, options=MarketOptions(ticker="CO"))
    msg = str(err.value)
    assert "not positive semi-definite" in msg and "--peer-dates common" in msg and "A misses" in msg
    with pytest.raises(LedgerError, match="common daily returns"):  # no date has all three: said so
        derive_peer_tables(prices, ledger, options=MarketOptions(ticker="CO", peer_dates="common"))


def test_other_peer_sets_are_kept_unchanged_and_selection(tmp_path):
    ledger = _ledger(tmp_path / "l", {"sp": ["PEERA", "PEERB"], "unused": ["PEERC"]},
                     [("tsr", "2026-06-01", "2029-06-01", "sp")])
    (ledger / "peers.csv").write_text((ledger / "peers.csv").read_text().replace("unused,PEERC,,", "unused,PEERC,0.3,0"))
    t = api.peer_tables(MARKET / "prices.csv", ledger, ticker="CRVN")
    kept = t.peers[t.peers["peer_set"] == "unused"].iloc[0]
    assert kept["volatility"] == "0.3" and "kept from the ledger unchanged" in kept["source_note"]
    only = api.peer_tables(MARKET / "prices.csv", ledger, ticker="CRVN", peer_sets=["sp"])
    assert list(only.peers["peer_set"]) == ["sp", "sp", "unused"]
    with pytest.raises(UsageError, match="'nope' not in the ledger's peers table"):
        api.peer_tables(MARKET / "prices.csv", ledger, ticker="CRVN", peer_sets=["nope"])
    with pytest.raises(LedgerError, match="no market condition uses peer set 'unused'"):
        api.peer_tables(MARKET / "prices.csv", ledger, ticker="CRVN", peer_sets=["unused"])


def test_command_writes_the_tables_and_refuses_the_ledger_folder(tmp_path):
    ledger = _ledger(tmp_path / "l", {"sector_peers": ["PEERA", "PEERB"]},
                     [("tsr", "2026-06-01", "2029-06-01", "sector_peers")], grants=[("2026-05-15", "")] * 3)
    base = ["assumptions", "--prices", MARKET / "prices.csv", "--curve", MARKET / "curve.csv", "--ticker", "CRVN",
            "--dates", "2026-05-15", "--lookback", "2", "--expected-term", "6", "-o", tmp_path / "a.csv"]
    runner = CliRunner()
    r = runner.invoke(app, [str(a) for a in base + ["--peer-tables", tmp_path / "out"]])
    assert r.exit_code == 2 and "--peer-tables needs --ledger" in r.output
    base[7:13] = ["--ledger", ledger]
    r = runner.invoke(app, [str(a) for a in base + ["--peer-tables", tmp_path / "out", "--xlsx", tmp_path / "a.xlsx"]])
    assert r.exit_code == 0, r.output
    assert "peer sets derived: sector_peers" in r.output
    got = pd.read_csv(tmp_path / "out" / "correlations.csv")
    assert list(got.columns[:4]) == ["peer_set", "first", "second", "correlation"] and len(got) == 3
    import openpyxl

    sheets = openpyxl.load_workbook(tmp_path / "a.xlsx", read_only=True).sheetnames
    assert {"assumptions", "peers", "correlations", "notes"} <= set(sheets)
    r = runner.invoke(app, [str(a) for a in base + ["--peer-tables", ledger]])
    assert r.exit_code == 2, r.output


def test_self_as_a_peer_and_a_member_twice_are_refused_on_their_rows(tmp_path):
    ledger = _ledger(tmp_path / "l", {"sp": ["PEERA", "self", "PEERA"]}, [("tsr", "2026-06-01", "2029-06-01", "sp")])
    with pytest.raises(LedgerError) as err:
        api.peer_tables(MARKET / "prices.csv", ledger, ticker="CRVN")
    got = {(p.source, p.row, p.column): p.message for p in err.value.problems}
    assert "'self' is the company" in got[("peers.csv", 3, "peer_id")]
    assert "already in peer set 'sp' on row 2" in got[("peers.csv", 4, "peer_id")]


def test_a_condition_whose_peer_set_has_no_members_and_the_company_as_a_peer(tmp_path):
    ledger = _ledger(tmp_path / "l", {"sp": ["CRVN"]}, [("tsr", "2026-06-01", "2029-06-01", "sp"),
                                                         ("tsr2", "2026-06-01", "2029-06-01", "other")])
    with pytest.raises(LedgerError) as err:
        api.peer_tables(MARKET / "prices.csv", ledger, ticker="CRVN")
    got = {(p.source, p.row, p.column): p.message for p in err.value.problems}
    assert "peer set 'other' has no members" in got[("market_conditions.csv", 3, "peer_set")]
    assert "is the company's ticker" in got[("peers.csv", 2, "peer_id")]
