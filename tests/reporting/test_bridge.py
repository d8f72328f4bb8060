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
