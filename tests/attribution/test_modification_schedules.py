"""Modifications that change the vesting schedule (grantval/attribution/schedule_change.py).

Sources: ASC 718-20-55-107/108 (Example 14; quoted in the Deloitte roadmap 6.3: cost is recognised if
the award vests under the modified conditions or would have vested under the original ones); PwC
guide SC 4.2 step 3 (ASC 718: the remaining unrecognised original cost and the increment are
recognised prospectively over the remaining requisite service); IFRS 2 B43(c) and B44(c) (from
memory: a shorter vesting period is taken into account, a longer one is not); IFRS 2.20 / IG Example 2
(from memory: a revised vesting period is a cumulative catch-up).  Every figure below is worked by
hand from day counts (days between dates; the engine counts the measurement day as served).
"""

import math

import numpy as np
import pytest

from grantval.errors import LedgerError
from grantval.ledger import load_ledger
from grantval.reporting.modification_tables import modification_table
from tests.attribution.test_modifications import OPTION, _assumption, _mod, run
from tests.factory import write_ledger
from tests.pricing import ql_reference as qlr


def days(a, b):
    return int((np.datetime64(b) - np.datetime64(a)).astype(int))


def shortened(folder, **mod):
    # invented: 1,000 options granted 2025-01-01, fair value 12, four annual tranches of 250
    # (2026-01-01 ... 2029-01-01). On 2026-01-01 the schedule becomes 36 months every 9: 250 units
    # on 2025-10-01, 2026-07-01, 2027-04-01, 2028-01-01. Tranche 1 vests on the modification date (as
    # before); tranches 2-4 move to 2026-07-01, 2027-04-01, 2028-01-01. Values before = after (5):
    # no incremental value, only the schedule changes.
    cells = dict(vest_months="36", vest_every_months="9", fair_value_before="5", fair_value_after="5")
    cells.update(mod)
    grants = [{**OPTION, "grant_id": "S", "grant_date": "2025-01-01", "quantity": "1000", "vest_months": "48",
               "vest_every_months": "12"}]
    return write_ledger(folder, {"grants": grants, "assumptions": [_assumption("g", fair_value="12")],
                                 "modifications": [_mod("S", "2026-01-01", **cells)]})


def test_new_schedule_moves_the_vest_dates_in_force(tmp_path):
    led, _, inp, _ = run(shortened(tmp_path / "l"), "2028-12-31")
    assert [str(d) for d in inp.t_vest] == ["2026-01-01", "2026-07-01", "2027-04-01", "2028-01-01"]
    # the ledger keeps the tranches as granted; the events are allocated under the dates in force
    assert [str(d) for d in led.tranches["vest_date"].to_numpy("datetime64[D]")] == [
        "2026-01-01", "2027-01-01", "2028-01-01", "2029-01-01"]


def test_ifrs2_shorter_vesting_is_taken_into_account(tmp_path):
    # IFRS 2 B43(c): the grant-date value of each tranche (250 x 12 = 3,000) is recognised over the grant
    # date to its new vesting date, with a catch-up on the modification date (IFRS 2.20)
    _, _, _, s = run(shortened(tmp_path / "l"), "2028-12-31", standard="ifrs2")
    g = "2025-01-01"
    y2025 = 3000 * (1 + 365 / 730 + 365 / 1095 + 365 / 1461)         # before the modification: as granted
    y2026 = 3000 * (1 + 1 + days(g, "2027-01-01") / days(g, "2027-04-01") + 730 / days(g, "2028-01-01"))
    expect = [y2025, y2026, 12_000, 12_000]
    assert np.abs(s.cumulative_cents[0] - np.round(np.array(expect) * 100)).max() <= 1


def test_asc718_shorter_vesting_recognises_the_rest_prospectively(tmp_path):
    # PwC SC 4.2 step 3: on 2026-01-01 tranche 3 has 3,000 x 365/1,095 = 1,000 recognised; the other
    # 2,000 over the 455 days to 2027-04-01. Tranche 4: 3,000 x 365/1,461, the rest over 730 days.
    _, _, _, s = run(shortened(tmp_path / "l"), "2028-12-31", standard="asc718", attribution="graded")
    t3 = 1000 + 2000 * 365 / days("2026-01-01", "2027-04-01")
    t4 = 3000 * 365 / 1461 + 3000 * 1096 / 1461 * 365 / 730
    y2025 = 3000 * (1 + 365 / 730 + 365 / 1095 + 365 / 1461)
    expect = [y2025, 3000 + 3000 + t3 + t4, 12_000, 12_000]
    assert np.abs(s.cumulative_cents[0] - np.round(np.array(expect) * 100)).max() <= 1


@pytest.mark.parametrize("standard,attribution", [("asc718", "straight-line"), ("asc718", "graded"),
                                                  ("ifrs2", "graded")])
def test_cost_before_the_modification_does_not_move(tmp_path, standard, attribution):
    # the 2025 figure is the same with and without the (2026-01-01) schedule change
    _, _, _, s = run(shortened(tmp_path / "l"), "2028-12-31", standard=standard, attribution=attribution)
    folder = shortened(tmp_path / "plain")
    (folder / "modifications.csv").unlink()
    _, _, _, plain = run(folder, "2028-12-31", standard=standard, attribution=attribution)
    assert s.cumulative_cents[0, 0] == plain.cumulative_cents[0, 0]
    assert s.cumulative_cents[0, -1] == plain.cumulative_cents[0, -1] == 1_200_000


def test_asc718_straight_line_shorter_award(tmp_path):
    # straight-line over the award: 12,000 over 2025-01-01 .. 2029-01-01 (1,461 days) before; on
    # 2026-01-01 12,000 x 365/1,461 is recognised and the rest over the 730 days to 2028-01-01
    # (prospectively, PwC SC 4.2 step 3); the tranches vested by a date are a floor (ASC 718-10-35-8)
    _, _, _, s = run(shortened(tmp_path / "l"), "2028-12-31", standard="asc718", attribution="straight-line")
    done = 12000 * 365 / 1461
    y2026 = max(done + (12000 - done) * 365 / 730, 6000)
    assert abs(s.cumulative_cents[0, 0] - round(done * 100)) <= 1
    assert abs(s.cumulative_cents[0, 1] - round(y2026 * 100)) <= 1
    assert s.cumulative_cents[0, 2] == 1_200_000


def lengthened(folder, expected="yes", before="5", after="5", leaves=True):
    # invented: 1,000 options granted 2025-01-01, fair value 12, two annual tranches of 500
    # (2026-01-01, 2027-01-01). On 2025-07-01 the schedule becomes 48 months every 24: 500 units on
    # 2027-01-01 and 2029-01-01. The holder leaves on 2027-06-01: tranche 2 (unvested under the new
    # schedule) is forfeited, after the date it would have vested on under the original schedule.
    grants = [{**OPTION, "grant_id": "X", "grant_date": "2025-01-01", "quantity": "1000", "vest_months": "24",
               "vest_every_months": "12"}]
    mods = [_mod("X", "2025-07-01", vest_months="48", vest_every_months="24", fair_value_before=before,
                 fair_value_after=after, original_expected_to_vest=expected)]
    events = [{"grant_id": "X", "event_date": "2027-06-01", "event_type": "forfeit", "quantity": "",
               "share_price": ""}] if leaves else []
    return write_ledger(folder, {"grants": grants, "assumptions": [_assumption("g", fair_value="12")],
                                 "modifications": mods, "events": events})


@pytest.mark.parametrize("standard,attribution,first", [("asc718", "graded", 900_000), ("ifrs2", "graded", 900_000),
                                                         ("asc718", "straight-line", 600_000)])
def test_longer_vesting_keeps_the_original_cost_when_the_original_terms_were_met(tmp_path, standard, attribution,
                                                                                  first):
    # ASC 718-20-55-107 (cost recognised if the award would have vested under the original conditions:
    # Types I and II); IFRS 2 B44(c) (a longer vesting period is not taken into account). Graded:
    # tranche 1 6,000 over 2025 (365/365); tranche 2 6,000 over 730 days (3,000 in 2025). Straight-line:
    # 12,000 over the original 730 days (6,000 in 2025). 12,000 by 2026-12-31. The leaver of 2027-06-01
    # served to 2027-01-01: tranche 2's 6,000 stays.
    _, _, _, s = run(lengthened(tmp_path / "l"), "2027-12-31", standard=standard, attribution=attribution)
    assert list(s.cumulative_cents[0]) == [first, 1_200_000, 1_200_000]


def test_asc718_type_iv_longer_vesting_reverses_on_forfeiture(tmp_path):
    # ASC 718-20-55-108: not expected to vest under the original terms: cost only if the modified award
    # vests; the leaver forfeits tranche 2 (6,000 reversed)
    _, _, _, s = run(lengthened(tmp_path / "l", expected="no"), "2027-12-31", standard="asc718",
                     attribution="graded")
    assert list(s.cumulative_cents[0]) == [900_000, 1_200_000, 600_000]


def test_longer_vesting_without_the_keep_rule_would_reverse(tmp_path, monkeypatch):
    # the check above fails when layers are not kept for units forfeited after their end
    from grantval.attribution import engine

    monkeypatch.setattr(engine, "_kept_units", lambda inp, pre, layers, forf: np.zeros(len(layers)))
    _, _, _, s = run(lengthened(tmp_path / "l"), "2027-12-31", standard="asc718", attribution="graded")
    assert s.cumulative_cents[0, -1] == 600_000


def test_longer_vesting_with_an_increment(tmp_path):
    # value 5 before, 6 after: 1 per unit. ASC 718 (Type I): the increment is served from 2025-07-01 to
    # the new vesting dates (549 and 1,280 days); tranche 2's is reversed by the leaver (the modified
    # condition is not met). IFRS 2 B44(c): the longer period is ignored: served to the original dates
    # (184 and 549 days) and kept as the original cost.
    folder = lengthened(tmp_path / "l", after="6")
    _, _, _, a = run(folder, "2027-12-31", standard="asc718", attribution="graded")
    served = days("2025-07-01", "2026-01-01")                                          # 184
    assert abs(a.cumulative_cents[0, 0] - round((9000 + 500 * served / 549 + 500 * served / 1280) * 100)) <= 1
    assert a.cumulative_cents[0, 2] == 1_250_000                                       # 12,000 + 500
    _, _, _, i = run(folder, "2027-12-31", standard="ifrs2")
    assert abs(i.cumulative_cents[0, 0] - round((9000 + 500 + 500 * served / 549) * 100)) <= 1
    assert i.cumulative_cents[0, 2] == 1_300_000                                       # 12,000 + 1,000


def test_exercise_before_the_new_vesting_date_is_refused(tmp_path):
    folder = lengthened(tmp_path / "l", leaves=False)
    write_ledger(folder, {"events": [{"grant_id": "X", "event_date": "2026-06-01", "event_type": "exercise",
                                      "quantity": "100", "share_price": "30"}]})
    with pytest.raises(LedgerError) as e:
        load_ledger(folder)
    assert any(p.source == "events.csv" and p.row == 2 for p in e.value.problems), e.value.problems


def test_type_iii_when_a_new_schedule_vests_at_once(tmp_path):
    # ASC 718-20-55-108 (Case C): not expected to vest; the new schedule (24 months every 12) vests
    # tranche 2 (2027-01-01 -> 2026-01-01 = the modification date) at once and tranches 3, 4 on
    # 2027-01-01: their cost so far is reversed and the modified value (250 x 5 = 1,250 each) recognised,
    # tranche 2's at once, tranches 3 and 4's over the 365 days to 2027-01-01 (all served by 2026-12-31)
    folder = shortened(tmp_path / "l", vest_months="24", vest_every_months="12", original_expected_to_vest="no")
    led, _, inp, s = run(folder, "2026-12-31", standard="asc718", attribution="graded")
    row = modification_table(inp.modifications, led).iloc[0]
    assert "Type III" in row["treatment"]
    assert s.cumulative_cents[0, -1] == (3000 + 3 * 1250) * 100


def test_type_iii_with_a_shorter_schedule(tmp_path):
    # ASC 718-20-55-108: the shortened ledger with the original not expected to vest: on 2026-01-01 the
    # cost of tranches 2-4 is reversed and 1,250 each is recognised from 2026-01-01 to the new dates
    # (2026-07-01, 2027-04-01 = 455 days, 2028-01-01 = 730 days); tranche 1 vested on the date: 3,000
    folder = shortened(tmp_path / "l", original_expected_to_vest="no")
    _, _, _, s = run(folder, "2028-12-31", standard="asc718", attribution="graded")
    y2025 = 3000 * (1 + 365 / 730 + 365 / 1095 + 365 / 1461)
    y2026 = 3000 + 1250 + 1250 * 365 / 455 + 1250 * 365 / 730
    expect = np.round(np.array([y2025, y2026, 3000 + 1250 * 3, 3000 + 1250 * 3]) * 100)
    assert np.abs(s.cumulative_cents[0] - expect).max() <= 1


def test_type_iii_with_a_shorter_schedule_straight_line(tmp_path):
    # straight-line over the award (ASC 718-10-35-8, tranches vested by a date are a floor): 2025 as
    # granted, 12,000 x 365/1,461; 2026: the floor, tranche 1 (3,000) + tranche 2 (1,250, vested
    # 2026-07-01) = 4,250 is above the spread (tranche 1's rest over 730 days + 3,750 x 365/730);
    # 2027: 3,000 + 3,750 served in full by 2027-12-31
    folder = shortened(tmp_path / "l", original_expected_to_vest="no")
    _, _, _, s = run(folder, "2028-12-31", standard="asc718", attribution="straight-line")
    t1 = 3000 * 365 / 1461 + 3000 * 1096 / 1461 * 365 / 730
    assert t1 + 3750 * 365 / 730 < 4250
    expect = np.round(np.array([12000 * 365 / 1461, 4250, 6750, 6750]) * 100)
    assert np.abs(s.cumulative_cents[0] - expect).max() <= 1


def test_modifications_table_shows_the_schedule_before_and_after(tmp_path):
    led, _, inp, _ = run(shortened(tmp_path / "l"), "2028-12-31")
    row = modification_table(inp.modifications, led).iloc[0]
    assert row["vesting_before"] == "48 months, every 12, cliff 0"
    assert row["vesting_after"] == "36 months, every 9, cliff 0"
    assert row["last_vest_date_before"] == np.datetime64("2029-01-01")
    assert row["last_vest_date_after"] == np.datetime64("2028-01-01")
    assert "vesting schedule" in row["change"]


def test_bsm_values_of_a_shorter_schedule(tmp_path):
    # valued with the modification's assumptions (S 15, vol 0.4, r 0.04, q 0) under the tranche unit:
    # each tranche's simplified-method term from the modification date, (vesting + remaining life) / 2
    # (SEC SAB Topic 14.D.2), before and after; cross-checked with QuantLib's analytic European engine
    grants = [{**OPTION, "grant_id": "S", "grant_date": "2025-01-01", "quantity": "1000", "vest_months": "48",
               "vest_every_months": "12"}]
    a = [_assumption("g", fair_value="12"), _assumption("m", price="15", vol="0.4", rate="0.04")]
    folder = write_ledger(tmp_path / "l", {
        "grants": grants, "assumptions": a, "policy": [{"key": "valuation_unit", "value": "tranche"}],
        "modifications": [_mod("S", "2026-01-01", vest_months="36", vest_every_months="9", assumption_set="m")]})
    _, _, inp, _ = run(folder, "2028-12-31", standard="asc718", attribution="graded")
    v = inp.modifications.values
    life = days("2026-01-01", "2035-01-01") / 365.25
    for j, (old, new) in enumerate([("2026-01-01", "2026-01-01"), ("2027-01-01", "2026-07-01"),
                                    ("2028-01-01", "2027-04-01"), ("2029-01-01", "2028-01-01")]):
        for value, vest in ((v.before[j], old), (v.after[j], new)):
            term = (days("2026-01-01", vest) / 365.25 + life) / 2
            days_ql = 365
            scale = term * 365 / days_ql
            ref = qlr.european(15, 20, days_ql, 0.04 * scale, 0.4 * math.sqrt(scale), 0.0)
            assert value == pytest.approx(ref, abs=1e-9)


def shortened_improbable(folder):
    return shortened(folder, original_expected_to_vest="no")


@pytest.mark.parametrize("ledger", [shortened, lengthened, shortened_improbable])
@pytest.mark.parametrize("standard,attribution", [("asc718", "graded"), ("asc718", "straight-line"),
                                                  ("ifrs2", "graded")])
@pytest.mark.parametrize("through", ["2025-12-31", "2027-12-31"])
def test_expense_workbook_checks_pass_with_schedule_changes(tmp_path, ledger, standard, attribution, through):
    from grantval.runs.expense import expense, write_expense

    run_ = expense(ledger(tmp_path / "l"), through=through, period="year", standard=standard,
                   attribution=attribution)
    out = write_expense(run_, tmp_path / "e.xlsx", None, timestamp=False, share_price=15.0)
    failed = [(c.name, c.a, c.b) for c in out.checks if not c.tool_pass]
    assert failed == []


def test_shorter_vesting_without_the_re_spread_layers_differs(tmp_path, monkeypatch):
    # the IFRS 2 B43(c) figure above needs layers A, B and C: without them 2026 is the original terms'
    from grantval.attribution import schedule_change

    empty = schedule_change.CostLayers(np.zeros(0, np.int64), np.zeros(0), np.zeros(0, "datetime64[D]"),
                                       np.zeros(0, np.int64), np.zeros(0, dtype=object))
    monkeypatch.setattr(schedule_change, "_respread", lambda *a, **k: empty)
    _, _, _, s = run(shortened(tmp_path / "l"), "2028-12-31", standard="ifrs2")
    g = "2025-01-01"
    b43c = 3000 * (1 + 1 + days(g, "2027-01-01") / days(g, "2027-04-01") + 730 / days(g, "2028-01-01"))
    assert abs(s.cumulative_cents[0, 1] - round(b43c * 100)) > 100


def _append_modification(folder, **cells) -> None:
    """Add one row to the ledger's modifications.csv (cells not given are blank)."""
    lines = (folder / "modifications.csv").read_text().splitlines()
    header = lines[0].split(",")
    row = dict.fromkeys(header, "") | cells
    (folder / "modifications.csv").write_text("\n".join(lines + [",".join(row[h] for h in header)]) + "\n")


def test_a_later_modification_sees_the_new_schedule(tmp_path):
    # a repricing on 2026-06-01 after the 2026-01-01 schedule change: its terms before are the new dates
    folder = shortened(tmp_path / "l")
    _append_modification(folder, grant_id="S", modification_date="2026-06-01", exercise_price="10",
                         fair_value_before="3", fair_value_after="4")
    led, _, inp, _ = run(folder, "2028-12-31")
    v = inp.modifications.values
    second = v.p_mod == 1
    assert [str(d) for d in v.vest_before[second]] == ["2026-01-01", "2026-07-01", "2027-04-01", "2028-01-01"]
    assert modification_table(inp.modifications, led).iloc[1]["change"] == "repricing"


def increased(folder, after="6", assumption=False):
    # invented: 1,000 options granted 2025-01-01 at fair value 12, two annual tranches of 500
    # (2026-01-01, 2027-01-01). On 2025-07-01 the quantity becomes 1,500 (500 added) and the option is
    # repriced: value per unit 4 before, 6 after (outside valuation). The 500 added units vest with the
    # unvested tranches in proportion (250 on 2026-01-01, 250 on 2027-01-01).
    grants = [{**OPTION, "grant_id": "Q", "grant_date": "2025-01-01", "quantity": "1000", "vest_months": "24",
               "vest_every_months": "12"}]
    cells = dict(quantity="1500", exercise_price="15")
    cells.update(dict(assumption_set="m") if assumption else dict(fair_value_before="4", fair_value_after=after))
    a = [_assumption("g", fair_value="12"), _assumption("m", price="18", vol="0.4", rate="0.04")]
    return write_ledger(folder, {"grants": grants, "assumptions": a,
                                 "modifications": [_mod("Q", "2025-07-01", **cells)]})


@pytest.mark.parametrize("standard", ["asc718", "ifrs2"])
def test_quantity_increase_adds_units_at_the_modified_value(tmp_path, standard):
    # IFRS 2 B43(b) (from memory): the added units at the modification-date value (6), from 2025-07-01
    # to their vesting; ASC 718-20-35-3: incremental = 1,500 x 6 - 1,000 x 4 = 5,000 = 1,000 x (6 - 4)
    # + 500 x 6. Original: 500 x 12 over 365 days + 500 x 12 over 730 days; increment 1,000 x 2 and the
    # added 500 x 6 from 2025-07-01 to 2026-01-01 (184 days) and 2027-01-01 (549 days).
    led, _, inp, s = run(increased(tmp_path / "l"), "2026-12-31", standard=standard, attribution="graded")
    ids = list(led.grants["grant_id"])
    assert ids == ["Q", "Q+2025-07-01"]
    kid = led.tranches[led.tranches["grant_idx"] == 1]
    assert kid["quantity"].tolist() == [250, 250]
    assert [str(d) for d in kid["vest_date"].to_numpy("datetime64[D]")] == ["2026-01-01", "2027-01-01"]
    served = days("2025-07-01", "2026-01-01")        # 184: the first tranche is served by 2025-12-31
    y2025 = 6000 + 6000 * 365 / 730 + 500 * 2 + 500 * 2 * served / 549 + 250 * 6 + 250 * 6 * served / 549
    total = s.cumulative_cents[:, 0].sum()
    assert abs(total - round(y2025 * 100)) <= 2
    assert s.cumulative_cents[:, 1].sum() == (12_000 + 2_000 + 3_000) * 100
    row = modification_table(inp.modifications, led).iloc[0]
    assert row["units_added"] == 500 and "increased quantity" in row["change"]
    assert row["incremental_cost"] == pytest.approx(5000.0)


def test_added_units_follow_a_leaver(tmp_path):
    # the holder leaves on 2026-06-01: the unvested 500 original units and the 250 added units of
    # 2027-01-01 are forfeited (the ledger repeats the blank-quantity forfeit for the added units)
    folder = increased(tmp_path / "l")
    write_ledger(folder, {"events": [{"grant_id": "Q", "event_date": "2026-06-01", "event_type": "forfeit",
                                      "quantity": "", "share_price": ""}]})
    led, _, _, s = run(folder, "2026-12-31", standard="ifrs2")
    assert (led.changes["kind"] == "forfeit").sum() == 2
    # what stays: the first tranche's 6,000 + 500 x 2 increment + 250 x 6 added
    assert s.cumulative_cents[:, 1].sum() == (6000 + 1000 + 1500) * 100


def test_added_units_valued_with_the_assumption_set(tmp_path):
    # the added units' grant-date value is computed from the row's assumptions (S 18, K 15, vol 0.4,
    # r 0.04, BSM; valuation unit "award": one value at the simplified term (SEC SAB Topic 14.D.2) on the
    # units-weighted vesting time from 2025-07-01, (184 + 549) / 2 days), the modification's "after" value
    led, _, inp, _ = run(increased(tmp_path / "l", assumption=True), "2026-12-31", standard="asc718",
                         attribution="graded")
    from grantval.measurement.fairvalue import compute_fair_values
    from grantval.policy import resolve_policy

    fv = compute_fair_values(led, resolve_policy(led.policy_values, standard="asc718"))
    kid = (led.tranches["grant_idx"] == 1).to_numpy()
    life = days("2025-07-01", "2035-01-01") / 365.25
    term = ((days("2025-07-01", "2026-01-01") + days("2025-07-01", "2027-01-01")) / 2 / 365.25 + life) / 2
    ref = qlr.european(18, 15, 365, 0.04 * term, 0.4 * math.sqrt(term), 0.0)   # QuantLib, 1 year rescaled
    assert np.asarray(fv.tranche_value)[kid] == pytest.approx([ref, ref], abs=1e-9)
    assert inp.modifications.values.after == pytest.approx([ref, ref], abs=1e-9)


@pytest.mark.parametrize("ledger", [increased, shortened, lengthened])
def test_disclose_checks_pass_with_schedule_and_quantity_changes(tmp_path, ledger):
    # the activity roll-forwards (the added units are granted on the modification date) and the
    # modification disclosure tie-out hold
    import grantval.runs.disclose as RD

    run_ = RD.disclose(ledger(tmp_path / "l"), start="2025-01-01", through="2027-12-31", standard="asc718")
    assert [c.name for c in run_.sections.checks if not c.tool_pass] == []
    t = run_.sections.tables["modification_disclosure.csv"]
    assert len(t) == 1


def test_increase_workbook_checks_pass(tmp_path):
    from grantval.runs.expense import expense, write_expense

    run_ = expense(increased(tmp_path / "l"), through="2026-12-31", period="year", standard="ifrs2")
    out = write_expense(run_, tmp_path / "e.xlsx", None, timestamp=False, share_price=15.0)
    assert [c.name for c in out.checks if not c.tool_pass] == []


def test_added_units_grant_id_already_taken(tmp_path):
    folder = increased(tmp_path / "l")
    g = (folder / "grants.csv").read_text().splitlines()
    (folder / "grants.csv").write_text("\n".join(g + [g[1].replace("Q,", "Q+2025-07-01,", 1)]) + "\n")
    with pytest.raises(LedgerError) as e:
        load_ledger(folder)
    hit = [p for p in e.value.problems if "is also a grant of the grants table" in p.message]
    assert hit and hit[0].source == "modifications.csv" and hit[0].row == 2 and hit[0].column == "grant_id"


def test_added_units_count_is_checked_against_the_ledgers_allocation(tmp_path, monkeypatch):
    # the units added are counted before the ledger allocates the events; adjust counts again and a
    # difference is an error on the modification's row (shown by miscounting on purpose)
    from grantval.ledger.ext import added_units

    real = added_units._outstanding_before
    monkeypatch.setattr(added_units, "_outstanding_before", lambda *a: real(*a) - 1)
    with pytest.raises(LedgerError) as e:
        load_ledger(increased(tmp_path / "l"))
    hit = [p for p in e.value.problems if p.column == "quantity"]
    assert hit and hit[0].row == 2 and "grant Q+2025-07-01 holds 501" in hit[0].message


def test_later_modification_of_the_grant_warns_about_the_added_units(tmp_path):
    folder = increased(tmp_path / "l")
    _append_modification(folder, grant_id="Q", modification_date="2026-03-01", expiration_date="2036-01-01",
                         fair_value_before="5", fair_value_after="5.5")
    led = load_ledger(folder)
    w = [p for p in led.warnings if p.source == "modifications.csv"]
    assert w and w[0].row == 3 and "Q+2025-07-01" in w[0].message


@pytest.mark.parametrize("ledger", [shortened, lengthened])
def test_rate_estimates_before_the_modification_do_not_move(tmp_path, ledger):
    # under an annual forfeiture rate the units expected to vest depend on the time left to the service
    # end; before the modification date that is the end in force then, so the first year's figure is
    # the same with and without the (later) change of schedule
    est = [{"applies_to": "*", "effective_date": "2025-01-01", "annual_forfeiture_rate": "0.1",
            "expected_vest_fraction": ""}]
    folder = ledger(tmp_path / "l")
    write_ledger(folder, {"estimates": est})
    plain = ledger(tmp_path / "plain")
    write_ledger(plain, {"estimates": est})
    (plain / "modifications.csv").unlink()
    through = "2025-06-30" if ledger is lengthened else "2025-12-31"
    _, _, _, s = run(folder, through, standard="asc718", attribution="graded", forfeitures="estimate")
    _, _, _, p = run(plain, through, standard="asc718", attribution="graded", forfeitures="estimate")
    assert s.cumulative_cents[0, 0] == p.cumulative_cents[0, 0]


def test_rate_estimates_would_move_without_the_end_history(tmp_path, monkeypatch):
    from grantval.attribution.inputs import Prepared

    monkeypatch.setattr(Prepared, "end_at", lambda self, dn: self.t_end)
    est = [{"applies_to": "*", "effective_date": "2025-01-01", "annual_forfeiture_rate": "0.1",
            "expected_vest_fraction": ""}]
    folder = shortened(tmp_path / "l")
    write_ledger(folder, {"estimates": est})
    plain = shortened(tmp_path / "plain")
    write_ledger(plain, {"estimates": est})
    (plain / "modifications.csv").unlink()
    _, _, _, s = run(folder, "2025-12-31", standard="asc718", attribution="graded", forfeitures="estimate")
    _, _, _, p = run(plain, "2025-12-31", standard="asc718", attribution="graded", forfeitures="estimate")
    assert s.cumulative_cents[0, 0] != p.cumulative_cents[0, 0]


def test_increase_with_an_unknown_assumption_set(tmp_path):
    folder = increased(tmp_path / "l", assumption=True)
    text = (folder / "modifications.csv").read_text().replace(",m,", ",nope,")
    (folder / "modifications.csv").write_text(text)
    with pytest.raises(LedgerError) as e:
        load_ledger(folder)
    got = {(p.source, p.row, p.column) for p in e.value.problems}
    assert ("modifications.csv", 2, "assumption_set") in got and ("modifications.csv", 2, "quantity") in got
    assert all(p.source == "modifications.csv" for p in e.value.problems), e.value.problems


def test_modifications_sheet_shows_schedule_and_quantity_changes(tmp_path):
    from openpyxl import load_workbook

    from grantval.io.xlsx.write import write_workbook
    from grantval.reporting.modification_tables import COLUMNS, modification_sheets

    led, pol, inp, _ = run(increased(tmp_path / "q"), "2026-12-31", standard="ifrs2")
    write_workbook(tmp_path / "q.xlsx", modification_sheets(inp.modifications, led, pol.attribution))
    row = {c: cell.value for c, cell in zip(COLUMNS, load_workbook(tmp_path / "q.xlsx")["modifications"][2])}
    assert (row["units_before"], row["units_added"], row["units_after"]) == (1000, 500, 1500)
    assert row["change"] == "repricing, increased quantity"
    led, pol, inp, _ = run(shortened(tmp_path / "s"), "2028-12-31", standard="ifrs2")
    write_workbook(tmp_path / "s.xlsx", modification_sheets(inp.modifications, led, pol.attribution))
    row = {c: cell.value for c, cell in zip(COLUMNS, load_workbook(tmp_path / "s.xlsx")["modifications"][2])}
    assert row["vesting_before"] == "48 months, every 12, cliff 0" and row["units_accelerated"] == 750
    assert row["change"] == "vesting schedule (earlier)" and "B43(c)" in row["treatment"]


def test_rsu_quantity_increase_is_described_without_an_expiration_change(tmp_path):
    # an RSU has no expiration date: both sides are blank (NaT), which is no change (it read "shortened
    # expiration" before, as NaT != NaT)
    grants = [{**OPTION, "grant_id": "U", "award_type": "rsu", "exercise_price": "", "expiration_date": "",
               "grant_date": "2025-01-01", "quantity": "1000", "vest_months": "24", "vest_every_months": "12"}]
    a = [_assumption("g", fair_value="12"), _assumption("m", fair_value="15")]
    folder = write_ledger(tmp_path / "l", {"grants": grants, "assumptions": a,
                                           "modifications": [_mod("U", "2025-07-01", quantity="1500",
                                                                  fair_value_before="12", fair_value_after="15")]})
    led, _, inp, _ = run(folder, "2025-12-31", standard="asc718")
    assert modification_table(inp.modifications, led).iloc[0]["change"] == "increased quantity"


def test_exercisable_options_follow_a_shortened_schedule(tmp_path):
    # 1,200 options, four annual tranches of 300 from 2025-01-01; on 2026-01-01 the schedule becomes 24 months
    # (two tranches of 600: 2026-01-01 and 2027-01-01, docs/modifications.md).  ASC 718-10-50-2 activity:
    # exercisable at the end of 2026 = the 600 vested on 2026-01-01 (it read 300, the original schedule's).
    from grantval import api

    grants = [{**OPTION, "grant_id": "S", "grant_date": "2025-01-01", "quantity": "1200", "vest_months": "48",
               "vest_every_months": "12", "cliff_months": "12"}]
    a = [_assumption("g", fair_value="5")]
    folder = write_ledger(tmp_path / "l", {"grants": grants, "assumptions": a, "modifications": [
        _mod("S", "2026-01-01", vest_months="24", fair_value_before="5", fair_value_after="5")]})
    run = api.disclose(folder, start="2026-01-01", through="2026-12-31")
    lines = run.disclosure.options.set_index("line")["number"]
    assert lines["Exercisable at end"] == 600


def split_schedule(folder):
    # invented: 1,000 options granted 2025-01-01, fair value 12, four annual tranches of 250
    # (2026-01-01 ... 2029-01-01). On 2025-07-01 the schedule becomes 36 months every 12: 333 / 333 / 334
    # on 2026-01-01, 2027-01-01, 2028-01-01. Units in vesting order: tranche 2 (251-500) is cut into 83
    # units moving to 2026-01-01 and 167 keeping 2027-01-01; tranche 3 (501-750) into 166 moving to
    # 2027-01-01 and 84 keeping 2028-01-01; tranche 4 moves to 2028-01-01. Values before = after.
    grants = [{**OPTION, "grant_id": "S", "grant_date": "2025-01-01", "quantity": "1000", "vest_months": "48",
               "vest_every_months": "12"}]
    return write_ledger(folder, {"grants": grants, "assumptions": [_assumption("g", fair_value="12")],
                                 "modifications": [_mod("S", "2025-07-01", vest_months="36", fair_value_before="5",
                                                        fair_value_after="5")]})


def test_a_split_tranche_asc718_recognises_each_piece_prospectively(tmp_path):
    # PwC SC 4.2 step 3, piece by piece: cost to the modification date F (d - s)/(E - s) as granted,
    # the rest F (E - d)/(E - s) over d..V (the piece's new vesting date); pieces that keep their date
    # are as granted. s = 2025-01-01, d = 2025-07-01 (181 days on), year-end served days t + 1 - s.
    led, _, inp, s = run(split_schedule(tmp_path / "l"), "2028-12-31", standard="asc718", attribution="graded")
    assert led.tranches["quantity"].tolist() == [250, 83, 167, 166, 84, 250]
    g, d = "2025-01-01", "2025-07-01"

    def moved(f, e, v, t):  # cumulative at year-end t of a piece moving from E = e to V = v
        before = f * days(g, d) / days(g, e)
        return before + (f - before) * min(1.0, days(d, t) / days(d, v))

    y = ["2026-01-01", "2027-01-01", "2028-01-01", "2029-01-01"]  # day after each year-end
    expect = [250 * 12 * min(1.0, days(g, t) / days(g, "2026-01-01"))
              + moved(83 * 12, "2027-01-01", "2026-01-01", t)
              + 167 * 12 * min(1.0, days(g, t) / days(g, "2027-01-01"))
              + moved(166 * 12, "2028-01-01", "2027-01-01", t)
              + 84 * 12 * min(1.0, days(g, t) / days(g, "2028-01-01"))
              + moved(250 * 12, "2029-01-01", "2028-01-01", t) for t in y]
    assert expect[-2:] == [12_000, 12_000]
    assert np.abs(s.cumulative_cents[0] - np.round(np.array(expect) * 100)).max() <= 1
    assert [str(x) for x in inp.t_vest] == ["2026-01-01", "2026-01-01", "2027-01-01", "2027-01-01", "2028-01-01",
                                            "2028-01-01"]


def test_a_split_tranche_ifrs2_takes_the_shorter_period_into_account(tmp_path):
    # IFRS 2 B43(c) with the catch-up of IFRS 2.20 (from memory): each piece's grant-date value over
    # s..V, its new vesting date (pieces keeping their date: as granted)
    _, _, _, s = run(split_schedule(tmp_path / "l"), "2028-12-31", standard="ifrs2")
    g = "2025-01-01"
    pieces = [(250, "2026-01-01"), (83, "2026-01-01"), (167, "2027-01-01"), (166, "2027-01-01"),
              (84, "2028-01-01"), (250, "2028-01-01")]
    expect = [sum(q * 12 * min(1.0, days(g, t) / days(g, v)) for q, v in pieces)
              for t in ("2026-01-01", "2027-01-01", "2028-01-01", "2029-01-01")]
    assert np.abs(s.cumulative_cents[0] - np.round(np.array(expect) * 100)).max() <= 1


def test_a_split_tranche_costs_the_same_before_the_modification(tmp_path):
    # cut from the grant date, the pieces carry the whole tranche's cost until the modification date
    folder = split_schedule(tmp_path / "l")
    _, _, _, cut = run(folder, "2025-06-30", standard="asc718", attribution="graded")
    (folder / "modifications.csv").unlink()
    _, _, _, plain = run(folder, "2025-06-30", standard="asc718", attribution="graded")
    assert cut.cumulative_cents[0].tolist() == plain.cumulative_cents[0].tolist()


def test_the_treatment_names_each_clause_once(tmp_path):
    # tranches with and without a moved date share the Type I clause: it is written once; equal values
    # before and after are not called a decrease
    led, _, inp, _ = run(split_schedule(tmp_path / "l"), "2028-12-31", standard="asc718", attribution="graded")
    row = modification_table(inp.modifications, led).iloc[0]
    assert row["treatment"] == ("Type I (probable to probable): no change in fair value (no incremental); original "
                                "cost not yet recognised spread over the new, shorter period")
    assert row["units_before"] == 1000 and row["units_accelerated"] == 83 + 166 + 250  # vesting earlier
