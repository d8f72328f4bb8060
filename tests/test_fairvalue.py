"""Fair values of ledgers against direct calls of the valuation functions."""

import pathlib

import numpy as np
import pytest

from grantval import api
from grantval.dates import year_fraction
from grantval.pricing import bsm_value, espp_value, lattice_value, rsu_value, simplified_term
from tests.factory import set_cell, tables, write_ledger

SAMPLE = pathlib.Path(__file__).resolve().parents[1] / "sample_grants"


def test_sample_ledger_against_direct_calls():
    run = api.value(SAMPLE)
    led, fv = run.ledger, run.fair_values
    t = fv.table.set_index("grant_id")
    g = led.grants.set_index("grant_id")
    a = led.assumptions
    checked = {"bsm": 0, "lattice": 0, "rsu": 0, "psu": 0, "supplied": 0, "espp": 0, "monte_carlo": 0}
    for i, gid in enumerate(led.grants["grant_id"]):
        row = a.iloc[led.grant_assumption[i]]
        tr = led.tranches[led.tranches["grant_idx"] == i]
        tv = year_fraction(np.full(len(tr), g.at[gid, "grant_date"]), tr["vest_date"].to_numpy())
        w = tr["quantity"].to_numpy(float)
        got = t.at[gid, "fair_value_per_unit"]
        model = t.at[gid, "model"]
        q = row["dividend_yield"] if not np.isnan(row["dividend_yield"]) else 0.0
        if model == "supplied":
            expected = row["fair_value"]
        elif model == "espp":  # a purchase-plan enrollment: one right per purchase period, share-weighted
            vals = espp_value(row["share_price"], tv, row["risk_free_rate"], row["volatility"], q,
                              discount=g.at[gid, "_espp_discount"], lookback=bool(g.at[gid, "_espp_lookback"]),
                              basis=g.at[gid, "_espp_basis"])
            expected = np.average(vals, weights=w)
        elif model in ("rsu", "psu"):  # a performance unit is valued as a unit at target (payout in expense)
            expected = np.average(rsu_value(row["share_price"], tv, q), weights=w)
        elif model == "monte_carlo":  # a market condition: the pricing API called on the ledger's rows
            expected = _market_direct(led, gid, row, q)
        else:
            contract = year_fraction(g.at[gid, "grant_date"], g.at[gid, "expiration_date"])
            args = (row["share_price"], g.at[gid, "exercise_price"])
            if model == "bsm":
                term = simplified_term(tv, contract, weights=w)
                expected = bsm_value(*args, term, row["risk_free_rate"], row["volatility"], q)
            else:
                vals = lattice_value(*args, contract, row["risk_free_rate"], row["volatility"], q, vesting=tv,
                                     exercise_multiple=row["exercise_multiple"],
                                     exit_rate=row["post_vest_exit_rate"])
                expected = np.average(vals, weights=w)
        assert got == pytest.approx(expected, rel=1e-9 if model == "monte_carlo" else 1e-12), gid
        assert t.at[gid, "grant_date_fair_value"] == pytest.approx(expected * g.at[gid, "quantity"], rel=1e-12)
        checked[model] += 1
    assert all(v > 0 for v in checked.values()), checked


def _market_direct(led, gid, row, q):
    """The value of a demo grant with a market condition from direct calls of the pricing API."""
    from grantval.pricing.montecarlo import market_award_value, simulate_market
    from grantval.pricing.payout import parse_payout_curve

    g = led.grants.set_index("grant_id").loc[gid]
    c = led.tables["market_conditions"].set_index("condition_set").loc[g["condition_set"]]
    peers = led.tables["peers"][led.tables["peers"]["peer_set"] == c["peer_set"]]
    names = ["self"] + list(peers["peer_id"])
    cor = np.eye(len(names))
    for _, r in led.tables["correlations"][led.tables["correlations"]["peer_set"] == c["peer_set"]].iterrows():
        i, j = names.index(r["first"]), names.index(r["second"])
        cor[i, j] = cor[j, i] = r["correlation"]
    curve = parse_payout_curve(c["payout_curve"], None if np.isnan(c["negative_tsr_cap"]) else c["negative_tsr_cap"])
    daily = c["metric"] == "share_price" and c["monitoring"] == "any_day"
    sim = simulate_market(np.r_[row["share_price"], np.ones(len(peers))], np.r_[row["volatility"], peers["volatility"]],
                          np.r_[q, np.nan_to_num(peers["dividend_yield"].to_numpy(float))], row["risk_free_rate"],
                          year_fraction(g["grant_date"], c["end_date"]), cor, averaging_days=int(c["averaging_days"]),
                          daily=daily, hurdles=[curve.threshold] if daily and g["vest_months"] == 0 else None)
    peer_pos = list(range(1, len(names))) if c["metric"] == "relative_tsr" else None
    return market_award_value(sim, curve, c["metric"], peers=peer_pos, monitoring=c["monitoring"]).value


def test_tranche_unit_values_each_tranche_with_its_own_term(tmp_path):
    data = tables(policy=[["key", "value"], ["valuation_unit", "tranche"]])
    run = api.value(write_ledger(tmp_path / "l", data))
    t = run.fair_values.table
    g1 = t[t["grant_id"] == "G1"]
    assert len(g1) == 4
    contract = year_fraction(np.datetime64("2027-01-01"), np.datetime64("2037-01-01"))
    for _, r in g1.iterrows():
        tv = year_fraction(np.datetime64("2027-01-01"), r["vest_date"])
        assert r["expected_term_years"] == pytest.approx((tv + contract) / 2)
        assert r["fair_value_per_unit"] == pytest.approx(bsm_value(10, 10, (tv + contract) / 2, 0.04, 0.4), rel=1e-13)


def test_given_expected_term_is_used(tmp_path):
    data = set_cell(tables(), "assumptions", 0, "expected_term_years", "5.5")
    run = api.value(write_ledger(tmp_path / "l", data))
    t = run.fair_values.table.set_index("grant_id")
    assert t.at["G1", "expected_term_method"] == "given"
    assert t.at["G1", "fair_value_per_unit"] == pytest.approx(bsm_value(10, 10, 5.5, 0.04, 0.4), rel=1e-14)


def test_identical_inputs_are_valued_once(tmp_path):
    data = tables()
    data["grants"] = [dict(data["grants"][0], grant_id=f"X{i}", holder_id=f"H{i}") for i in range(300)]
    run = api.value(write_ledger(tmp_path / "l", data))
    assert run.fair_values.distinct_valuations == 1
    assert run.fair_values.table["fair_value_per_unit"].nunique() == 1
