"""Disclosure tables (ASC 718-10-50-2) against a small ledger worked by hand (invented data)."""

import datetime as dt

import pytest

from grantval import api
from tests.factory import tables, write_ledger

EVENTS = [
    {"grant_id": "G1", "event_date": "2028-06-01", "event_type": "exercise", "quantity": "100", "share_price": "15"},
    {"grant_id": "G1", "event_date": "2029-06-30", "event_type": "forfeit", "quantity": "", "share_price": ""},
    {"grant_id": "G1", "event_date": "2029-09-28", "event_type": "expire", "quantity": "", "share_price": ""},
    {"grant_id": "G2", "event_date": "2028-03-01", "event_type": "forfeit", "quantity": "50", "share_price": ""},
]


@pytest.fixture
def ledger(tmp_path):
    return write_ledger(tmp_path / "l", tables(events=EVENTS))


def lines(frame):
    return {r["line"]: r for _, r in frame.iterrows()}


def test_option_activity_worked_by_hand(ledger):
    d = api.disclose(ledger, start="2029-01-01", through="2029-12-31", share_price=20).disclosure
    o = lines(d.options)
    # G1: 1000 at $10 less 100 exercised in 2028; G3: 900 at $12
    assert o["Outstanding at start"]["number"] == 1800
    assert o["Outstanding at start"]["weighted_average_exercise_price"] == pytest.approx(11.0)
    assert o["Granted"]["number"] == 0 and o["Exercised"]["number"] == 0
    assert o["Forfeited or cancelled"]["number"] == 500  # G1's two unvested tranches of 250
    assert o["Expired"]["number"] == 400                 # G1's vested, unexercised options
    end = o["Outstanding at end"]
    assert end["number"] == 900 and end["weighted_average_exercise_price"] == pytest.approx(12.0)
    years = (dt.date(2037, 4, 1) - dt.date(2029, 12, 31)).days / 365.25
    assert end["weighted_average_remaining_term_years"] == pytest.approx(years, abs=5e-5)  # shown to 4 places
    assert end["aggregate_intrinsic_value"] == pytest.approx(900 * (20 - 12))  # hand-worked intrinsic value
    assert o["Exercisable at end"]["number"] == 0  # G3 vests on 2030-04-01
    assert o["Vested and expected to vest at end"]["number"] == 900  # as-occur: all expected to vest
    assert d.option_tie == (900, 900)


def test_rsu_activity_worked_by_hand(ledger):
    d = api.disclose(ledger, start="2029-01-01", through="2029-12-31").disclosure
    r = lines(d.rsus)
    # 400 units, 36 months quarterly after a 12-month cliff: 233 vested by 2028-12-31,
    # 50 forfeited on 2028-03-01 from the latest tranches, so 117 nonvested at the start.
    assert r["Nonvested at start"]["number"] == 117
    assert r["Vested"]["number"] == 117
    assert r["Forfeited"]["number"] == 0
    assert r["Nonvested at end"]["number"] == 0
    assert r["Nonvested at start"]["weighted_average_grant_date_fair_value"] == pytest.approx(10.0)


def test_intrinsic_value_of_exercises(ledger):
    d = api.disclose(ledger, start="2028-01-01", through="2028-12-31").disclosure
    items = dict(zip(d.grants["item"], d.grants["value"]))
    assert items["Total intrinsic value of options exercised"] == pytest.approx(100 * (15 - 10))


def test_windows_chain_end_to_start(ledger):
    a = api.disclose(ledger, start="2027-01-01", through="2028-12-31").disclosure
    b = api.disclose(ledger, start="2029-01-01", through="2029-12-31").disclosure
    assert lines(a.options)["Outstanding at end"]["number"] == lines(b.options)["Outstanding at start"]["number"]
    assert lines(a.rsus)["Nonvested at end"]["number"] == lines(b.rsus)["Nonvested at start"]["number"]
    assert a.option_tie[0] == a.option_tie[1] and a.rsu_tie[0] == a.rsu_tie[1]


def test_options_outstanding_at_expiration_expire_by_themselves(tmp_path):
    data = tables()
    data["grants"][0]["expiration_date"] = "2032-01-01"
    d = api.disclose(write_ledger(tmp_path / "l", data), start="2032-01-01", through="2032-12-31").disclosure
    o = lines(d.options)
    assert o["Expired"]["number"] == 1000 and o["Outstanding at end"]["number"] == 900


def test_market_condition_assumptions_are_disclosed(tmp_path):
    # ASC 718-10-50-2 (the method and significant assumptions of the awards granted): the demo's 2026 market-
    # condition units (35,000 units granted 2026-02-17, one assumptions row) - volatility 0.452, rate 0.0402,
    # yield 0.008 from sample_grants/assumptions.csv, performance period 1,095 days / 365.25, and the mean of the
    # company's correlations with the six peers in sample_grants/correlations.csv (computed here with the csv module).
    import csv
    import pathlib

    demo = pathlib.Path(__file__).resolve().parents[1] / "sample_grants"
    with open(demo / "correlations.csv") as fh:
        own = [float(r["correlation"]) for r in csv.DictReader(fh) if "self" in (r["first"], r["second"])]
    lines = dict(zip(*[api.disclose(demo, start="2026-01-01", through="2026-12-31").disclosure.grants[c]
                       for c in ("item", "value")]))
    label = "Market-condition awards granted (Monte Carlo): weighted-average"
    assert lines[f"{label} expected volatility"] == pytest.approx(0.452)
    assert lines[f"{label} risk-free rate"] == pytest.approx(0.0402)
    assert lines[f"{label} dividend yield"] == pytest.approx(0.008)
    assert lines[f"{label} performance period (years)"] == pytest.approx(1095 / 365.25, abs=5e-5)  # 4 places
    # CV-MKT-03 (a hurdle, no peer set) is not in the correlation average
    assert lines[f"{label} correlation with the peer group"] == pytest.approx(sum(own) / len(own), abs=5e-5)
    earlier = api.disclose(demo, start="2024-01-01", through="2024-12-31").disclosure.grants
    assert not any(str(i).startswith("Market-condition") for i in earlier["item"])
