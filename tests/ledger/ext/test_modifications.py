"""Ledger side of modifications: vesting dates in force under a new schedule, the added units' grant.

Hand-worked from the schedule rule of grantval/ledger/schedule.py (floor(q k / n) - floor(q (k-1) / n)
units on the k-th date, same day of month).
"""

import numpy as np
import pandas as pd
import pytest

from grantval.errors import LedgerError
from grantval.ledger import load_ledger
from grantval.ledger.ext.added_units import _split, child_id
from grantval.ledger.ext.modifications import _cum_within, vesting
from tests.attribution.test_modifications import OPTION, _assumption, _mod
from tests.factory import write_ledger


def _frames(quantity, months, every, cliff, mods):
    from grantval.ledger.schedule import generate_tranches

    g = pd.DataFrame({"grant_id": ["A"], "quantity": [quantity], "vest_months": [float(months)],
                      "vest_every_months": [float(every)], "cliff_months": [float(cliff)],
                      "vest_start_date": np.array(["2025-01-01"], dtype="datetime64[D]"),
                      "grant_date": np.array(["2025-01-01"], dtype="datetime64[D]"),
                      "exercise_price": [10.0], "expiration_date": np.array(["2035-01-01"], dtype="datetime64[D]")})
    m = pd.DataFrame([{"grant_id": "A", "modification_date": np.datetime64(d, "D"), "exercise_price": np.nan,
                       "expiration_date": np.datetime64("NaT", "D"), "accelerate": "no",
                       "vest_months": float(c.get("vest_months", "nan")),
                       "vest_every_months": float(c.get("vest_every_months", "nan")),
                       "cliff_months": float(c.get("cliff_months", "nan"))} for d, c in mods])
    m["modification_date"] = m["modification_date"].to_numpy("datetime64[D]")
    m["expiration_date"] = m["expiration_date"].to_numpy("datetime64[D]")
    return g, generate_tranches(g), m


def test_cliff_added_merges_tranches_later():
    # 1,200 units, 12 monthly tranches of 100 from 2025-01-01; on 2025-03-15 a 6-month cliff is added:
    # tranches 3-6 (not vested, due 2025-04-01 .. 2025-07-01) vest together on 2025-07-01; tranches 1-2
    # (vested 2025-02-01, 2025-03-01) keep their dates; 7-12 unchanged
    g, tr, m = _frames(1200, 12, 1, 0, [("2025-03-15", {"cliff_months": "6"})])
    v = vesting(g, tr, m)
    expect = ["2025-02-01", "2025-03-01"] + ["2025-07-01"] * 4 + [f"2025-{k:02d}-01" for k in range(8, 13)] + [
        "2026-01-01"]
    assert [str(d) for d in v.final] == expect
    assert not v.split.any()


def test_removing_a_cliff_would_split_the_cliff_tranche():
    # 1,200 units over 12 months with a 6-month cliff: one tranche of 600 on 2025-07-01, then 100 a
    # month. Without the cliff its units 1-100 vest 2025-02-01 ... 501-600 on 2025-07-01: split
    g, tr, m = _frames(1200, 12, 1, 6, [("2025-01-15", {"cliff_months": "0"})])
    v = vesting(g, tr, m)
    assert v.split.tolist() == [True] + [False] * 6
    assert str(v.scheduled_first[0]) == "2025-02-01" and str(v.scheduled[0]) == "2025-07-01"


def test_schedule_in_the_past_vests_on_the_modification_date():
    # four annual tranches from 2025-01-01; on 2026-06-01 the schedule becomes 12 months every 6
    # (2025-07-01, 2026-01-01 for 500 each): tranches 1 (vested 2026-01-01) keep; 2 moves to 2026-01-01,
    # already past: it vests on the modification date; 3 and 4 (units 501-1000) to 2026-01-01 too
    g, tr, m = _frames(1000, 48, 12, 0, [("2026-06-01", {"vest_months": "12", "vest_every_months": "6"})])
    v = vesting(g, tr, m)
    assert [str(d) for d in v.final] == ["2026-01-01", "2026-06-01", "2026-06-01", "2026-06-01"]


def test_two_schedule_changes_apply_in_date_order():
    g, tr, m = _frames(1000, 48, 12, 0, [("2025-06-01", {"vest_months": "24", "vest_every_months": "6"}),
                                         ("2025-09-01", {"vest_months": "96", "vest_every_months": "24"})])
    v = vesting(g, tr, m)
    # first: 250 every 6 months (2025-07-01 ... 2027-01-01); second, on 2025-09-01: 96 every 24 (250
    # every two years from 2027-01-01); tranche 1 vested 2025-07-01 stays
    assert [str(d) for d in v.final] == ["2025-07-01", "2029-01-01", "2031-01-01", "2033-01-01"]
    assert [str(d) for d in v.vest_before[v.p_mod == 1]] == ["2025-07-01", "2026-01-01", "2026-07-01",
                                                             "2027-01-01"]


def test_cumulative_within_groups():
    assert _cum_within(np.array([0, 0, 1, 1, 1]), np.array([2, 3, 1, 1, 5])).tolist() == [2, 5, 1, 2, 7]


@pytest.mark.parametrize("added,weights,expect", [(500, [1, 1], [250, 250]), (100, [1, 1, 1], [33, 33, 34]),
                                                  (7, [500, 250], [5, 2])])
def test_split_of_added_units(added, weights, expect):
    # largest remainders, later tranches first on ties: 100 / 3 = 33.33 each -> the last takes 34;
    # 7 x 2/3 = 4.67 and 2.33 -> 5 and 2
    got = _split(added, np.array(weights, dtype=float))
    assert got.tolist() == expect and got.sum() == added


def test_child_id():
    assert child_id("G1", np.datetime64("2026-01-01")) == "G1+2026-01-01"


def test_a_schedule_that_splits_a_tranche_cuts_it_from_the_grant_date(tmp_path):
    # 1,200 units over 12 months with a 6-month cliff: one tranche of 600 on 2025-07-01, then 100 a
    # month. Removing the cliff on 2025-01-15 puts units 1-100 on 2025-02-01 ... 501-600 on
    # 2025-07-01: the cliff tranche is cut into six pieces of 100, each vesting 2025-07-01 as granted
    # (so the grant-date cost is the tranche's) and on its own monthly date from the modification on
    grants = [{**OPTION, "grant_id": "A", "grant_date": "2025-01-01", "quantity": "1200", "vest_months": "12",
               "vest_every_months": "1", "cliff_months": "6"}]
    folder = write_ledger(tmp_path / "l", {
        "grants": grants, "assumptions": [_assumption("g", fair_value="3")],
        "modifications": [_mod("A", "2025-01-15", cliff_months="0", fair_value_before="1", fair_value_after="1")]})
    led = load_ledger(folder)
    tr = led.tranches
    assert tr["quantity"].tolist() == [100] * 12 and tr["tranche"].tolist() == list(range(1, 13))
    assert [str(d) for d in tr["vest_date"].to_numpy("datetime64[D]")[:6]] == ["2025-07-01"] * 6
    from grantval.ledger.ext.modifications import vest_in_force

    final = vest_in_force(tr, led.grants, led.tables["modifications"])
    assert [str(d) for d in final] == [f"2025-{m:02d}-01" for m in range(2, 13)] + ["2026-01-01"]


def test_a_tranche_vested_before_the_change_is_not_cut(tmp_path):
    # four annual tranches of 250 from 2025-01-01; on 2026-06-01 the schedule becomes 36 months every 12
    # (333 / 333 / 334 on 2026-01-01, 2027-01-01, 2028-01-01). Tranche 1 (vested 2026-01-01) stays whole;
    # tranche 2 (units 251-500): 251-333 would vest 2026-01-01, past, so on the modification date, and
    # 334-500 on 2027-01-01: cut 83 / 167; tranche 3 (501-750): 501-666 on 2027-01-01, 667-750 on
    # 2028-01-01: cut 166 / 84; tranche 4 (751-1000) on 2028-01-01 whole
    grants = [{**OPTION, "grant_id": "A", "grant_date": "2025-01-01", "quantity": "1000", "vest_months": "48",
               "vest_every_months": "12"}]
    folder = write_ledger(tmp_path / "l", {
        "grants": grants, "assumptions": [_assumption("g", fair_value="3")],
        "modifications": [_mod("A", "2026-06-01", vest_months="36", fair_value_before="1", fair_value_after="1")]})
    led = load_ledger(folder)
    assert led.tranches["quantity"].tolist() == [250, 83, 167, 166, 84, 250]


def test_a_tranche_left_split_is_reported_on_the_row(tmp_path, monkeypatch):
    # the guard behind the cut: with no cutting pass allowed, the split tranche is reported
    from grantval.ledger.ext import tranche_split

    monkeypatch.setattr(tranche_split, "PASSES", 0)
    grants = [{**OPTION, "grant_id": "A", "grant_date": "2025-01-01", "quantity": "1200", "vest_months": "12",
               "vest_every_months": "1", "cliff_months": "6"}]
    folder = write_ledger(tmp_path / "l", {
        "grants": grants, "assumptions": [_assumption("g", fair_value="3")],
        "modifications": [_mod("A", "2025-01-15", cliff_months="0", fair_value_before="1", fair_value_after="1")]})
    with pytest.raises(LedgerError) as e:
        load_ledger(folder)
    p = [x for x in e.value.problems if x.source == "modifications.csv"]
    assert p and p[0].row == 2 and p[0].column == "vest_months"
    assert "600 units of tranche 1 on two dates (2025-02-01 and 2025-07-01)" in p[0].message
