"""The close register (grantval.io.register): storage, refusals, crash safety, concurrency, tamper detection.

There are no outside reference values here: the behaviour checked is the
register's own contract (docs/close-register.md), and SQLite's transaction
guarantees are exercised by killing real processes.  One test recomputes a
digest from the documented serialisation with hashlib alone, so the document
and the code cannot drift apart.
"""

from __future__ import annotations

import csv
import datetime as dt
import hashlib
import json
import os
import pathlib
import signal
import sqlite3
import subprocess
import sys
import time

import numpy as np
import pandas as pd
import pytest

from grantval.errors import GrantvalError, InputError, OutputError
from grantval.io import register as R

ROOT = pathlib.Path(__file__).resolve().parents[2]
UTC = dt.timezone.utc
Q1, Q2, Q3 = "2026-03-31", "2026-06-30", "2026-09-30"


# ------------------------------------------------------------------ builders


def make_record(ends, through=None, at=None, user="alice") -> R.CloseRecord:
    ends = [ends] if isinstance(ends, str) else list(ends)
    return R.CloseRecord(
        through=through or ends[-1],
        period_ends=ends,
        ledger_digests={"grants.csv": hashlib.sha256(b"grants").hexdigest(), "events.csv": hashlib.sha256(b"events").hexdigest()},
        policies={"period": "quarter", "fiscal_year_end_month": 12, "forfeitures": "estimate"},
        options={"through": ends[-1], "rate": 0.05},
        tool_version="0.1.0",
        closed_at=at or dt.datetime(2026, 10, 5, 9, 30, tzinfo=UTC),
        user=user,
    )


def make_rows(ends, n=3, base=10_000) -> pd.DataFrame:
    ends = [ends] if isinstance(ends, str) else list(ends)
    recs = []
    for k, e in enumerate(ends):
        for i in range(n):
            recs.append({"grant_id": f"G{i:03d}", "group": None if i == 1 else ("exec" if i % 2 else "staff"),
                         "period_end": e, "booked_cents": base + 101 * i + 7 * k, "catch_up_cents": (i * 13) if k == 0 else 0})
    return pd.DataFrame(recs, columns=list(R.ROW_COLUMNS))


def make_journal(rows: pd.DataFrame) -> pd.DataFrame:
    lines = []
    for e, part in rows.groupby("period_end", sort=True):
        total = int(part["booked_cents"].sum())
        lines.append({"period_end": e, "account": "compensation expense", "group": None, "debit_cents": total,
                      "credit_cents": 0, "description": f"share-based compensation {e}"})
        lines.append({"period_end": e, "account": "additional paid-in capital", "group": None, "debit_cents": 0,
                      "credit_cents": total, "description": f"share-based compensation {e}"})
    return pd.DataFrame(lines, columns=list(R.JOURNAL_COLUMNS))


def book(reg: R.Register, ends, n=3, **kw) -> int:
    rows = make_rows(ends, n)
    return reg.book(make_record(ends, **kw), rows, make_journal(rows))


@pytest.fixture
def reg(tmp_path):
    r = R.open_register(tmp_path / "closes.gvreg", create=True)
    yield r
    r.close_file()


def raw(path) -> sqlite3.Connection:
    return sqlite3.connect(path, isolation_level=None)


def scalar(path, sql):
    """One value from a plain sqlite3 connection, closed afterwards."""
    c = raw(path)
    try:
        return c.execute(sql).fetchone()[0]
    finally:
        c.close()


# ------------------------------------------------------------ create / open


def test_create_then_open_existing(tmp_path):
    p = tmp_path / "r.gvreg"
    with R.open_register(p, create=True) as reg:
        assert reg.closes() == [] and reg.last_close() is None and reg.head_digest() is None
        assert reg.verify() == []
        book(reg, Q1)
    with R.open_register(p) as reg:  # reopened without create
        assert [c.close_id for c in reg.closes()] == [1]
    with R.open_register(p, create=True) as reg:  # create never replaces an existing register
        assert [c.close_id for c in reg.closes()] == [1]
    assert scalar(p, "PRAGMA user_version") == R.SCHEMA_VERSION
    assert scalar(p, "PRAGMA application_id") == R.APPLICATION_ID
    assert not [f for f in os.listdir(tmp_path) if f.startswith(".")]  # no temporary file left behind


def test_missing_register_is_refused_without_create(tmp_path):
    with pytest.raises(R.RegisterError, match="nothere.gvreg does not exist"):
        R.open_register(tmp_path / "nothere.gvreg")
    with pytest.raises(R.RegisterError, match="folder .*missing.* does not exist"):
        R.open_register(tmp_path / "missing" / "r.gvreg", create=True)


def test_new_register_file_mode_follows_umask(tmp_path):
    old = os.umask(0o022)
    try:
        R.open_register(tmp_path / "r.gvreg", create=True).close_file()
    finally:
        os.umask(old)
    assert (tmp_path / "r.gvreg").stat().st_mode & 0o777 == 0o644


def test_readonly_register_refuses_writes(tmp_path, reg):
    book(reg, Q1)
    with R.open_register(reg.path, readonly=True) as ro:
        assert ro.writable is False and len(ro.booked()) == 3
        with pytest.raises(R.RegisterError, match="read-only"):
            book(ro, Q2)
        with pytest.raises(R.RegisterError, match="read-only"):
            ro.reopen("why")


# ------------------------------------------------------- book and read back


def test_book_then_read_back(reg):
    rows = make_rows(Q1)
    cid = reg.book(make_record(Q1), rows, make_journal(rows))
    assert cid == 1
    (c,) = reg.closes()
    assert (c.close_id, c.status, c.reopen, c.user, c.tool_version) == (1, "booked", None, "alice", "0.1.0")
    assert c.closed_at == dt.datetime(2026, 10, 5, 9, 30, tzinfo=UTC)
    assert c.through == dt.date(2026, 3, 31) and c.period_ends == (dt.date(2026, 3, 31),)
    assert c.ledger_digests == make_record(Q1).ledger_digests
    assert c.policies["forfeitures"] == "estimate" and c.options == {"through": Q1, "rate": 0.05}
    assert (c.row_count, c.journal_count) == (3, 2)
    assert reg.last_close() == c and reg.head_digest() == c.digest

    b = reg.booked()
    assert list(b.columns) == ["close_id", "grant_id", "group", "period_end", "booked_cents", "catch_up_cents"]
    assert b["booked_cents"].dtype == np.int64 and b["catch_up_cents"].dtype == np.int64
    assert b["booked_cents"].tolist() == rows["booked_cents"].tolist()
    assert b["catch_up_cents"].tolist() == rows["catch_up_cents"].tolist()
    assert b["grant_id"].tolist() == ["G000", "G001", "G002"]
    assert pd.isna(b["group"].iloc[1]) and b["group"].iloc[2] == "staff"
    assert (b["period_end"] == pd.Timestamp(Q1)).all()

    j = reg.journal()
    assert j["line_no"].tolist() == [1, 2] and j["debit_cents"].sum() == j["credit_cents"].sum() == rows["booked_cents"].sum()
    assert j["account"].tolist() == ["compensation expense", "additional paid-in capital"]


def test_large_cents_are_stored_exactly(reg):
    rows = make_rows(Q1, n=2)
    rows["booked_cents"] = np.array([2**53 + 1, 2**62 + 3], dtype=np.int64)  # not representable as float64
    reg.book(make_record(Q1), rows, make_journal(rows))
    assert reg.booked()["booked_cents"].tolist() == [2**53 + 1, 2**62 + 3]


def test_cumulative_booked_over_two_closes_and_through(reg):
    book(reg, [Q1, Q2])
    book(reg, Q3)
    b = reg.booked()
    assert b["close_id"].tolist() == [1, 1, 1, 1, 1, 1, 2, 2, 2]
    cum = reg.cumulative_booked()
    assert cum["grant_id"].tolist() == ["G000", "G001", "G002"]
    want = b.groupby("grant_id")["booked_cents"].sum().tolist()
    assert cum["booked_cents"].tolist() == want
    assert cum["periods"].tolist() == [3, 3, 3]
    assert (cum["last_period_end"] == pd.Timestamp(Q3)).all()
    upto = reg.cumulative_booked(through=Q2)
    assert upto["periods"].tolist() == [2, 2, 2]
    assert upto["booked_cents"].tolist() == reg.booked(through=Q2).groupby("grant_id")["booked_cents"].sum().tolist()


def test_cumulative_group_is_that_of_the_latest_period(reg):
    rows = make_rows(Q1, n=1).assign(group="staff")
    reg.book(make_record(Q1), rows, make_journal(rows))
    rows = make_rows(Q2, n=1).assign(group="exec")
    reg.book(make_record(Q2), rows, make_journal(rows))
    assert reg.cumulative_booked()["group"].tolist() == ["exec"]
    assert reg.cumulative_booked(through=Q1)["group"].tolist() == ["staff"]


def test_user_comes_from_the_environment(reg, monkeypatch):
    for key in ("USER", "LOGNAME", "USERNAME"):
        monkeypatch.delenv(key, raising=False)
    monkeypatch.setenv("LOGNAME", "carol")
    book(reg, Q1, user=None)
    assert reg.last_close().user == "carol"
    assert R.current_user({"USERNAME": "dan", "USER": "erin"}) == "erin"  # USER first
    assert R.current_user({"USERNAME": "dan"}) == "dan"
    assert R.current_user({}) is None


# ------------------------------------------------------------ refusals


def test_double_close_is_refused_naming_the_close(reg):
    book(reg, Q1, user="alice")
    book(reg, Q2, user="bob")
    before = reg.booked()
    with pytest.raises(R.PeriodClosedError, match="close 2 .*by bob.* through 2026-06-30") as err:
        book(reg, Q2)
    assert err.value.close_id == 2 and err.value.period_end == dt.date(2026, 6, 30)
    with pytest.raises(R.PeriodClosedError, match="already closed: close 1 ") as err:
        book(reg, [Q1, Q2, Q3])
    assert err.value.close_id == 1 and err.value.through == dt.date(2026, 3, 31)
    # a period that no close booked but lies on or before the through date is refused as well
    with pytest.raises(R.PeriodClosedError) as err:
        book(reg, "2026-05-31")
    assert err.value.close_id == 2
    assert isinstance(err.value, GrantvalError)
    assert len(reg.closes()) == 2 and reg.booked().equals(before)


@pytest.mark.parametrize(
    "change, message",
    [
        (lambda r, j: r.assign(booked_cents=r["booked_cents"].astype(float)), "whole cents as integers"),
        (lambda r, j: r.assign(period_end="2026-02-28"), "not one of the close's period ends"),
        (lambda r, j: pd.concat([r, r.iloc[:1]]), "appears twice"),
        (lambda r, j: r.drop(columns="catch_up_cents"), "missing catch_up_cents"),
        (lambda r, j: r.assign(grant_id=[1, 2, 3]), "must be text"),
        (lambda r, j: r.assign(extra=1), "unexpected extra"),
    ],
)
def test_malformed_rows_are_refused(reg, change, message):
    rows = make_rows(Q1)
    with pytest.raises(InputError, match=message):
        reg.book(make_record(Q1), change(rows, None), make_journal(rows))
    assert reg.closes() == []


def test_malformed_journal_and_record_are_refused(reg):
    rows = make_rows(Q1)
    j = make_journal(rows)
    unbalanced = j.assign(credit_cents=j["credit_cents"] - 1 * (j["credit_cents"] > 0))
    with pytest.raises(InputError, match="do not balance.*by 1 cents"):
        reg.book(make_record(Q1), rows, unbalanced)
    with pytest.raises(InputError, match="must not be negative"):
        reg.book(make_record(Q1), rows, j.assign(debit_cents=-j["debit_cents"], credit_cents=-j["credit_cents"]))
    naive = dataclass_replace(make_record(Q1), closed_at=dt.datetime(2026, 4, 1, 12))
    with pytest.raises(InputError, match="timezone-aware"):
        reg.book(naive, rows, j)
    with pytest.raises(InputError, match="after the through date"):
        reg.book(make_record(Q1, through="2026-03-30"), rows, j)
    with pytest.raises(InputError, match="strictly increasing"):
        reg.book(make_record([Q2, Q1]), rows, j)
    with pytest.raises(InputError, match="SHA-256"):
        reg.book(dataclass_replace(make_record(Q1), ledger_digests={"grants.csv": "abc"}), rows, j)
    with pytest.raises(InputError, match=r"policies\['x'\].*object"):
        reg.book(dataclass_replace(make_record(Q1), policies={"x": object()}), rows, j)
    assert reg.closes() == []


def dataclass_replace(rec, **kw):
    import dataclasses

    return dataclasses.replace(rec, **kw)


# ------------------------------------------------------------------ reopen


def test_reopen_keeps_rows_marks_them_superseded_and_allows_booking_again(reg):
    book(reg, Q1)
    book(reg, Q2, user="bob")
    at = dt.datetime(2026, 10, 7, 8, 0, tzinfo=dt.timezone(dt.timedelta(hours=2)))
    with pytest.raises(R.RegisterError, match="close 1 cannot be reopened.*close 2"):
        reg.reopen("wrong one", close_id=1)
    ro = reg.reopen("forfeiture rate revised for Q2", user="carol", at=at, close_id=2)
    assert (ro.close_id, ro.user, ro.reason) == (2, "carol", "forfeiture rate revised for Q2")
    assert ro.reopened_at == dt.datetime(2026, 10, 7, 6, 0, tzinfo=UTC)  # stored in UTC
    c1, c2 = reg.closes()
    assert (c1.status, c2.status) == ("booked", "superseded") and c2.reopen == ro
    assert reg.last_close().close_id == 1
    assert set(reg.booked()["close_id"]) == {1}
    assert reg.journal(close_id=2)["line_no"].tolist() == [1, 2]  # superseded lines are still readable
    assert set(reg.journal()["close_id"]) == {1}
    assert reg.booked(close_id=2)["booked_cents"].tolist() == make_rows(Q2)["booked_cents"].tolist()
    with pytest.raises(R.RegisterError, match="has no close 9"):
        reg.booked(close_id=9)
    with pytest.raises(R.RegisterError, match="has no close 9"):
        reg.journal(close_id=9)
    n = scalar(reg.path, "SELECT COUNT(*) FROM booked WHERE close_id = 2")
    assert n == 3  # never deleted
    # booking Q2 again works; the new close gets a new id
    assert book(reg, Q2, user="carol") == 3
    assert sorted(set(reg.booked()["close_id"])) == [1, 3]
    assert [c.status for c in reg.closes()] == ["booked", "superseded", "booked"]
    assert reg.verify() == []


def test_reopen_refusals(reg):
    with pytest.raises(R.RegisterError, match="no active close"):
        reg.reopen("nothing there")
    book(reg, Q1)
    with pytest.raises(InputError, match="reason"):
        reg.reopen("   ")
    reg.reopen("first")
    with pytest.raises(R.RegisterError, match="no active close"):
        reg.reopen("again")
    assert reg.verify() == []


def test_reopen_goes_back_one_close_at_a_time(reg):
    book(reg, Q1)
    book(reg, Q2)
    reg.reopen("Q2 wrong")
    reg.reopen("Q1 wrong too")
    assert [c.status for c in reg.closes()] == ["superseded", "superseded"]
    assert reg.booked().empty and reg.cumulative_booked().empty
    assert book(reg, [Q1, Q2]) == 3
    assert reg.verify() == []


# ------------------------------------------------------ crash and full disk

CHILD = r"""
import json, pathlib, sys, time
sys.path.insert(0, {root!r})
from grantval.io import register as R
from tests.io.test_register import make_record, make_rows, make_journal

path, period, stage, at, hold, marker, timeout = sys.argv[1:8]
R._CHUNK = 2
fired = []
def hook(s, n):
    if s == stage and n >= int(at) and not fired:  # once: hold the write lock mid-close
        fired.append(n)
        pathlib.Path(marker).write_text(s)
        time.sleep(float(hold))
R._hook = hook
reg = R.open_register(path, timeout=float(timeout))
rows = make_rows(period.split(","), n=10)
try:
    t0 = time.time()
    cid = reg.book(make_record(period.split(","), user=marker), rows, make_journal(rows))
    print(json.dumps({{"booked": cid, "t0": t0, "t1": time.time()}}))
except R.PeriodClosedError as err:
    print(json.dumps({{"closed": err.close_id, "t0": t0}}))
except R.RegisterError as err:
    print(json.dumps({{"error": str(err)}}))
"""


def start_child(tmp_path, path, period, stage="none", at=0, hold=0.0, timeout=30.0, name="a"):
    script = tmp_path / "child.py"
    if not script.exists():
        script.write_text(CHILD.format(root=str(ROOT)))
    marker = tmp_path / f"marker-{name}"
    proc = subprocess.Popen([sys.executable, str(script), str(path), period, stage, str(at), str(hold), str(marker), str(timeout)],
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True, cwd=str(ROOT))
    return proc, marker


def wait_for(marker: pathlib.Path, proc: subprocess.Popen, limit: float = 60.0) -> None:
    end = time.monotonic() + limit
    while not marker.exists():
        if proc.poll() is not None:
            pytest.fail(f"child ended early: {proc.stdout.read()} {proc.stderr.read()}")
        if time.monotonic() > end:
            proc.kill()
            proc.communicate()
            pytest.fail("child never reached its hook")
        time.sleep(0.02)


def result(proc: subprocess.Popen) -> dict:
    out, err = proc.communicate(timeout=120)
    assert proc.returncode == 0, err
    return json.loads(out.strip().splitlines()[-1])


@pytest.mark.parametrize("stage, at", [("booked", 4), ("journal", 2), ("commit", 0)])
def test_killed_close_leaves_the_register_as_it_was(tmp_path, stage, at):
    path = tmp_path / "r.gvreg"
    with R.open_register(path, create=True) as reg:
        book(reg, Q1)
        before_rows, before_closes, before_head = reg.booked(), reg.closes(), reg.head_digest()
    proc, marker = start_child(tmp_path, path, Q2, stage=stage, at=at, hold=120)
    wait_for(marker, proc)
    assert pathlib.Path(str(path) + "-journal").exists()  # the close was under way, with pages changed
    proc.send_signal(signal.SIGKILL)
    proc.communicate(timeout=30)
    assert proc.returncode == -signal.SIGKILL
    with R.open_register(path) as reg:  # the hot journal is rolled back on opening
        assert reg.closes() == before_closes
        assert reg.booked().equals(before_rows)
        assert reg.head_digest() == before_head
        assert reg.verify() == []
        assert book(reg, Q2) == 2  # and the register works on
        assert reg.verify() == []


def test_full_disk_mid_close_leaves_the_register_as_it_was(reg):
    book(reg, Q1)
    before = reg.booked()
    pages = reg._con.execute("PRAGMA page_count").fetchone()[0]
    reg._con.execute(f"PRAGMA max_page_count = {pages + 2}")  # SQLite then fails writes with SQLITE_FULL
    rows = make_rows(Q2, n=5000)
    with pytest.raises(R.RegisterError, match="disk is full.*register is as it was"):
        reg.book(make_record(Q2), rows, make_journal(rows))
    assert len(reg.closes()) == 1 and reg.booked().equals(before) and reg.verify() == []
    reg._con.execute("PRAGMA max_page_count = 1073741823")
    assert book(reg, Q2) == 2


def test_error_inside_a_close_rolls_it_back(reg, monkeypatch):
    book(reg, Q1)

    def boom(stage, n):
        if stage == "journal":
            raise RuntimeError("interrupted")

    monkeypatch.setattr(R, "_hook", boom)
    with pytest.raises(RuntimeError):
        book(reg, Q2)
    monkeypatch.setattr(R, "_hook", None)
    assert [c.close_id for c in reg.closes()] == [1] and set(reg.booked()["period_end"]) == {pd.Timestamp(Q1)}
    assert reg.verify() == []


# ---------------------------------------------------------------- concurrency


def test_second_close_of_the_same_periods_waits_then_is_refused(tmp_path):
    path = tmp_path / "r.gvreg"
    R.open_register(path, create=True).close_file()
    a, marker = start_child(tmp_path, path, Q1, stage="booked", at=2, hold=4.0, name="a")
    wait_for(marker, a)  # a holds the write lock, mid-close
    b, _ = start_child(tmp_path, path, Q1, timeout=60, name="b")
    ra, rb = result(a), result(b)
    assert ra["booked"] == 1
    assert rb["closed"] == 1  # b waited, then saw a's close and refused
    assert rb["t0"] < ra["t1"]  # b's close began while a's was still under way
    with R.open_register(path) as reg:
        assert [c.close_id for c in reg.closes()] == [1]
        assert len(reg.booked()) == 10 and reg.verify() == []


def test_second_writer_is_refused_when_busy_beyond_its_timeout(tmp_path):
    path = tmp_path / "r.gvreg"
    R.open_register(path, create=True).close_file()
    a, marker = start_child(tmp_path, path, Q1, stage="booked", at=2, hold=4.0, name="a")
    wait_for(marker, a)
    b, _ = start_child(tmp_path, path, Q1, timeout=0.2, name="b")
    rb = result(b)
    assert "busy" in rb["error"] and "nothing was booked" in rb["error"]
    assert result(a)["booked"] == 1
    with R.open_register(path) as reg:
        assert len(reg.closes()) == 1 and reg.verify() == []


def test_two_closes_of_successive_periods_both_land_once(tmp_path):
    path = tmp_path / "r.gvreg"
    R.open_register(path, create=True).close_file()
    a, marker = start_child(tmp_path, path, Q1, stage="journal", at=2, hold=4.0, name="a")
    wait_for(marker, a)
    b, _ = start_child(tmp_path, path, Q2, timeout=60, name="b")
    ra, rb = result(a), result(b)
    assert (ra["booked"], rb["booked"]) == (1, 2)
    assert rb["t0"] < ra["t1"]  # b's close began while a's was still under way
    with R.open_register(path) as reg:
        closes = reg.closes()
        assert [(c.close_id, c.through.isoformat()) for c in closes] == [(1, Q1), (2, Q2)]
        assert closes[0].user.endswith("marker-a") and closes[1].user.endswith("marker-b")
        assert len(reg.booked()) == 20 and reg.verify() == []


# ----------------------------------------------------------- tamper detection


def tampered(reg, *sql):
    """Run SQL on the register with a plain sqlite3 connection, append-only guards dropped."""
    c = raw(reg.path)
    for name in R._TRIGGERS:
        c.execute(f"DROP TRIGGER IF EXISTS {name}")
    for s in sql:
        c.execute(s)
    c.close()


def test_append_only_guards_stop_plain_edits(reg):
    book(reg, Q1)
    c = raw(reg.path)
    with pytest.raises(sqlite3.IntegrityError, match="append-only"):
        c.execute("UPDATE booked SET booked_cents = 1")
    with pytest.raises(sqlite3.IntegrityError, match="append-only"):
        c.execute("DELETE FROM journal")
    c.close()
    assert reg.verify() == []


def test_verify_reports_a_changed_booked_amount_naming_the_close(reg):
    book(reg, Q1)
    book(reg, Q2)
    tampered(reg, "UPDATE booked SET booked_cents = booked_cents + 1 WHERE close_id = 2 AND grant_id = 'G002'")
    problems = reg.verify()
    assert any(p.startswith("close 2 (through 2026-06-30): its booked rows were changed outside grantval") for p in problems)
    assert not any(p.startswith("close 1 ") for p in problems)
    assert any("append-only guard booked_no_update is missing" in p for p in problems)


def test_verify_reports_a_deleted_row(reg):
    book(reg, Q1)
    tampered(reg, "DELETE FROM booked WHERE grant_id = 'G001'")
    assert any(p.startswith("close 1 (through 2026-03-31): 2 booked rows found where 3 were booked") for p in reg.verify())


def test_verify_reports_an_altered_journal_line(reg):
    book(reg, Q1)
    tampered(reg, "UPDATE journal SET account = 'other expense' WHERE line_no = 1")
    assert any(p.startswith("close 1 (through 2026-03-31): its journal lines were changed") for p in reg.verify())


def test_verify_reports_an_altered_close_record_and_a_rewritten_digest(reg):
    book(reg, Q1)
    book(reg, Q2)
    tampered(reg, """UPDATE closes SET policies = '{"period":"month"}' WHERE close_id = 1""")
    assert any(p.startswith("close 1 (through 2026-03-31): the close record") for p in reg.verify())
    # rewriting close 1's digest to match its new content breaks the link from close 2
    c = raw(reg.path)
    row = {k: v for k, v in zip([d[0] for d in c.execute("SELECT * FROM closes WHERE close_id = 1").description],
                                c.execute("SELECT * FROM closes WHERE close_id = 1").fetchone())}
    new = R._close_digest(row, row["rows_digest"], row["journal_digest"], row["prev_digest"])
    c.execute("UPDATE closes SET digest = ? WHERE close_id = 1", (new,))
    c.close()
    problems = reg.verify()
    assert not any(p.startswith("close 1 ") for p in problems)
    assert any(p.startswith("close 2 (through 2026-06-30): its link to the previous event does not match") for p in problems)


def test_verify_reports_an_altered_reopen_and_a_removed_event(reg):
    book(reg, Q1)
    book(reg, Q2)
    reg.reopen("because", user="carol")
    tampered(reg, "UPDATE reopens SET reason = 'other', reopened_by = 'mallory'")
    assert any(p.startswith("reopen 1 (of close 2): the reopen record") for p in reg.verify())
    tampered(reg, "DELETE FROM reopens")
    problems = reg.verify()
    assert any("records 3 events" in p and "holds 2" in p for p in problems)


def test_verify_reports_a_deleted_close(reg):
    book(reg, Q1)
    book(reg, Q2)
    tampered(reg, "DELETE FROM closes WHERE close_id = 1")
    problems = reg.verify()
    assert any("booked rows refer to close 1, which is not in the register" in p for p in problems)
    assert any(p.startswith("close 2 (through 2026-06-30): it is event 2 where event 1 was expected") for p in problems)


def test_rows_digest_follows_the_documented_serialisation(reg):
    """docs/close-register.md, 'Digests': recomputed here with hashlib and json only."""
    rows = make_rows(Q1).iloc[::-1]  # order given does not matter
    reg.book(make_record(Q1), rows, make_journal(rows))
    stored = scalar(reg.path, "SELECT rows_digest FROM closes")
    h = hashlib.sha256()
    for r in sorted(rows.itertuples(index=False), key=lambda r: (r.period_end, r.grant_id)):
        line = [r.grant_id, None if pd.isna(r.group) else r.group, r.period_end, int(r.booked_cents), int(r.catch_up_cents)]
        h.update(json.dumps(line, separators=(",", ":"), ensure_ascii=False).encode() + b"\n")
    assert stored == h.hexdigest()
    assert reg.verify() == []


# ------------------------------------------------------------ schema versions


def set_version(path, version, reader_min=None, writer_min=None):
    c = raw(path)
    c.execute(f"PRAGMA user_version = {version}")
    for key, v in (("reader_min_schema", reader_min), ("writer_min_schema", writer_min)):
        if v is not None:
            c.execute("UPDATE meta SET value = ? WHERE key = ?", (str(v), key))
    c.close()


def test_newer_schema_is_refused_when_it_says_so(tmp_path, reg):
    book(reg, Q1)
    set_version(reg.path, R.SCHEMA_VERSION + 1, reader_min=R.SCHEMA_VERSION + 1, writer_min=R.SCHEMA_VERSION + 1)
    with pytest.raises(R.RegisterError, match=r"closes.gvreg was written by a newer grantval .*upgrade grantval"):
        R.open_register(reg.path)


def test_newer_schema_readable_but_not_writable(tmp_path, reg):
    book(reg, Q1)
    set_version(reg.path, R.SCHEMA_VERSION + 1, reader_min=R.SCHEMA_VERSION, writer_min=R.SCHEMA_VERSION + 1)
    with R.open_register(reg.path) as newer:
        assert newer.writable is False and len(newer.booked()) == 3
        with pytest.raises(R.RegisterError, match="may read it but not write"):
            book(newer, Q2)
    set_version(reg.path, R.SCHEMA_VERSION + 1, reader_min=R.SCHEMA_VERSION, writer_min=R.SCHEMA_VERSION)
    with R.open_register(reg.path) as newer:
        assert newer.writable and book(newer, Q2) == 2


def test_older_schema_is_upgraded_or_refused(tmp_path, reg, monkeypatch):
    book(reg, Q1)
    reg.close_file()
    monkeypatch.setattr(R, "SCHEMA_VERSION", R.SCHEMA_VERSION + 1)
    with pytest.raises(R.RegisterError, match="written by an older grantval .*no upgrade from schema 1"):
        R.open_register(reg.path)
    monkeypatch.setattr(R, "_MIGRATIONS", {1: lambda con: con.execute("CREATE TABLE notes (text TEXT)")})
    with pytest.raises(R.RegisterError, match="open it with write access once"):
        R.open_register(reg.path, readonly=True)
    with R.open_register(reg.path) as up:
        assert up.schema_version == 2 and len(up.booked()) == 3
    assert scalar(reg.path, "PRAGMA user_version") == 2


# ------------------------------------------------------- non-register files


@pytest.mark.parametrize(
    "name, content, message",
    [
        ("grants.csv", b"grant_id,group\nG1,staff\n", "is not a grantval close register (it is a text file)"),
        ("empty.gvreg", b"", "is an empty file, not a grantval close register"),
        ("noise.bin", bytes(range(256)) * 4, "is not a grantval close register (it is not an SQLite database)"),
    ],
)
def test_non_register_files_are_refused_by_name(tmp_path, name, content, message):
    p = tmp_path / name
    p.write_bytes(content)
    for create in (False, True):
        with pytest.raises(R.RegisterError, match=f"{name} {message}".replace("(", r"\(").replace(")", r"\)")):
            R.open_register(p, create=create)
    assert p.read_bytes() == content  # never overwritten


def test_other_sqlite_database_is_refused(tmp_path):
    p = tmp_path / "other.db"
    c = sqlite3.connect(p)
    c.execute("CREATE TABLE meta (key TEXT, value TEXT)")
    c.commit()
    c.close()
    with pytest.raises(R.RegisterError, match="other.db is an SQLite database but not a grantval close register"):
        R.open_register(p, create=True)
    with pytest.raises(R.RegisterError, match="is a folder"):
        R.open_register(tmp_path)


# ------------------------------------------------------------------ export


def read_csv(p):
    with open(p, newline="", encoding="utf-8") as f:
        return list(csv.DictReader(f))


def test_export_writes_every_table(tmp_path, reg):
    rows = make_rows(Q1)
    j = make_journal(rows)
    j.loc[0, "description"] = "=HYPERLINK(\"x\")"
    reg.book(make_record(Q1), rows, j)
    book(reg, Q2)
    reg.reopen("Q2 wrong", user="carol")
    old = os.umask(0o027)
    try:
        files = reg.export(tmp_path / "export")
    finally:
        os.umask(old)
    assert sorted(f.name for f in files) == ["booked.csv", "closes.csv", "journal.csv", "meta.csv", "reopens.csv"]
    assert all(f.stat().st_mode & 0o777 == 0o640 for f in files)  # umask 027, not mkstemp's 0600
    assert not [f for f in os.listdir(tmp_path / "export") if f.startswith(".")]
    booked = read_csv(tmp_path / "export" / "booked.csv")
    assert [(r["close_id"], r["grant_id"], r["booked_cents"], r["status"]) for r in booked[:3]] == [
        ("1", g, str(c), "booked") for g, c in zip(rows["grant_id"], rows["booked_cents"])]
    assert {r["status"] for r in booked if r["close_id"] == "2"} == {"superseded"}
    closes = read_csv(tmp_path / "export" / "closes.csv")
    assert [(c["close_id"], c["status"], c["closed_by"]) for c in closes] == [("1", "booked", "alice"), ("2", "superseded", "alice")]
    assert json.loads(closes[0]["policies"])["forfeitures"] == "estimate"
    journal = read_csv(tmp_path / "export" / "journal.csv")
    assert journal[0]["description"] == "'=HYPERLINK(\"x\")"  # formula guard, as in every grantval CSV
    reopens = read_csv(tmp_path / "export" / "reopens.csv")
    assert [(r["close_id"], r["reason"], r["reopened_by"]) for r in reopens] == [("2", "Q2 wrong", "carol")]
    meta = {r["key"]: r["value"] for r in read_csv(tmp_path / "export" / "meta.csv")}
    assert meta["schema_version"] == str(R.SCHEMA_VERSION) and meta["event_count"] == "3"


def test_export_default_mode_and_refusals(tmp_path, reg):
    book(reg, Q1)
    old = os.umask(0o022)
    try:
        files = reg.export(tmp_path / "out")
    finally:
        os.umask(old)
    assert {f.stat().st_mode & 0o777 for f in files} == {0o644}
    (tmp_path / "file").write_text("x")
    with pytest.raises(OutputError, match="is a file"):
        reg.export(tmp_path / "file")
    with pytest.raises(OutputError, match="does not exist"):
        reg.export(tmp_path / "no" / "deeper")
