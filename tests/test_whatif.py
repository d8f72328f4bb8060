"""What-if runs: base equals the plain runs, monotonicity, grid size, planned grants, errors."""

import pathlib

import numpy as np
import pytest
from typer.testing import CliRunner

from grantval import api
from grantval.cli import app
from grantval.errors import UsageError
from grantval.whatif import parse_vary
from tests.factory import tables, write_ledger

SAMPLE = pathlib.Path(__file__).resolve().parents[1] / "sample_grants"


def test_base_equals_value_and_expense_to_the_cent():
    run = api.whatif(SAMPLE, vary=["volatility=+0.05"], through="2026-12-31")
    base = run.results[0]
    plain_v = api.value(SAMPLE)
    plain_e = api.expense(SAMPLE, through="2026-12-31")
    np.testing.assert_array_equal(base.fair_values.grant_value, plain_v.fair_values.grant_value)
    np.testing.assert_array_equal(base.schedule.expense_cents, plain_e.schedule.expense_cents)


def test_fair_value_rises_with_volatility_and_term():
    run = api.whatif(SAMPLE, vary=["volatility=-0.1,+0.1", "expected_term_years=-1,+1"])
    model = run.results[0].fair_values.table["model"].to_numpy()
    opt = (run.ledger.grants["award_type"].to_numpy() == "option") & (model != "supplied")  # supplied: unchanged
    bsm = model == "bsm"
    by = {r.scenario.description: r.fair_values.grant_value for r in run.results}
    lo_lo, hi_lo = by["volatility=-0.1; expected_term_years=-1"], by["volatility=+0.1; expected_term_years=-1"]
    lo_hi = by["volatility=-0.1; expected_term_years=+1"]
    # the sample ledger holds 27 BSM and 9 lattice option grants: the comparisons below are not empty
    assert (opt & bsm).sum() >= 10 and (opt & (model == "lattice")).sum() >= 5
    assert np.all(hi_lo[opt] > lo_lo[opt])          # more volatility, more value (lattice included)
    assert np.all(lo_hi[opt & bsm] > lo_lo[opt & bsm])  # longer expected term, more value (BSM)


def test_three_by_three_grid_gives_nine_scenarios_plus_base():
    run = api.whatif(SAMPLE, vary=["volatility=0.4,0.5,0.6", "risk_free_rate=+0.01,-0.01,+10%"])
    assert [r.scenario.id for r in run.results] == ["base"] + [f"S{i:02d}" for i in range(1, 10)]
    assert len(run.tornado) == 6


def test_only_grants_in_the_window_are_revalued():
    run = api.whatif(SAMPLE, vary=["volatility=+0.1"], grants_from="2026-01-01", grants_through="2026-06-30")
    gd = run.ledger.grants["grant_date"].to_numpy("datetime64[D]")
    inside = (gd >= np.datetime64("2026-01-01")) & (gd <= np.datetime64("2026-06-30"))
    base, shifted = run.results[0].fair_values.grant_value, run.results[1].fair_values.grant_value
    np.testing.assert_array_equal(base[~inside], shifted[~inside])
    opt = run.ledger.grants["award_type"].to_numpy() == "option"
    assert (inside & opt).sum() >= 5 and (~inside).sum() >= 5  # both sides of the window are checked
    assert np.all(shifted[inside & opt] > base[inside & opt])


def test_planned_grants_with_ledger_terms_get_the_same_value(tmp_path):
    ledger = write_ledger(tmp_path / "l", tables())
    g1 = dict(tables()["grants"][0], grant_id="P1", holder_id="")
    planned = write_ledger(tmp_path / "p", {"planned": [g1]}) / "planned.csv"
    run = api.whatif(ledger, vary=["volatility=+0.05"], planned=planned)
    v = dict(zip(run.ledger.grants["grant_id"], run.results[0].fair_values.grant_value))
    assert v["P1"] == v["G1"]
    assert run.ledger.grants["planned"].sum() == 1


def test_greeks_table_matches_the_valuation_core():
    from grantval.pricing import bsm_sensitivities
    from grantval.whatif import greeks_table

    run = api.whatif(SAMPLE, vary=["volatility=+0.01"])
    g = greeks_table(run)
    t = run.results[0].fair_values.table.set_index("grant_id")
    row = g.iloc[0]
    r = t.loc[row["grant_id"]]
    ref = bsm_sensitivities(r["share_price"], r["exercise_price"], r["expected_term_years"], r["risk_free_rate"],
                            r["volatility"], r["dividend_yield"])
    assert row["value_per_volatility_point"] == pytest.approx(ref["vega"] / 100)
    # a +0.01 volatility scenario moves a BSM grant by about its vega per point
    i = list(run.ledger.grants["grant_id"]).index(row["grant_id"])
    moved = run.results[1].fair_values.grant_value[i] - run.results[0].fair_values.grant_value[i]
    assert moved == pytest.approx(row["value_per_volatility_point"], rel=2e-2)


@pytest.mark.parametrize("spec, fragment", [
    ("volatility", "NAME=SPEC"), ("colour=1", "not one of"), ("volatility=35%", "not a level"),
    ("volatility=+0.1,+0.1", "listed twice"),
])
def test_bad_vary_specs(spec, fragment):
    with pytest.raises(UsageError, match=fragment):
        parse_vary(spec)


def test_invalid_scenarios_are_refused():
    with pytest.raises(UsageError, match="volatility becomes"):
        api.whatif(SAMPLE, vary=["volatility=-0.6"])
    with pytest.raises(UsageError, match="contractual term"):
        api.whatif(SAMPLE, vary=["expected_term_years=12"])
    with pytest.raises(UsageError, match="forfeitures estimate"):
        api.whatif(SAMPLE, vary=["forfeiture_rate=0.1"], forfeitures="as-occur")


def test_forfeiture_rate_lowers_expense_before_vesting():
    run = api.whatif(SAMPLE, vary=["forfeiture_rate=0.02,0.3"], through="2026-12-31")
    tot = {r.scenario.description: r.schedule.expense_cents.sum() for r in run.results}
    assert tot["forfeiture_rate=0.3"] < tot["forfeiture_rate=0.02"]


def test_cli_writes_workbook(tmp_path):
    r = CliRunner().invoke(app, ["whatif", str(SAMPLE), "--vary", "volatility=+0.05,-0.05", "-o",
                                 str(tmp_path / "w.xlsx"), "--csv-dir", str(tmp_path)])
    assert r.exit_code == 0, r.output
    assert (tmp_path / "w.xlsx").exists() and (tmp_path / "sensitivity.csv").exists()
    r = CliRunner().invoke(app, ["whatif", str(SAMPLE), "--vary", "vol=1", "-o", str(tmp_path / "x.xlsx")])
    assert r.exit_code == 2 and not (tmp_path / "x.xlsx").exists()


def test_payout_shift_moves_only_performance_unit_expense(tmp_path):
    # common practice: a what-if on the payout in force scales the performance units' cost only
    from tests.attribution.test_performance import probable_then_improbable

    run = api.whatif(probable_then_improbable(tmp_path / "l"), vary=["payout=+0.5"], through="2028-12-31")
    base, up = (r.schedule.cumulative_cents[0, -1] for r in run.results)
    # payout 1.5 in force at 2028-12-31 becomes 2.0: cost scales by 2.0 / 1.5
    assert up == pytest.approx(base * 2.0 / 1.5, abs=1)


def test_payout_shift_without_performance_units_is_refused():
    with pytest.raises(UsageError, match="payout changes nothing"):
        api.whatif(SAMPLE, vary=["payout=+0.5"], grants_from="2026-06-01")


@pytest.mark.parametrize("spec, sigma, rate", [("volatility=+0.1", 0.4, 0.05), ("risk_free_rate=+0.01", 0.3, 0.06)])
def test_volatility_and_rate_shifts_move_purchase_plan_rights(tmp_path, spec, sigma, rate):
    # issue #19: purchase rights are priced with volatility and rate (ASC 718-50-55 components),
    # so a what-if shift of either moves them; the reference is QuantLib's blackFormula
    # components (tests/attribution/test_espp.py) at the shifted inputs, not the tool's own formula
    from tests.attribution.test_espp import enrol, ledger, offering, ql_espp

    folder = ledger(tmp_path / "l", [offering()], [enrol()])
    run = api.whatif(folder, vary=[spec], through="2027-12-31")
    base, shifted = (r.fair_values.grant_value[1] for r in run.results)
    assert base == pytest.approx(ql_espp(20, 181, 0.05, 0.3, 0.01, 0.15, "fixed_shares"), rel=1e-10)
    assert shifted == pytest.approx(ql_espp(20, 181, rate, sigma, 0.01, 0.15, "fixed_shares"), rel=1e-10)
    assert shifted > base
