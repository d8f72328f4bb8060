"""Allocation of events to tranches (rules in docs/ledger-format.md)."""

from grantval.ledger import load_ledger
from tests.factory import tables, write_ledger


def changes_of(tmp_path, events):
    led = load_ledger(write_ledger(tmp_path / "l", tables(events=events)))
    ch = led.changes.merge(led.tranches, left_on="tranche_idx", right_index=True)
    return led, ch


def ev(kind, date, qty="", gid="G1"):
    return {"grant_id": gid, "event_date": date, "event_type": kind, "quantity": qty, "share_price": ""}


def test_partial_forfeit_takes_latest_tranches_first(tmp_path):
    _, ch = changes_of(tmp_path, [ev("forfeit", "2027-06-01", "300")])
    # tranches of 250 at 2028..2031: the last one goes first, then 50 of the third
    assert ch.sort_values("tranche")[["tranche", "quantity_x"]].values.tolist() == [[3, 50], [4, 250]]


def test_blank_forfeit_takes_all_unvested(tmp_path):
    _, ch = changes_of(tmp_path, [ev("forfeit", "2029-01-01")])  # vest date counts as vested
    assert sorted(ch["tranche"]) == [3, 4] and ch["quantity_x"].sum() == 500


def test_exercise_takes_earliest_vested_first_and_expire_takes_the_rest(tmp_path):
    _, ch = changes_of(tmp_path, [ev("exercise", "2029-02-01", "300"), ev("forfeit", "2029-03-01"),
                                  ev("expire", "2029-06-01")])
    got = sorted((k, t, q) for k, t, q in ch[["kind", "tranche", "quantity_x"]].values)
    assert got == [("exercise", 1, 250), ("exercise", 2, 50), ("expire", 2, 200),
                   ("forfeit", 3, 250), ("forfeit", 4, 250)]


def test_cancel_takes_unvested_before_vested(tmp_path):
    _, ch = changes_of(tmp_path, [ev("cancel", "2028-06-01", "800")])
    assert sorted(zip(ch["tranche"], ch["quantity_x"])) == [(1, 50), (2, 250), (3, 250), (4, 250)]
