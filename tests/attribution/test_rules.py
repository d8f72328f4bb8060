"""Expense rules against an accounting-standard illustration and an independent reference."""

import datetime as dt

import numpy as np
import pytest

from grantval import api
from grantval.errors import UsageError
from tests.attribution.random_ledgers import random_ledger
from tests.attribution.reference import schedule_cents
from tests.factory import tables, write_ledger


def entity_t_ledger(folder, forfeitures=True):
    # ASC 718-20-55 illustration (Entity T), figures from memory and secondary sources:
    # 900,000 options, fair value $14.69 each, 3-year cliff vesting, 3% annual forfeiture
    # estimate; forfeitures of 27,000, 26,190 and 25,404 on the last day of years 1-3.
    # Grant dated 1 January 2029: no 29 February in 2029-2031.
    data = {
        "grants": [{"grant_id": "T", "holder_id": "all", "group": "", "award_type": "option",
                    "grant_date": "2029-01-01", "quantity": "900000", "exercise_price": "30",
                    "expiration_date": "2039-01-01", "vest_start_date": "", "vest_months": "36",
                    "vest_every_months": "36", "cliff_months": "0", "assumption_set": "t"}],
        "assumptions": [{"assumption_set": "t", "grant_date": "", "share_price": "30", "volatility": "",
                         "risk_free_rate": "", "dividend_yield": "", "expected_term_years": "", "model": "bsm",
                         "exercise_multiple": "", "post_vest_exit_rate": "", "fair_value": "14.69"}],
        "estimates": [{"applies_to": "*", "effective_date": "2029-01-01", "annual_forfeiture_rate": "0.03",
                       "expected_vest_fraction": ""}],
    }
    if forfeitures:
        data["events"] = [{"grant_id": "T", "event_date": f"{y}-12-31", "event_type": "forfeit", "quantity": q,
                           "share_price": ""} for y, q in ((2029, "27000"), (2030, "26190"), (2031, "25404"))]
    return write_ledger(folder, data)


def test_entity_t_cliff_award_with_estimated_forfeitures(tmp_path):
    run = api.expense(entity_t_ledger(tmp_path / "t"), through="2031-12-31", period="year", forfeitures="estimate")
    cents = run.schedule.expense_cents[0]
    assert len(cents) == 3
    # 821,406 options vest; total cost 821,406 x 14.69 = $12,066,454; about $4,022,151 a year
    assert cents.sum() / 100 == pytest.approx(12_066_454, abs=1)
    for c in cents:
        assert c / 100 == pytest.approx(4_022_151, abs=5)


def test_entity_t_under_ifrs2_is_the_same_for_a_cliff_award(tmp_path):
    run = api.expense(entity_t_ledger(tmp_path / "t"), through="2031-12-31", period="year", standard="ifrs2")
    assert run.policy.attribution == "graded" and run.policy.forfeitures == "estimate"
    assert run.schedule.expense_cents.sum() / 100 == pytest.approx(12_066_454, abs=1)


POLICIES = [("straight-line", "as-occur", "quarter", 12), ("graded", "as-occur", "month", 12),
            ("straight-line", "estimate", "quarter", 6), ("graded", "estimate", "year", 3)]


@pytest.mark.parametrize("seed", [1, 2, 3])
@pytest.mark.parametrize("attribution, forfeitures, period, fye", POLICIES)
def test_engine_agrees_with_reference_to_the_cent(tmp_path, seed, attribution, forfeitures, period, fye):
    data = random_ledger(seed, n=14)
    data["policy"] = [["key", "value"], ["fiscal_year_end_month", str(fye)]]
    folder = write_ledger(tmp_path / "l", data)
    run = api.expense(folder, through="2031-03-15", start="2027-01-01", period=period,
                      attribution=attribution, forfeitures=forfeitures)
    ends, ref = schedule_cents(run.ledger, run.fair_values.tranche_value, dt.date(2027, 1, 1),
                               dt.date(2031, 3, 15), attribution, forfeitures, period, fye)
    assert [str(e) for e in run.schedule.period_ends] == [e.isoformat() for e in ends] and len(ends) >= 3
    assert sorted(run.inputs.grant_id) == sorted(ref) and len(ref) == 14  # every grant compared, none left out
    for i, gid in enumerate(run.inputs.grant_id):
        assert run.schedule.expense_cents[i].tolist() == ref[gid], gid


def test_no_forfeitures_total_is_quantity_times_fair_value(tmp_path):
    folder = write_ledger(tmp_path / "l", tables())
    for attribution in ("straight-line", "graded"):
        run = api.expense(folder, through="2032-12-31", attribution=attribution)
        expected = np.floor(run.fair_values.grant_value * run.ledger.grants["quantity"].to_numpy() * 100 + 0.5)
        assert run.schedule.expense_cents.sum(axis=1).tolist() == expected.astype(np.int64).tolist()


def test_forfeiting_all_unvested_reverses_their_cost(tmp_path):
    ev = [{"grant_id": "G3", "event_date": "2028-06-30", "event_type": "forfeit", "quantity": "",
           "share_price": ""}]
    run = api.expense(write_ledger(tmp_path / "l", tables(events=ev)), through="2029-12-31", period="quarter")
    i = list(run.inputs.grant_id).index("G3")
    cum = run.schedule.cumulative_cents[i]
    assert cum[-1] == 0 and cum.max() > 0
    ends = [str(e) for e in run.schedule.period_ends]
    assert run.schedule.expense_cents[i][ends.index("2028-06-30")] == -cum[ends.index("2028-03-31")]


def test_cancel_recognises_remaining_cost_at_cancel_date(tmp_path):
    ev = [{"grant_id": "G3", "event_date": "2028-06-30", "event_type": "cancel", "quantity": "", "share_price": ""}]
    run = api.expense(write_ledger(tmp_path / "l", tables(events=ev)), through="2029-12-31")
    i = list(run.inputs.grant_id).index("G3")
    ends = [str(e) for e in run.schedule.period_ends]
    full = round(run.fair_values.grant_value[i] * 900 * 100)
    assert run.schedule.cumulative_cents[i][ends.index("2028-06-30")] == full
    assert run.schedule.cumulative_cents[i][-1] == full


def test_straight_line_never_below_vested_and_graded_front_loaded(tmp_path):
    folder = write_ledger(tmp_path / "l", tables())
    sl = api.expense(folder, through="2031-12-31", period="month", attribution="straight-line")
    gr = api.expense(folder, through="2031-12-31", period="month", attribution="graded")
    fv = sl.fair_values.tranche_value
    inp = sl.inputs
    for k, d in enumerate(sl.schedule.period_ends):
        vested = np.bincount(inp.t_grant, weights=np.where(inp.t_vest <= d, fv * inp.t_qty, 0.0),
                             minlength=inp.n_grants)
        assert np.all(sl.schedule.cumulative_cents[:, k] >= np.floor(vested * 100 + 0.5) - 1)
        assert np.all(gr.schedule.cumulative_cents[:, k] >= sl.schedule.cumulative_cents[:, k] - 1)


def test_period_amounts_sum_to_totals(tmp_path):
    run = api.expense(write_ledger(tmp_path / "l", random_ledger(5, 30)), through="2030-06-30")
    s = run.schedule
    assert np.array_equal(s.expense_cents.sum(axis=1), s.cumulative_cents[:, -1] - s.opening_cents)


def test_ifrs2_refuses_straight_line_and_as_occur(tmp_path):
    folder = write_ledger(tmp_path / "l", tables())
    with pytest.raises(UsageError, match="IFRS 2 requires graded"):
        api.expense(folder, through="2028-12-31", standard="ifrs2", attribution="straight-line")
    with pytest.raises(UsageError, match="IFRS 2 requires estimated"):
        api.expense(folder, through="2028-12-31", standard="ifrs2", forfeitures="as-occur")


def test_forecast_assumes_no_further_events(tmp_path):
    ev = [{"grant_id": "G1", "event_date": "2029-06-30", "event_type": "forfeit", "quantity": "", "share_price": ""}]
    folder = write_ledger(tmp_path / "l", tables(events=ev))
    run = api.expense(folder, through="2028-12-31", forecast_through="2031-12-31")
    full = api.expense(write_ledger(tmp_path / "n", tables()), through="2031-12-31")
    i = list(run.inputs.grant_id).index("G1")
    # with no event considered after the through date, the forecast equals the run without it
    assert run.schedule.cumulative_cents[i][-1] + run.schedule.forecast_cents[i].sum() == \
        full.schedule.cumulative_cents[i][-1]


@pytest.mark.parametrize("attribution", ["graded", "straight-line"])
@pytest.mark.parametrize("forfeitures", ["as-occur", "estimate"])
def test_the_cost_only_path_gives_the_full_paths_cost(tmp_path, attribution, forfeitures):
    # the schedule measures its periods with cost_only=True; the full path is the reference, on random
    # ledgers and on one with modifications (layers with their own service ends and sets)
    from grantval.attribution.engine import measure
    from tests.attribution.test_modification_schedules import shortened

    folders = [write_ledger(tmp_path / f"r{seed}", random_ledger(seed, n=14)) for seed in (1, 2)]
    folders.append(shortened(tmp_path / "m"))
    for folder in folders:
        run = api.expense(folder, through="2031-03-15", start="2025-01-01", attribution=attribution,
                          forfeitures=forfeitures)
        days = np.arange(np.datetime64("2025-01-01"), np.datetime64("2031-03-15"), 97)
        nonzero = 0
        for d in days:
            kw = dict(attribution=attribution, forfeitures=forfeitures)
            full, fast = measure(run.inputs, d, **kw).grant_cost, measure(run.inputs, d, cost_only=True, **kw).grant_cost
            assert np.array_equal(full, fast), (folder, d)
            nonzero += bool(fast.any())
        assert nonzero >= len(days) // 2  # the dates compare real costs
