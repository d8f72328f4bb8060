"""Ledger grants with a market condition, valued end to end (read, value, expense).

Each value is checked against a closed form (named beside it) within three Monte Carlo standard
errors plus a stated bias bound; the simulation's own term (whole trading days, 252 a year) is
the term of the closed form.  Ledgers are invented for the tests.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from grantval.api import expense, value
from grantval.errors import LedgerError
from grantval.pricing.bsm import bsm_value
from grantval.pricing.market_condition import derived_service_period
from grantval.pricing.paths import TRADING_DAYS, simulate_market
from tests.factory import tables, write_ledger
from tests.pricing.test_montecarlo import absolute_tsr_digital, outperformance_digital

S, VOL, R = 10.0, 0.4, 0.04  # the factory's 2027-01-01 assumptions row (share price, volatility, rate; q = 0)
GRANT, END = "2027-01-01", "2029-12-31"


def _term() -> float:
    """The simulation's term: actual days / 365.25, rounded to whole trading days."""
    years = (np.datetime64(END) - np.datetime64(GRANT)).astype(int) / 365.25
    return round(years * TRADING_DAYS) / TRADING_DAYS


def market_ledger(folder, metric="absolute_tsr", curve="0:1", award="psu", vest_months="36", monitoring="end",
                  members=(), rho=0.0, averaging=0, extra=None):
    """The factory ledger with grant G2 on market condition M1 (members: (peer_id, volatility, yield))."""
    d = tables()
    for g in d["grants"]:
        g["condition_set"] = ""
    g = d["grants"][1]
    g.update(award_type=award, condition_set="M1", vest_months=vest_months,
             vest_every_months=vest_months if vest_months != "0" else "1", cliff_months="0")
    if award == "option":
        g.update(exercise_price="10", expiration_date="2037-01-01")
    d["market_conditions"] = [{"condition_set": "M1", "metric": metric, "start_date": GRANT, "end_date": END,
                               "averaging_days": averaging, "monitoring": monitoring,
                               "peer_set": "P" if members else "", "payout_curve": curve}]
    if members:
        d["peers"] = [{"peer_set": "P", "peer_id": m, "volatility": v, "dividend_yield": q} for m, v, q in members]
        names = ["self"] + [m for m, _, _ in members]
        d["correlations"] = [{"peer_set": "P", "first": a, "second": b, "correlation": rho}
                             for k, a in enumerate(names) for b in names[k + 1:]]
    for name, rows in (extra or {}).items():
        d[name] = rows
    return write_ledger(folder, d)


def _g2(folder) -> pd.Series:
    t = value(folder).fair_values.table
    return t[t["grant_id"] == "G2"].iloc[0]


def _within(row, reference, bias=1e-4 * S):
    return abs(row["fair_value_per_unit"] - reference) <= 3 * row["std_error"] + bias


def test_absolute_tsr_digital_unit(tmp_path):
    # Reference: asset-or-nothing digital on the total-return index, S e^{-qT} N(d1) (Hull, Options,
    # Futures and Other Derivatives, binary options; docs/market-conditions.md).  Bias bound 1e-4 x S.
    row = _g2(market_ledger(tmp_path, curve="0:1"))
    assert row["model"] == "monte_carlo" and row["std_error"] > 0
    assert _within(row, absolute_tsr_digital(S, 0.0, VOL, R, _term(), 0.0))
    # the check can fail: the unit without the condition (S e^{-qT} = 10) is far outside
    assert not _within(row, S)
    assert row["volatility"] == VOL and row["risk_free_rate"] == R  # the inputs used are shown


def test_index_outperformance_digital_unit(tmp_path):
    # Reference: S e^{-qT} N(s_x sqrt(T)/2), s_x^2 = s^2 + s_i^2 - 2 rho s s_i (change to the share measure,
    # docs/market-conditions.md).  Bias bound 1e-4 x S.
    row = _g2(market_ledger(tmp_path, metric="index_tsr", members=[("IDX", 0.2, 0.02)], rho=0.5))
    assert _within(row, outperformance_digital(S, 0.0, VOL, 0.2, 0.5, _term()))
    assert not _within(row, S - outperformance_digital(S, 0.0, VOL, 0.2, 0.5, _term()))


def test_option_whose_condition_is_always_met_is_the_bsm_call(tmp_path):
    # relative TSR curve "0:1": every rank is >= 0, so the option is a plain European call at its expected
    # term (the simplified method's 6.5 years for a 36-month cliff and 10-year term).
    # Reference: Black-Scholes-Merton (grantval.pricing.bsm, itself matched to QuantLib in tests/pricing).
    members = [("A", 0.3, 0.0), ("B", 0.25, 0.01)]
    row = _g2(market_ledger(tmp_path, metric="relative_tsr", award="option", members=members, rho=0.3))
    term = row["expected_term_years"]
    years = lambda d: (pd.Timestamp(d) - pd.Timestamp(GRANT)).days / 365.25  # noqa: E731
    assert term == pytest.approx((years("2030-01-01") + years("2037-01-01")) / 2)  # SAB Topic 14.D.2
    ref = float(bsm_value(S, 10.0, term, R, VOL, 0.0))
    assert _within(row, ref, bias=1e-3 * S)  # bias: the period end on a trading-day grid
    assert not _within(row, ref * 0.97, bias=1e-3 * S)


def test_reruns_identical_and_grants_share_one_simulation(tmp_path):
    folder = market_ledger(tmp_path, metric="relative_tsr", members=[("A", 0.3, 0.0)], curve="50:0.5;100:1.5")
    one, two = value(folder), value(folder)
    assert one.fair_values.table.equals(two.fair_values.table)
    # a second grant on the same condition and inputs reuses the simulation: still one distinct valuation
    # for the market grants (the other grants are valued by BSM/lattice)
    d = pd.read_csv(folder / "grants.csv", dtype=str, keep_default_na=False)
    copy = d[d["grant_id"] == "G2"].assign(grant_id="G2b", quantity="7")
    pd.concat([d, copy]).to_csv(folder / "grants.csv", index=False)
    both = value(folder)
    t = both.fair_values.table.set_index("grant_id")
    assert t.loc["G2b", "fair_value_per_unit"] == t.loc["G2", "fair_value_per_unit"]
    assert both.fair_values.distinct_valuations == one.fair_values.distinct_valuations


def test_policy_paths_and_seed_change_the_simulation(tmp_path):
    base = market_ledger(tmp_path / "a", curve="0.2:1")
    other = market_ledger(tmp_path / "b", curve="0.2:1",
                          extra={"policy": [{"key": "mc_seed", "value": "7"}, {"key": "mc_paths", "value": "20000"}]})
    a, b = _g2(base), _g2(other)
    assert a["fair_value_per_unit"] != b["fair_value_per_unit"]
    assert b["std_error"] == pytest.approx(a["std_error"] * np.sqrt(5), rel=0.15)  # error ~ 1/sqrt(paths)


FEWER_PATHS = [{"key": "mc_paths", "value": "20000"}]  # daily monitoring: fewer paths keep the tests quick


def _hurdle_ledger(folder, hurdle="18", extra=None):
    return market_ledger(folder, metric="share_price", monitoring="any_day", curve=f"{hurdle}:1", vest_months="0",
                         averaging=1, extra={"policy": FEWER_PATHS, **(extra or {})})


def test_derived_service_period_drives_the_expense(tmp_path):
    # Derived service: median first-passage day of the hurdle on the paths that reach it (ASC 718-10-55-71,
    # from memory); the same simulation run directly gives the same figure (one computation wired through).
    folder = _hurdle_ledger(tmp_path)
    row = _g2(folder)
    sim = simulate_market([S], [VOL], [0.0], R, _term(), daily=True, hurdles=[18.0], paths=20000)
    assert row["derived_service_years"] == derived_service_period(sim, 18.0).years
    assert 0.5 < row["derived_service_years"] < 2.5
    # Cost over the derived service period, straight-line in days served (docs/expense-rules.md; common
    # practice): independent arithmetic on the value and the derived end date
    days = round(row["derived_service_years"] * 365.25)
    run = expense(folder, through="2029-12-31")
    total = 400 * row["fair_value_per_unit"]
    assert _cumulative(run, "G2", "2027-12-31") == pytest.approx(round(total * min(1, 365 / days), 2), abs=0.006)
    assert _cumulative(run, "G2", "2029-12-31") == pytest.approx(round(total, 2), abs=0.006)
    # the check can fail: cost over the schedule (vested on the end date) would be far less by 2027-12-31
    assert _cumulative(run, "G2", "2027-12-31") > total * 365 / 1095 + 100


def _cumulative(run, grant, period_end) -> float:
    """Cumulative cost of ``grant`` through ``period_end`` (currency, rounded to cents)."""
    g = list(run.ledger.grants["grant_id"]).index(grant)
    p = list(run.schedule.period_ends.astype(str)).index(period_end)
    return float(run.schedule.cumulative_cents[g, p]) / 100


def test_forfeit_after_the_derived_service_period_is_refused(tmp_path):
    ev = [{"grant_id": "G2", "event_type": "forfeit", "event_date": "2029-06-30", "quantity": "400"}]
    folder = _hurdle_ledger(tmp_path, extra={"events": ev})
    with pytest.raises(LedgerError) as err:
        expense(folder, through="2029-12-31")
    assert "after the derived service period" in str(err.value) and "events.csv, row 2" in str(err.value)


def test_missing_volatility_and_short_expected_term(tmp_path):
    folder = market_ledger(tmp_path, curve="0:1")
    a = pd.read_csv(folder / "assumptions.csv", dtype=str, keep_default_na=False)
    a.loc[0, "volatility"] = ""
    a.loc[0, "expected_term_years"] = ""
    a.to_csv(folder / "assumptions.csv", index=False)
    with pytest.raises(LedgerError) as err:
        value(folder)
    assert "assumptions.csv, row 2, volatility" in str(err.value)


def test_option_expected_term_shorter_than_the_period_is_refused(tmp_path):
    folder = market_ledger(tmp_path, award="option", curve="0:1")
    a = pd.read_csv(folder / "assumptions.csv", dtype=str, keep_default_na=False)
    a.loc[0, "expected_term_years"] = "2"
    a.to_csv(folder / "assumptions.csv", index=False)
    with pytest.raises(LedgerError) as err:
        value(folder)
    assert "grants.csv, row 3, condition_set" in str(err.value) and "ends before its performance period" in str(err.value)


def test_whatif_volatility_shift_moves_a_market_condition_value(tmp_path):
    # A market condition is simulated with the volatility, so a what-if volatility shift re-values it:
    # the absolute-TSR digital moves to its closed form at the shifted volatility (same reference as above).
    from grantval.ledger import load_ledger
    from grantval.measurement.fairvalue import compute_fair_values
    from grantval.policy import Policy
    from grantval.scenarios.shifts import Shifts

    ledger = load_ledger(market_ledger(tmp_path, curve="0:1"))
    mask = ledger.grants["grant_id"].to_numpy() == "G2"
    fv = compute_fair_values(ledger, Policy(), Shifts("vol +0.2", mask, volatility=lambda v: v + 0.2))
    row = fv.table.set_index("grant_id").loc["G2"]
    assert _within(row, absolute_tsr_digital(S, 0.0, VOL + 0.2, R, _term(), 0.0))
    assert not _within(row, absolute_tsr_digital(S, 0.0, VOL, R, _term(), 0.0))


def test_period_begun_before_the_grant_starts_from_the_return_to_date(tmp_path):
    # Period 2026-07-01 to 2029-12-31, granted 2027-01-01 after a 20% total return: the unit pays one share
    # if the period's TSR is >= 0, i.e. if the return from the grant date is >= 1/1.2 - 1.  Reference: the
    # absolute-TSR digital closed form at that hurdle over the time left (docs/market-conditions.md).
    returns = [{"condition_set": "M1", "member": "self", "measured_on": GRANT, "total_return": 0.2}]
    folder = market_ledger(tmp_path, curve="0:1", extra={"market_returns": returns})
    mc = pd.read_csv(folder / "market_conditions.csv", dtype=str, keep_default_na=False)
    mc.loc[0, "start_date"] = "2026-07-01"
    mc.to_csv(folder / "market_conditions.csv", index=False)
    row = _g2(folder)
    assert _within(row, absolute_tsr_digital(S, 0.0, VOL, R, _term(), 1 / 1.2 - 1))
    # the check can fail: ignoring the return to date gives the at-the-start digital
    assert not _within(row, absolute_tsr_digital(S, 0.0, VOL, R, _term(), 0.0))


def test_a_shared_cache_reuses_the_simulation_of_unmoved_grants(tmp_path):
    # What-if scenarios share a cache: a scenario that does not move the market grant reuses its simulation
    # (same value, no new simulation counted), one that moves its volatility simulates again.
    from grantval.ledger import load_ledger
    from grantval.measurement.fairvalue import compute_fair_values
    from grantval.policy import Policy
    from grantval.scenarios.shifts import Shifts

    ledger = load_ledger(market_ledger(tmp_path, curve="0:1"))
    cache: dict = {}
    base = compute_fair_values(ledger, Policy(), cache=cache)
    others = ledger.grants["grant_id"].to_numpy() != "G2"
    again = compute_fair_values(ledger, Policy(), Shifts("others", others, share_price=lambda s: s * 1.1), cache)
    assert again.grant_value[1] == base.grant_value[1]
    assert again.distinct_valuations < base.distinct_valuations
    moved = compute_fair_values(ledger, Policy(), Shifts("vol", ~others, volatility=lambda v: v + 0.1), cache)
    assert moved.grant_value[1] != base.grant_value[1]
