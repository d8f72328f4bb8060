"""The expense bridge (grantval.reporting.bridge): lines by sequential recomputation, exact in cents.

Hand values follow the engine's documented rules (docs/expense-rules.md): straight-line
over the service period with elapsed = (date + 1 - grant date) / (vest date - grant
date) (ASC 718-10-35-8), forfeitures as they occur or by an expected-to-vest fraction
(ASC 718-10-35-3), rounding half up to cents (common practice).  The bridge's
measurement is stated in docs/close.md.
"""

from __future__ import annotations

import numpy as np
import pytest

from grantval.attribution.inputs import build_inputs
from grantval.attribution.periods import compute_schedule
from grantval.ledger import load_ledger
from grantval.measurement.fairvalue import compute_fair_values
from grantval.policy import resolve_policy
from grantval.reporting import bridge as B
from grantval.runs import close as C
from tests.factory import tables, write_ledger
from tests.runs.test_close import EVENT_HEAD, RSU, SAMPLE, cents

Q1, Q2 = np.datetime64("2027-03-31"), np.datetime64("2027-06-30")


def _bridge(folder, data, through=Q2, start="2027-01-01", **policy):
    led = load_ledger(write_ledger(folder, data))
    pol = resolve_policy(led.policy_values, **policy)
    inp = build_inputs(led, compute_fair_values(led, pol))
    s = compute_schedule(inp, pol, through, np.datetime64(start))
    br = B.compute_bridge(inp, pol, s.window_start, s.period_ends, s.opening_cents, s.cumulative_cents,
                          np.zeros(len(s.period_ends), dtype=np.int64))
    return br, s


def line(br, label, k):
    return int(br.cents[br.labels.index(label), k])


def test_forfeiture_line_by_hand(tmp_path):
    # 1000 RSUs at 10 vesting 2028-01-01 (365 days); 400 forfeited on 2027-05-15
    data = tables(grants=[dict(RSU)], events=[dict(EVENT_HEAD, grant_id="U1", event_date="2027-05-15",
                                                   event_type="forfeit", quantity="400")])
    br, s = _bridge(tmp_path / "l", data)
    assert line(br, B.GRANTED, 0) == cents(10_000 * 90 / 365)
    ongoing = cents(10_000 * 181 / 365) - cents(10_000 * 90 / 365)
    forfeit = cents(6_000 * 181 / 365) - cents(10_000 * 181 / 365)
    assert line(br, "Ongoing cost of earlier awards", 1) == ongoing
    assert line(br, "Forfeitures and cancellations", 1) == forfeit
    assert line(br, "Changes of estimate", 1) == 0
    assert (br.totals() == s.expense_cents.sum(axis=0)).all()


def test_change_of_estimate_line_by_hand(tmp_path):
    est = [{"applies_to": "*", "effective_date": "2027-01-01", "annual_forfeiture_rate": "", "expected_vest_fraction": "0.9"},
           {"applies_to": "*", "effective_date": "2027-05-01", "annual_forfeiture_rate": "", "expected_vest_fraction": "0.8"}]
    br, s = _bridge(tmp_path / "l", tables(grants=[dict(RSU)], estimates=est), forfeitures="estimate")
    assert line(br, B.GRANTED, 0) == cents(9_000 * 90 / 365)
    assert line(br, "Ongoing cost of earlier awards", 1) == cents(9_000 * 181 / 365) - cents(9_000 * 90 / 365)
    assert line(br, "Forfeitures and cancellations", 1) == 0
    assert line(br, "Changes of estimate", 1) == cents(8_000 * 181 / 365) - cents(9_000 * 181 / 365)
    assert (br.totals() == s.expense_cents.sum(axis=0)).all()


def test_granted_line_takes_new_awards_whole(tmp_path):
    later = dict(RSU, grant_id="U2", grant_date="2027-04-01")
    data = tables(grants=[dict(RSU), later])
    data["assumptions"].append(dict(data["assumptions"][0], grant_date="2027-04-01"))  # share price 10 again
    br, _ = _bridge(tmp_path / "l", data)
    u2 = cents(10_000 * 91 / 366)  # 2027-04-01..06-30 = 91 days of 2027-04-01..2028-04-01 (366 days)
    assert line(br, B.GRANTED, 1) == u2
    assert br.per_grant[B.GRANTED][1, 1] == u2 and br.per_grant["Ongoing cost of earlier awards"][1, 1] == 0


def test_sample_ledger_bridge_sums_to_each_booked_period_with_its_catch_up(tmp_path):
    reg = tmp_path / "r.gvreg"
    C.close(SAMPLE, register=reg, through="2025-12-31")
    # a late forfeiture dated in the closed 2025 Q4 (CV-0030 is outstanding then)
    led = tmp_path / "l"
    import shutil

    shutil.copytree(SAMPLE, led)
    with open(led / "events.csv", "a") as fh:
        fh.write("CV-0030,2025-11-20,forfeit,,\n")
    res = C.close(led, register=reg, through="2026-06-30")
    br, rows = res.plan.bridge, res.plan.rows
    per_period = [int(rows.loc[rows["period_end"] == e, "booked_cents"].sum()) for e in br.period_ends]
    assert br.totals().tolist() == per_period  # exact, in cents
    assert line(br, B.CATCH_UP, 0) == int(rows["catch_up_cents"].sum()) < 0 and line(br, B.CATCH_UP, 1) == 0
    # the 2026-01-01 change of the '*' estimate (0.08 -> 0.07 a year) shows in the first quarter of 2026
    assert line(br, "Changes of estimate", 0) > 0 and line(br, "Changes of estimate", 1) == 0
    # CV-0040 (granted 2025-11-17, one-year cliff) forfeits on 2026-06-16: its cost is reversed in that quarter
    assert line(br, "Forfeitures and cancellations", 1) < 0
    k40 = list(res.plan.run.inputs.grant_id).index("CV-0040")
    cum = res.plan.run.schedule.cumulative_cents[k40]
    assert cum[1] == 0  # nothing left of it at the end of the quarter
    ongoing, forfeit = (br.per_grant[k][k40, 1] for k in ("Ongoing cost of earlier awards", "Forfeitures and cancellations"))
    assert ongoing > 0 and forfeit == -(int(cum[0]) + ongoing)  # the quarter's accrual and everything before, reversed
    assert br.previous_cents[0] is not None and br.previous_cents[1] == per_period[0]


def test_a_feature_step_splits_a_line_and_the_lines_still_tie(tmp_path):
    data = tables(grants=[dict(RSU)], events=[dict(EVENT_HEAD, grant_id="U1", event_date="2027-05-15",
                                                   event_type="forfeit", quantity="400")])
    led = load_ledger(write_ledger(tmp_path / "l", data))
    pol = resolve_policy(led.policy_values)
    inp = build_inputs(led, compute_fair_values(led, pol))
    s = compute_schedule(inp, pol, Q2, np.datetime64("2027-01-01"))
    half = B.BridgeStep("Half of the ongoing cost", "test step",
                        lambda i, d0, d1, kw: (B._ongoing(i, d0, d1, kw) + B.measure(i, d0, **kw).grant_cost) / 2)
    steps = [half] + B.STEPS
    br = B.compute_bridge(inp, pol, s.window_start, s.period_ends, s.opening_cents, s.cumulative_cents,
                          [0, 0], steps=steps)
    assert "Half of the ongoing cost" in br.labels
    assert (br.totals() == s.expense_cents.sum(axis=0)).all()
    wrong = B.compute_bridge(inp, pol, s.window_start, s.period_ends, s.opening_cents, s.cumulative_cents,
                             [0, 0], steps=B.STEPS[:1])  # a step list not ending on the full recomputation
    assert wrong.totals()[1] != s.expense_cents.sum(axis=0)[1]


@pytest.mark.parametrize("label", [B.GRANTED, B.CATCH_UP] + [s.label for s in B.STEPS])
def test_every_line_has_a_stated_measurement(label):
    assert label in dict(B.notes())


def _bridge_of(folder, through, start, **policy):
    led = load_ledger(folder)
    pol = resolve_policy(led.policy_values, period="year", **policy)
    inp = build_inputs(led, compute_fair_values(led, pol), pol)
    s = compute_schedule(inp, pol, np.datetime64(through), np.datetime64(start))
    br = B.compute_bridge(inp, pol, s.window_start, s.period_ends, s.opening_cents, s.cumulative_cents,
                          np.zeros(len(s.period_ends), dtype=np.int64))
    return br, s


def _lines(br, k):
    return {label: int(br.cents[j, k]) for j, label in enumerate(br.labels)}


def test_remeasurement_line_ifrs2_ig_example_12_year_2(tmp_path):
    from tests.attribution.cash_ledgers import ifrs_example_12

    # IFRS 2 IG Example 12 (figures in tests/attribution/cash_ledgers.py: 500 x 100 SARs, 405 then 400
    # expected to vest, fair values 14.40 and 15.50 at the ends of years 1 and 2; liability 194,400 then
    # 413,333 are the standard's figures). Year 2 (2030), sequential measurement (docs/close.md):
    # ongoing  = 40,500 x 14.40 x 2/3 - 194,400           = 194,400.00  (service at the year-1 value)
    # forfeitures: 4,000 leave but 40,500 are still expected  =       0.00
    # estimate = 40,000 x 14.40 x 2/3 - 388,800            =  -4,800.00
    # remeasurement = 40,000 x (15.50 - 14.40) x 2/3       =  29,333.33
    # total 218,933.33 = 413,333.33 - 194,400 (IG Example 12's year-2 expense 218,933, from memory)
    br, s = _bridge_of(ifrs_example_12(tmp_path / "l"), "2030-12-31", "2029-01-01")
    got = _lines(br, 1)
    assert got == {B.GRANTED: 0, "Ongoing cost of earlier awards": 19_440_000, "Forfeitures and cancellations": 0,
                   "Changes of estimate": -480_000, B.REMEASUREMENT: 2_933_333, B.CATCH_UP: 0}
    assert B.MODIFICATIONS not in br.labels  # no modification in this ledger: no line
    assert _lines(br, 0)[B.GRANTED] == 19_440_000  # 40,500 x 14.40 x 1/3, granted in 2029
    assert (br.totals() == s.expense_cents.sum(axis=0)).all() and br.totals()[1] == 21_893_333


def test_remeasurement_line_takes_the_settlement_at_its_cash(tmp_path):
    from tests.attribution.cash_ledgers import IFRS_VALUES, ifrs_example_12

    # IG Example 12's ledger on calendar years: 40,300 SARs vest on 2032-01-01 (value 18.20 on 2031-12-31);
    # 15,000 are exercised on 2032-01-01 at intrinsic value 15.00 (share price 25 - exercise price 10);
    # 21.40 reused for 2032-12-31. Year 2032 by hand:
    # ongoing  = 40,300 x 18.20 - 733,460 = 0 (fully served); exercise at the carrying amount 18.20: 0
    # remeasurement = 25,300 x (21.40 - 18.20) + 15,000 x (15.00 - 18.20) = 80,960 - 48,000 = 32,960.00
    vals = IFRS_VALUES + (("2031-12-31", "18.20"), ("2032-12-31", "21.40"))
    br, s = _bridge_of(ifrs_example_12(tmp_path / "l", values=vals), "2032-12-31", "2029-01-01")
    got = _lines(br, 3)
    assert got["Ongoing cost of earlier awards"] == 0 and got["Forfeitures and cancellations"] == 0
    assert got["Changes of estimate"] == 0 and got[B.REMEASUREMENT] == 3_296_000
    assert (br.totals() == s.expense_cents.sum(axis=0)).all()
    # 2031: 2,200 leave; estimate 0.806 -> 40,300; value 15.50 -> 18.20, fully served on 2031-12-31
    # ongoing 40,000 x 15.50 x 3/3 - 413,333.33 = 206,666.67; estimate 300 x 15.50 = 4,650.00
    # (the expected count 40,000 still below the 40,300 outstanding: no forfeiture line);
    # remeasurement 40,300 x (18.20 - 15.50) = 108,810.00
    got = _lines(br, 2)
    assert got["Ongoing cost of earlier awards"] == 20_666_667 and got["Forfeitures and cancellations"] == 0
    assert got["Changes of estimate"] == 465_000 and got[B.REMEASUREMENT] == 10_881_000


def test_remeasurement_step_not_last_breaks_the_tie(tmp_path):
    from tests.attribution.cash_ledgers import ifrs_example_12

    # the bridge's own check (lines sum to the booked expense) turns to FAIL when the full recomputation
    # is left out: the values stay held at d0 and the remeasurement is missing from the lines
    led = load_ledger(ifrs_example_12(tmp_path / "l"))
    pol = resolve_policy(led.policy_values, period="year")
    inp = build_inputs(led, compute_fair_values(led, pol), pol)
    s = compute_schedule(inp, pol, np.datetime64("2030-12-31"), np.datetime64("2029-01-01"))
    wrong = B.compute_bridge(inp, pol, s.window_start, s.period_ends, s.opening_cents, s.cumulative_cents,
                             [0, 0], steps=B.STEPS[:-1])
    assert wrong.totals()[1] - s.expense_cents.sum(axis=0)[1] == -2_933_333


def test_modification_line_ifrs2_ig_example_7_year_2(tmp_path):
    from tests.attribution.test_modifications import ig_example_7

    # IFRS 2 IG Example 7 (figures from memory, tests/attribution/test_modifications.py): fair value 15,
    # repriced on 2026-01-01 with incremental value 3 per option served over the remaining two years.
    # Year 2 (2026), sequential measurement: ongoing 39,000 x 15 x 2/3 - 195,000 = 195,000.00;
    # modification 39,000 x 3 x 1/2 = 58,500.00 (estimate as of d0: 390 x 100); forfeitures 0;
    # estimate 500 x (15 x 2/3 + 3 x 1/2) = 5,750.00. Total 259,250 (IG Example 7's year-2 expense).
    br, s = _bridge_of(ig_example_7(tmp_path / "l"), "2027-12-31", "2025-01-01", standard="ifrs2")
    got = _lines(br, 1)
    assert got == {B.GRANTED: 0, "Ongoing cost of earlier awards": 19_500_000, B.MODIFICATIONS: 5_850_000,
                   "Forfeitures and cancellations": 0, "Changes of estimate": 575_000, B.CATCH_UP: 0}
    assert B.REMEASUREMENT not in br.labels
    # year 3: the modification is dated in an earlier period, so its cost is ongoing: 0 on the line
    assert _lines(br, 2)[B.MODIFICATIONS] == 0
    assert br.totals().tolist() == [19_500_000, 25_925_000, 26_035_000]
    assert (br.totals() == s.expense_cents.sum(axis=0)).all()


def test_modification_line_takes_an_acceleration(tmp_path):
    from tests.attribution.test_modifications import leaver_accelerated

    # invented (tests/attribution/test_modifications.py): 1,000 options at 10, four-year cliff from
    # 2027-01-01, accelerated on 2029-01-01 with values 4 before and 6 after, expected to vest (IFRS 2:
    # grant-date cost stands, incremental 2 added, B43(a), (c)). Year 2029: without the modification
    # 1,000 x 10 x (1,096 - 731)/1,461 accrues (ongoing); with it the rest of the 10,000 and the
    # incremental 2,000 are recognised on 2029-01-01.
    br, s = _bridge_of(leaver_accelerated(tmp_path / "l", expected="yes"), "2029-12-31", "2027-01-01",
                       standard="ifrs2")
    before = cents(10_000 * 731 / 1461)  # 2027-01-01..2028-12-31 served, of 1,461 days
    ongoing = cents(10_000 * 1096 / 1461) - before
    got = _lines(br, 2)
    assert got["Ongoing cost of earlier awards"] == ongoing
    assert got[B.MODIFICATIONS] == 12_000 * 100 - before - ongoing
    assert (br.totals() == s.expense_cents.sum(axis=0)).all()


def test_modification_step_left_out_breaks_the_tie(tmp_path):
    from tests.attribution.test_modifications import ig_example_7

    led = load_ledger(ig_example_7(tmp_path / "l"))
    pol = resolve_policy(led.policy_values, period="year", standard="ifrs2")
    inp = build_inputs(led, compute_fair_values(led, pol), pol)
    s = compute_schedule(inp, pol, np.datetime64("2026-12-31"), np.datetime64("2025-01-01"))
    # the ongoing state without the period's modification is the one thing that separates the line:
    # measured on the full inputs instead, the modification line is 0 and its cost shows as ongoing
    broken = [B.BridgeStep(B.STEPS[0].label, "", B._modified)] + B.STEPS[1:]
    br = B.compute_bridge(inp, pol, s.window_start, s.period_ends, s.opening_cents, s.cumulative_cents,
                          [0, 0], steps=broken)
    assert _lines(br, 1)[B.MODIFICATIONS] == 0 and _lines(br, 1)["Ongoing cost of earlier awards"] == 25_350_000
