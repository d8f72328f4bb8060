"""Period closes (grantval.runs.close, ``grantval close`` / ``grantval register``).

The behaviour checked is the close's own contract (docs/close.md): amounts booked
are cumulative recomputed less cumulative booked, catch-ups of closed periods go
in the first open period (ASC 250-10-45-17, verified in PwC Viewpoint 30.5: a
change in estimate is accounted for in the period of change, prior periods are
not restated; booking late-entered events in the open period is common practice),
closed periods are never restated, journals balance.  Hand values use the
engine's documented straight-line rule (docs/expense-rules.md; ASC 718-10-35-8):
elapsed = (date + 1 - grant date) / (last vest - grant date).
"""

from __future__ import annotations

import pathlib
import signal
import sqlite3
import subprocess
import sys
import time

import numpy as np
import openpyxl
import pandas as pd
import pytest
from typer.testing import CliRunner

from grantval.cli import app
from grantval.errors import LedgerError
from grantval.io import register as R
from grantval.runs import close as C
from tests.factory import BASE, tables, write_ledger

ROOT = pathlib.Path(__file__).resolve().parents[2]
SAMPLE = ROOT / "sample_grants"
runner = CliRunner()
Q1, Q2, Q3 = "2027-03-31", "2027-06-30", "2027-09-30"

#: one RSU, 1000 units, all vesting 2028-01-01; share price 10, no dividends: fair value 10 a unit
#: (RSU value S exp(-q t) with q = 0); straight-line over 365 days
RSU = {"grant_id": "U1", "holder_id": "H9", "group": "eng", "award_type": "rsu", "grant_date": "2027-01-01",
       "quantity": "1000", "exercise_price": "", "expiration_date": "", "vest_start_date": "", "vest_months": "12",
       "vest_every_months": "12", "cliff_months": "0", "assumption_set": ""}
EVENT_HEAD = {"grant_id": "", "event_date": "", "event_type": "", "quantity": "", "share_price": ""}


def cli(*args):
    return runner.invoke(app, [str(a) for a in args])


def cents(x: float) -> int:
    """Half-up rounding to cents, as the engine's to_cents (common practice)."""
    return int(np.floor(x * 100 + 0.5))


def rsu_ledger(folder, events=(), grants=None, **more):
    data = tables(grants=grants or [dict(RSU)], **more)
    if events:
        data["events"] = [dict(EVENT_HEAD, **e) for e in events]
    return write_ledger(folder, data)


def booked(reg_path, close_id=None) -> pd.DataFrame:
    with R.open_register(reg_path, readonly=True) as reg:
        return reg.booked(close_id=close_id)


# ------------------------------------------------------------ late forfeiture


def test_late_forfeiture_is_caught_up_in_the_open_quarter_closed_quarter_unchanged(tmp_path, monkeypatch):
    monkeypatch.setenv("USER", "alice")
    reg = tmp_path / "r.gvreg"
    led = rsu_ledger(tmp_path / "l")
    first = C.close(led, register=reg, through=Q1)
    q1 = cents(10_000 * 90 / 365)  # 2027-01-01..03-31 is 90 days of 365
    assert first.plan.rows["booked_cents"].tolist() == [q1]
    assert first.plan.record.user == "alice"
    before = booked(reg, 1)
    # a forfeiture of 400 units dated in the closed Q1 is entered late
    rsu_ledger(led, events=[{"grant_id": "U1", "event_date": "2027-02-15", "event_type": "forfeit", "quantity": "400"}])
    second = C.close(led, register=reg, through=Q2)
    q1_now = cents(6_000 * 90 / 365)
    q2_cum = cents(6_000 * 181 / 365)
    row = second.plan.rows.iloc[0]
    assert str(row["period_end"])[:10] == Q2
    assert row["catch_up_cents"] == q1_now - q1  # the closed quarter's restatement, booked in Q2
    assert row["booked_cents"] == q2_cum - q1   # cumulative recomputed - cumulative booked
    assert booked(reg, 1).equals(before)        # Q1 as booked
    with R.open_register(reg, readonly=True) as r:
        assert r.cumulative_booked()["booked_cents"].tolist() == [q2_cum]
        assert r.verify() == []
    assert not second.failed


def test_cli_close_writes_csvs_workbook_and_head_digest(tmp_path):
    reg = tmp_path / "r.gvreg"
    r = cli("close", SAMPLE, "--through", "2025-12-31", "--register", reg, "-o", tmp_path / "c.xlsx",
            "--csv-dir", tmp_path / "csv", "--no-timestamp")
    assert r.exit_code == 0, r.output
    with R.open_register(reg, readonly=True) as rr:
        head = rr.head_digest()
        c = rr.closes()[0]
    assert f"register head digest {head}" in r.output
    assert c.policies["forfeitures"] == "estimate" and c.options["through"] == "2025-12-31"
    assert set(c.ledger_digests) and all(len(v) == 64 for v in c.ledger_digests.values())
    exp = pd.read_csv(tmp_path / "csv" / "close_expense.csv")
    assert list(exp.columns) == ["grant_id", "group", "period_end", "expense", "catch_up"]
    jr = pd.read_csv(tmp_path / "csv" / "journal.csv")
    assert list(jr.columns) == ["period_end", "account", "group", "debit", "credit", "description"]
    assert round(jr["debit"].sum() - jr["credit"].sum(), 2) == 0
    assert round(exp["expense"].sum(), 2) == round(jr.loc[jr.account.str.contains("expense"), "debit"].sum(), 2)
    wb = openpyxl.load_workbook(tmp_path / "c.xlsx", read_only=True)
    assert wb.sheetnames == ["run", "close", "booked", "journal", "catch_ups", "bridge", "checks", "notes"]
    verdicts = [row[5] for row in wb["checks"].iter_rows(min_row=2, values_only=True)]
    assert verdicts and all(str(v).startswith("=IF(ABS(D") for v in verdicts)
    notes = " ".join(str(c) for row in wb["notes"].iter_rows(values_only=True) for c in row if c)
    assert "ASC 250-10-45-17" in notes and "forfeitures" in notes


# ---------------------------------------------------------------- refusals


def test_double_close_is_refused_naming_the_close(tmp_path, monkeypatch):
    monkeypatch.setenv("USER", "bob")
    reg, led = tmp_path / "r.gvreg", write_ledger(tmp_path / "l", BASE)
    assert cli("close", led, "--through", Q2, "--register", reg).exit_code == 0
    r = cli("close", led, "--through", Q1, "--register", reg)
    assert r.exit_code == 1
    assert "the period ending 2027-03-31 is already closed: close 1" in r.output and "by bob" in r.output
    with pytest.raises(R.PeriodClosedError) as err:
        C.close(led, register=reg, through=Q2)
    assert err.value.close_id == 1
    assert len(booked(reg)) > 0 and [c.close_id for c in C.register_closes(reg)[0]] == [1]


@pytest.mark.parametrize("args, words", [
    (("--through", "2027-05-31"), "is not the last day of a quarter"),
    (("--through", Q2, "--from", "2027-02-01"), "is not the first day of a quarter"),
])
def test_partial_periods_are_refused(tmp_path, args, words):
    r = cli("close", write_ledger(tmp_path / "l", BASE), "--register", tmp_path / "r.gvreg", *args)
    assert r.exit_code == 2 and words in r.output
    assert not (tmp_path / "r.gvreg").exists() or C.register_closes(tmp_path / "r.gvreg")[0] == []


def test_later_close_keeps_the_period_and_its_start(tmp_path):
    reg, led = tmp_path / "r.gvreg", write_ledger(tmp_path / "l", BASE)
    C.close(led, register=reg, through=Q1)
    r = cli("close", led, "--through", "2027-12-31", "--register", reg, "--period", "month")
    assert r.exit_code == 2 and "closes of one register share their periods" in r.output
    r = cli("close", led, "--through", Q2, "--register", reg, "--from", "2027-01-01")
    assert r.exit_code == 2 and "not the day after the last closed period" in r.output


# ------------------------------------------------------------------ reopen


def test_reopen_with_reason_keeps_rows_superseded_then_recloses(tmp_path, monkeypatch):
    monkeypatch.setenv("USER", "carol")
    reg = tmp_path / "r.gvreg"
    led = rsu_ledger(tmp_path / "l")
    C.close(led, register=reg, through=Q1)
    r = cli("close", "--reopen", "--register", reg)
    assert r.exit_code == 2 and "--reason" in r.output
    r = cli("close", led, "--reopen", "--register", reg, "--reason", "x")
    assert r.exit_code == 2 and "leave out LEDGER" in r.output
    r = cli("close", "--reopen", "--register", reg, "--reason", "late forfeiture in Q1")
    assert r.exit_code == 0, r.output
    assert "reopened close 1 by carol" in r.output
    closes, _ = C.register_closes(reg)
    assert closes[0].status == "superseded" and closes[0].reopen.reason == "late forfeiture in Q1"
    assert closes[0].reopen.user == "carol"
    assert len(booked(reg, 1)) == 1 and booked(reg).empty  # kept, but no longer active
    rsu_ledger(led, events=[{"grant_id": "U1", "event_date": "2027-02-15", "event_type": "forfeit", "quantity": "400"}])
    again = C.close(led, register=reg, through=Q1)  # Q1 re-closed with the late event, no catch-up
    assert again.close_id == 2
    assert again.plan.rows["booked_cents"].tolist() == [cents(6_000 * 90 / 365)]
    assert again.plan.rows["catch_up_cents"].tolist() == [0]
    r = cli("register", reg)
    assert "close 1  superseded" in r.output and "late forfeiture in Q1" in r.output and "close 2  booked" in r.output


# ----------------------------------------------------------------- journal


def test_journal_balances_and_books_a_reversal_as_credit_to_expense(tmp_path):
    reg = tmp_path / "r.gvreg"
    other = dict(RSU, grant_id="U2", group="ops", quantity="100")
    led = rsu_ledger(tmp_path / "l", grants=[dict(RSU), other])
    C.close(led, register=reg, through=Q1)
    rsu_ledger(led, grants=[dict(RSU), other],
               events=[{"grant_id": "U1", "event_date": "2027-03-01", "event_type": "forfeit", "quantity": ""}])
    res = C.close(led, register=reg, through=Q2)
    j = res.plan.journal
    assert (j.groupby("period_end")["debit_cents"].sum() == j.groupby("period_end")["credit_cents"].sum()).all()
    eng = j[(j["entry"] == "expense") & (j["group"] == "eng")].iloc[0]
    assert eng["debit_cents"] == 0 and eng["credit_cents"] == cents(10_000 * 90 / 365)  # the whole Q1 cost reversed
    ops = j[(j["entry"] == "expense") & (j["group"] == "ops")].iloc[0]
    assert ops["debit_cents"] == cents(1_000 * 181 / 365) - cents(1_000 * 90 / 365) and ops["credit_cents"] == 0
    apic = j[j["entry"] == "equity"].iloc[0]
    assert apic["account"] == "Additional paid-in capital"
    assert apic["debit_cents"] == eng["credit_cents"] - ops["debit_cents"]  # net reversal debits paid-in capital
    with R.open_register(reg, readonly=True) as rr:
        stored = rr.journal(close_id=2)
    assert stored["debit_cents"].sum() == stored["credit_cents"].sum()


def test_accounts_table_names_the_accounts(tmp_path):
    accounts = [{"award_type": "*", "entry": "expense", "account": "6100 SBC"},
                {"award_type": "rsu", "entry": "expense", "account": "6110 SBC units"},
                {"award_type": "*", "entry": "equity", "account": "3200 APIC"}]
    led = write_ledger(tmp_path / "l", tables(accounts=accounts))
    res = C.close(led, register=tmp_path / "r.gvreg", through=Q2)
    names = set(res.plan.journal["account"])
    assert names == {"6100 SBC", "6110 SBC units", "3200 APIC"}
    opt = res.plan.journal[res.plan.journal["account"] == "6100 SBC"]["debit_cents"].sum()
    rows = res.plan.rows
    assert opt == rows.loc[rows["award_type"] == "option", "booked_cents"].sum()


@pytest.mark.parametrize("rows, words", [
    ([{"award_type": "warrant", "entry": "expense", "account": "x"}], "'warrant' is not an award type"),
    ([{"award_type": "*", "entry": "expense", "account": "a"}, {"award_type": "*", "entry": "Expense", "account": "b"}],
     "is set twice"),
])
def test_accounts_table_is_checked(tmp_path, rows, words):
    led = write_ledger(tmp_path / "l", tables(accounts=rows))
    with pytest.raises(LedgerError, match=words):
        C.close(led, register=tmp_path / "r.gvreg", through=Q1)


# ------------------------------------------------------------------ checks


def _plan(tmp_path, ledger=SAMPLE, through="2026-06-30", earlier="2025-12-31"):
    path = tmp_path / "r.gvreg"
    C.close(ledger, register=path, through=earlier)
    reg = R.open_register(path)
    plan = C.plan_close(reg, ledger, through=through)
    reg.close_file()
    return plan


def _verdicts(plan, word):
    from grantval.reporting.close_book import close_checks

    return [c.tool_pass for c in close_checks(plan) if word in c.name]


def test_each_close_check_passes_then_turns_to_fail(tmp_path):
    plan = _plan(tmp_path)
    assert all(c.tool_pass for c in plan.checks) and len(plan.checks) >= 8
    j = plan.journal.copy()
    plan.journal = j.assign(debit_cents=j["debit_cents"] + np.where(np.arange(len(j)) == 0, 1, 0))
    assert False in _verdicts(plan, "debits = credits") and False in _verdicts(plan, "expense debits less credits")
    plan.journal = j
    rows = plan.rows.copy()
    plan.rows = rows.assign(booked_cents=rows["booked_cents"] + np.where(np.arange(len(rows)) == 3, 1, 0))
    assert _verdicts(plan, "Booked this close + booked before") == [False]
    assert False in _verdicts(plan, "Bridge lines")
    plan.rows = rows.assign(catch_up_cents=rows["catch_up_cents"] + np.where(np.arange(len(rows)) == 0, 5, 0))
    assert _verdicts(plan, "Catch-up =") == [False]
    plan.rows = rows
    plan.bridge.cents[1, 0] += 1
    assert _verdicts(plan, "Bridge lines")[0] is False


def test_failed_check_stops_the_booking(tmp_path, monkeypatch):
    from grantval.reporting import close_book

    path = tmp_path / "r.gvreg"
    monkeypatch.setattr(close_book, "_bridge_checks", lambda plan, rows: [
        close_book.CheckRow("forced", 1, 2, 0, False)])
    with pytest.raises(Exception, match="the close was not booked: its checks failed: forced"):
        C.close(write_ledger(tmp_path / "l", BASE), register=path, through=Q1)
    assert C.register_closes(path)[0] == []


# ---------------------------------------------------------- other situations


def test_from_starts_the_register_with_an_opening_balance(tmp_path):
    reg = tmp_path / "r.gvreg"
    led = rsu_ledger(tmp_path / "l")
    first = C.close(led, register=reg, through=Q2, start="2027-04-01")
    assert first.plan.rows["booked_cents"].tolist() == [cents(10_000 * 181 / 365) - cents(10_000 * 90 / 365)]
    second = C.close(led, register=reg, through=Q3)
    assert second.plan.rows["catch_up_cents"].tolist() == [0]
    assert second.plan.rows["booked_cents"].tolist() == [cents(10_000 * 273 / 365) - cents(10_000 * 181 / 365)]


def test_grant_removed_from_the_ledger_is_reversed(tmp_path):
    reg = tmp_path / "r.gvreg"
    other = dict(RSU, grant_id="U2", group="ops")
    led = rsu_ledger(tmp_path / "l", grants=[dict(RSU), other])
    C.close(led, register=reg, through=Q1)
    rsu_ledger(led, grants=[dict(RSU)])
    res = C.close(led, register=reg, through=Q2)
    gone = res.plan.rows[res.plan.rows["grant_id"] == "U2"].iloc[0]
    assert gone["booked_cents"] == gone["catch_up_cents"] == -cents(10_000 * 90 / 365)
    assert res.warnings and "U2" in res.warnings[0]
    with R.open_register(reg, readonly=True) as rr:
        cum = rr.cumulative_booked().set_index("grant_id")["booked_cents"]
    assert cum["U2"] == 0


def test_expense_with_register_shows_booked_and_warns_of_a_changed_closed_period(tmp_path):
    reg = tmp_path / "r.gvreg"
    led = rsu_ledger(tmp_path / "l")
    C.close(led, register=reg, through=Q1)
    r = cli("expense", led, "--through", Q2, "--register", reg, "--csv-dir", tmp_path / "e")
    assert r.exit_code == 0, r.output
    assert "warning" not in r.output and "2027-03-31" in r.output
    rsu_ledger(led, events=[{"grant_id": "U1", "event_date": "2027-02-15", "event_type": "forfeit", "quantity": "400"}])
    r = cli("expense", led, "--through", Q2, "--register", reg, "--csv-dir", tmp_path / "e")
    assert r.exit_code == 0, r.output
    assert "warning: the closed period ending 2027-03-31 would change" in r.output
    t = pd.read_csv(tmp_path / "e" / "booked_vs_recomputed.csv")
    diff = (cents(6_000 * 90 / 365) - cents(10_000 * 90 / 365)) / 100
    assert t["difference"].tolist() == [diff] and t["cumulative_difference"].tolist() == [diff]
    C.close(led, register=reg, through=Q2)  # the catch-up is booked: nothing left to warn of
    r = cli("expense", led, "--through", Q2, "--register", reg, "--csv-dir", tmp_path / "e")
    assert r.exit_code == 0 and "warning" not in r.output


# ------------------------------------------------- tamper, crash, concurrency


def test_tampered_register_is_reported_by_verify_and_refused_by_close(tmp_path):
    reg, led = tmp_path / "r.gvreg", write_ledger(tmp_path / "l", BASE)
    C.close(led, register=reg, through=Q1)
    assert cli("register", reg, "--verify").exit_code == 0
    con = sqlite3.connect(reg, isolation_level=None)
    con.execute("DROP TRIGGER booked_no_update")
    con.execute("UPDATE booked SET booked_cents = booked_cents + 100 WHERE grant_id = 'G1'")
    con.close()
    r = cli("register", reg, "--verify")
    assert r.exit_code == 1
    assert "close 1 (through 2027-03-31): its booked rows were changed outside grantval" in r.output
    r = cli("close", led, "--through", Q2, "--register", reg)
    assert r.exit_code == 1 and "fails its verification; nothing was booked" in r.output
    r = cli("register", reg, "--export", tmp_path / "x")
    assert r.exit_code == 0 and (tmp_path / "x" / "booked.csv").exists()


CHILD = r"""
import pathlib, sys, time
sys.path.insert(0, {root!r})
from grantval.io import register as R
marker, hold = sys.argv[1], float(sys.argv[2])
def hook(stage, n):
    if stage == "commit" and float(hold) > 0:
        pathlib.Path(marker).write_text(stage)
        time.sleep(hold)
R._hook = hook
from grantval.cli import main
main(sys.argv[3:])
"""


def _child(tmp_path, name, hold, *args):
    script = tmp_path / "child.py"
    script.write_text(CHILD.format(root=str(ROOT)))
    marker = tmp_path / f"marker-{name}"
    proc = subprocess.Popen([sys.executable, str(script), str(marker), str(hold), *map(str, args)],
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True, cwd=str(ROOT))
    return proc, marker


def _wait(marker, proc, limit=120.0):
    end = time.monotonic() + limit
    while not marker.exists():
        if proc.poll() is not None:
            pytest.fail(f"child ended early: {proc.communicate()}")
        if time.monotonic() > end:
            proc.kill()
            proc.communicate()
            pytest.fail("child never reached its hook")
        time.sleep(0.05)


def test_killed_close_command_leaves_the_register_as_it_was(tmp_path):
    reg, led = tmp_path / "r.gvreg", write_ledger(tmp_path / "l", BASE)
    C.close(led, register=reg, through=Q1)
    with R.open_register(reg, readonly=True) as rr:
        before, head = rr.booked(), rr.head_digest()
    proc, marker = _child(tmp_path, "kill", 120, "close", led, "--through", Q2, "--register", reg)
    _wait(marker, proc)
    proc.send_signal(signal.SIGKILL)
    proc.communicate(timeout=30)
    assert proc.returncode == -signal.SIGKILL
    with R.open_register(reg) as rr:
        assert rr.booked().equals(before) and rr.head_digest() == head and rr.verify() == []
    assert C.close(led, register=reg, through=Q2).close_id == 2


def test_concurrent_closes_of_the_same_quarter_book_it_once(tmp_path):
    reg, led = tmp_path / "r.gvreg", write_ledger(tmp_path / "l", BASE)
    first, marker = _child(tmp_path, "a", 8, "close", led, "--through", Q1, "--register", reg)
    _wait(marker, first)  # the first close holds the write lock, about to commit
    second, _ = _child(tmp_path, "b", 0, "close", led, "--through", Q1, "--register", reg)
    _, err1 = first.communicate(timeout=120)
    _, err2 = second.communicate(timeout=120)
    assert first.returncode == 0, err1
    assert second.returncode == 1 and "already closed: close 1" in err2
    closes, _ = C.register_closes(reg)
    assert [c.close_id for c in closes] == [1]


def test_close_workbook_checks_recalculate_to_pass_in_a_spreadsheet(tmp_path):
    """LibreOffice (headless) recalculates the checks sheet's live formulas: every Status is PASS and
    figure A equals the tool's figure (same helper as tests/io/test_recalculation.py)."""
    from tests.io.test_recalculation import ERRORS, SOFFICE, recalculate

    if SOFFICE is None:
        pytest.skip("LibreOffice is not installed")
    reg = tmp_path / "r.gvreg"
    C.close(SAMPLE, register=reg, through="2025-12-31")
    led = tmp_path / "l"
    import shutil

    shutil.copytree(SAMPLE, led)
    with open(led / "events.csv", "a") as fh:
        fh.write("CV-0030,2025-11-20,forfeit,,\n")  # a late forfeiture: a catch-up in 2026 Q1
    res = C.close(led, register=reg, through="2026-06-30", xlsx=tmp_path / "c.xlsx", timestamp=False)
    book = openpyxl.load_workbook(recalculate(tmp_path / "c.xlsx", tmp_path), data_only=True)
    rows = list(book["checks"].iter_rows(min_row=2, values_only=True))
    assert len(rows) == len(res.checks)
    for (name, a, b, diff, tol, status), check in zip(rows, res.checks):
        assert not any(str(v).startswith(ERRORS) for v in (a, b, diff, status)), name
        assert status == "PASS" and check.tool_pass, (name, a, b)
    bridge = list(book["bridge"].iter_rows(min_row=2, values_only=True))
    sums = [r[2] for r in bridge if str(r[1]).startswith("Booked expense of the period")]
    per = res.plan.rows.groupby("period_end")["booked_cents"].sum().to_numpy() / 100
    assert np.allclose(sums, per, atol=0.005)


def test_policy_change_between_closes_is_caught_up_with_a_warning(tmp_path):
    reg, led = tmp_path / "r.gvreg", write_ledger(tmp_path / "l", BASE)
    C.close(led, register=reg, through=Q1)
    res = C.close(led, register=reg, through=Q2, attribution="graded")
    assert any("attribution policy is graded but close 1 used straight-line" in w for w in res.warnings)
    assert res.plan.rows["catch_up_cents"].sum() != 0 and not res.failed
    r = cli("expense", led, "--through", Q2, "--register", reg, "--period", "month", "--csv-dir", tmp_path / "e")
    assert r.exit_code == 0 and "nothing to compare" in r.output


def test_cash_settled_awards_are_journalised_against_the_liability(tmp_path, monkeypatch):
    from grantval.reporting import journal as J
    from tests.attribution.cash_ledgers import mixed_ledger

    led = mixed_ledger(tmp_path / "l")
    # without the cash contributor the expense lines fall short of the amounts booked: nothing is booked
    monkeypatch.setattr(J, "CONTRIBUTORS", [J.equity_settled_lines])
    with pytest.raises(Exception, match="expense debits less credits = amount booked"):
        C.close(led, register=tmp_path / "r.gvreg", through="2029-12-31", period="year")
    monkeypatch.setattr(J, "CONTRIBUTORS", [J.equity_settled_lines, J.cash_settled_lines])
    res = C.close(led, register=tmp_path / "r.gvreg", through="2029-12-31", period="year")
    journal = res.plan.journal
    assert not res.failed and "Share-based payment liability" in set(journal["account"])
    liability = journal[journal["entry"] == "liability"]["credit_cents"].sum()
    cash = res.plan.rows["settlement"] == "cash"
    assert liability == res.plan.rows.loc[cash, "booked_cents"].sum()


def test_register_command_refuses_a_file_that_is_not_a_register(tmp_path):
    bad = tmp_path / "notes.txt"
    bad.write_text("hello")
    r = cli("register", bad)
    assert r.exit_code == 1 and "is not a grantval close register" in r.output
    r = cli("register", tmp_path / "missing.gvreg", "--verify")
    assert r.exit_code == 1 and "does not exist" in r.output


def test_read_back_check_turns_to_fail_when_the_register_holds_other_rows(tmp_path):
    path = tmp_path / "r.gvreg"
    res = C.close(write_ledger(tmp_path / "l", BASE), register=path, through=Q1)
    with R.open_register(path, readonly=True) as reg:
        assert C._read_back_check(reg, 1, res.plan).tool_pass

        class Altered:
            def booked(self, close_id):
                rows = reg.booked(close_id=close_id)
                return rows.assign(booked_cents=rows["booked_cents"] + np.where(np.arange(len(rows)) == 0, 1, 0))

        assert not C._read_back_check(Altered(), 1, res.plan).tool_pass


def test_cash_paid_at_settlement_is_journalised_in_the_period_of_the_exercise(tmp_path):
    from grantval.reporting import journal as J
    from tests.attribution.cash_ledgers import IFRS_VALUES, ifrs_example_12

    # year-end values for the close's calendar periods (18.20 and 21.40 reused; only the cash is asserted)
    led = ifrs_example_12(tmp_path / "l", values=IFRS_VALUES + (("2031-12-31", "18.20"), ("2032-12-31", "21.40")))
    res = C.close(led, register=tmp_path / "r.gvreg", through="2032-12-31", period="year")
    lines = res.plan.journal
    cash = lines[lines["entry"] == "cash"]
    # Exercise event of the ledger (IFRS 2 IG Example 12, end of year 3 = 2032-01-01 in the ledger):
    # 15,000 SARs x intrinsic value (share price 25 - exercise price 10 = 15.00) = 225,000.00 paid,
    # in the year ending 2032-12-31; none paid in 2029-2031 (computed by hand from the event row).
    assert set(cash["period_end"].astype(str)) == {"2032-12-31"}
    dr = cash[cash["account"] == "Share-based payment liability"]["debit_cents"].sum()
    cr = cash[cash["account"] == "Cash"]["credit_cents"].sum()
    assert dr == cr == 22_500_000
    bal = J.period_balances(lines)
    assert (bal["debit_cents"] == bal["credit_cents"]).all() and not res.failed


def test_tax_effects_are_booked_in_the_close_journal(tmp_path):
    from grantval.reporting import journal as J
    from grantval.reporting.tax_tables import DTA, DEFERRED_PL
    from tests.attribution.tax_ledgers import event, grant, ledger, rate

    # 1,000 options, fair value 4, one tranche vesting 2028-01-01, rate 21% (invented; hand computation,
    # ASC 718-740-30-1, from memory): cost 4,000 recognised in 2027, deferred tax asset 4,000 x 21% = 840.00,
    # Dr deferred tax asset / Cr deferred income tax benefit in the year ending 2027-12-31.
    led = ledger(tmp_path / "l", grants=[grant("G1")], rates=[rate("*", "2027-01-01", "0.21")],
                 events=[event("G1", "2028-06-30", "exercise", 600, 30)])
    res = C.close(led, register=tmp_path / "r.gvreg", through="2027-12-31", start="2027-01-01", period="year")
    tax = res.plan.journal[res.plan.journal["entry"] == "tax"]
    assert tax[tax["account"] == DTA]["debit_cents"].sum() == 84_000
    assert tax[tax["account"] == DEFERRED_PL]["credit_cents"].sum() == 84_000
    bal = J.period_balances(res.plan.journal)
    assert (bal["debit_cents"] == bal["credit_cents"]).all() and not res.failed
    with R.open_register(tmp_path / "r.gvreg", readonly=True) as reg:  # the register holds the tax lines
        stored = reg.journal()
    assert stored.loc[stored["account"] == DTA, "debit_cents"].sum() == 84_000


def _late_exercise_ledgers(tmp_path):
    from tests.attribution.cash_ledgers import IFRS_VALUES, event, ifrs_example_12

    # IFRS 2 IG Example 12's ledger (tests/attribution/cash_ledgers.py) on calendar years, with the
    # year-end values 18.20 (2031), 21.40 (2032, reused) and 21.40 (2033, reused, invented)
    vals = IFRS_VALUES + (("2031-12-31", "18.20"), ("2032-12-31", "21.40"), ("2033-12-31", "21.40"))
    events = [event("SAR", "2029-12-31", "forfeit", "3500"), event("SAR", "2030-12-31", "forfeit", "4000"),
              event("SAR", "2031-12-31", "forfeit", "2200"), event("SAR", "2033-01-01", "exercise", "14000", "30")]
    late = event("SAR", "2032-01-01", "exercise", "15000", "25")
    return (ifrs_example_12(tmp_path / "before", values=vals, events=events),
            ifrs_example_12(tmp_path / "after", values=vals, events=events + [late]))


def test_late_cash_payment_in_a_closed_period_is_caught_up_in_the_open_period(tmp_path):
    reg = tmp_path / "r.gvreg"
    before, after = _late_exercise_ledgers(tmp_path)
    first = C.close(before, register=reg, through="2032-12-31", period="year")
    assert not (first.plan.journal["entry"] == "cash").any()  # nothing paid in 2029-2032 as then entered
    closed_rows, closed_journal = booked(reg, 1), R.open_register(reg, readonly=True).journal(1)
    # the 2032-01-01 exercise of 15,000 SARs is entered after 2032 was closed
    res = C.close(after, register=reg, through="2033-12-31", period="year")
    lines = res.plan.journal
    cash = lines[(lines["entry"] == "cash")]
    late = cash[cash["description"].str.startswith("Catch-up of closed periods")]
    # catch-up: 15,000 x (25 - 10) = 225,000.00, Dr liability / Cr cash in the period ending 2033-12-31
    assert set(late["period_end"].astype(str)) == {"2033-12-31"}
    assert late["debit_cents"].sum() == late["credit_cents"].sum() == 22_500_000
    # the year's own payment: 14,000 x (30 - 10) = 280,000.00
    own = cash[~cash.index.isin(late.index)]
    assert own["debit_cents"].sum() == 28_000_000
    # expense catch-up of 2032: 25,300 x 21.40 + 225,000 - 40,300 x 21.40 = -96,000.00
    assert int(res.plan.rows["catch_up_cents"].sum()) == -9_600_000
    assert any("cash paid dated on or before 2032-12-31 (closed periods) differs from the cash booked through it by "
               "225,000.00" in w for w in res.warnings)
    # the closed close is unchanged
    pd.testing.assert_frame_equal(booked(reg, 1), closed_rows)
    pd.testing.assert_frame_equal(R.open_register(reg, readonly=True).journal(1), closed_journal)
    assert not res.failed and any(c.name.startswith("Cash paid booked through") and c.tool_pass for c in res.checks)


def test_cash_check_turns_to_fail_when_a_late_payment_is_not_caught_up(tmp_path, monkeypatch):
    from grantval.runs import close_late

    reg = tmp_path / "r.gvreg"
    before, after = _late_exercise_ledgers(tmp_path)
    C.close(before, register=reg, through="2032-12-31", period="year")
    monkeypatch.setattr(C, "late_cash", lambda last, run, figures, removed, out: close_late.late_cash(
        last, run, figures, removed, out) or setattr(out, "cash", None))  # the catch-up lines left out
    with pytest.raises(Exception, match="Cash paid booked through 2033-12-31"):
        C.close(after, register=reg, through="2033-12-31", period="year")
    assert len(booked(reg)) == len(booked(reg, 1))  # nothing booked


def test_late_tax_effect_in_a_closed_period_is_caught_up_in_the_open_period(tmp_path):
    from grantval.reporting.tax_tables import DTA, DEFERRED_PL
    from tests.attribution.tax_ledgers import event, grant, ledger, rate

    # 1,000 options, fair value 4, vesting 2028-01-01 (tests above), rate 21% (ASC 718-740-30-1, from
    # memory): 4,000 x 21% = 840.00 deferred tax asset booked for 2027. A forfeiture of 500 dated
    # 2027-06-30 is entered after 2027 was closed: recomputed 2027 cost 2,000, deferred tax 420.00, so the
    # next close books Dr deferred income tax / Cr deferred tax asset 420.00 in 2028 (hand computation).
    reg = tmp_path / "r.gvreg"
    rates = [rate("*", "2027-01-01", "0.21")]
    before = ledger(tmp_path / "a", grants=[grant("G1")], rates=rates)
    after = ledger(tmp_path / "b", grants=[grant("G1")], rates=rates, events=[event("G1", "2027-06-30", "forfeit", 500)])
    C.close(before, register=reg, through="2027-12-31", start="2027-01-01", period="year")
    closed_journal = R.open_register(reg, readonly=True).journal(1)
    res = C.close(after, register=reg, through="2028-12-31", period="year")
    tax = res.plan.journal[res.plan.journal["entry"] == "tax"]
    late = tax[tax["description"].str.startswith("Catch-up of closed periods")]
    assert late.loc[late["account"] == DTA, "credit_cents"].sum() == 42_000
    assert late.loc[late["account"] == DEFERRED_PL, "debit_cents"].sum() == 42_000
    assert set(late["period_end"].astype(str)) == {"2028-12-31"}
    assert int(res.plan.rows["catch_up_cents"].sum()) == -200_000  # the expense catch-up: 2,000 - 4,000
    assert any("tax effects dated on or before 2027-12-31" in w for w in res.warnings)
    pd.testing.assert_frame_equal(R.open_register(reg, readonly=True).journal(1), closed_journal)
    # a third close with nothing new entered books no further tax catch-up
    res3 = C.close(after, register=reg, through="2029-12-31", period="year")
    j3 = res3.plan.journal
    assert not j3["description"].astype(str).str.startswith("Catch-up of closed periods").any()
    assert not res.failed and not res3.failed


def test_tax_check_turns_to_fail_when_a_late_tax_effect_is_not_caught_up(tmp_path, monkeypatch):
    from grantval.runs import close_late
    from tests.attribution.tax_ledgers import event, grant, ledger, rate

    reg = tmp_path / "r.gvreg"
    rates = [rate("*", "2027-01-01", "0.21")]
    C.close(ledger(tmp_path / "a", grants=[grant("G1")], rates=rates), register=reg, through="2027-12-31",
            start="2027-01-01", period="year")
    after = ledger(tmp_path / "b", grants=[grant("G1")], rates=rates, events=[event("G1", "2027-06-30", "forfeit", 500)])
    monkeypatch.setattr(C, "late_tax", lambda last, run, window, lines, out: close_late.late_tax(
        last, run, window, lines, out) or setattr(out, "tax", None))  # the catch-up lines left out
    with pytest.raises(Exception, match="Tax lines booked through 2028-12-31"):
        C.close(after, register=reg, through="2028-12-31", period="year")


def test_register_from_an_earlier_grantval_says_late_payments_are_not_caught_up(tmp_path, monkeypatch):
    reg = tmp_path / "r.gvreg"
    before, after = _late_exercise_ledgers(tmp_path)
    record = C._record
    # a first close that records no cash or tax figures, as closes made before they were recorded
    monkeypatch.setattr(C, "_record", lambda *a, **k: record(*a[:7]))
    C.close(before, register=reg, through="2032-12-31", period="year")
    monkeypatch.setattr(C, "_record", record)
    res = C.close(after, register=reg, through="2033-12-31", period="year")
    assert any("close 1 did not record the cash paid it booked" in w for w in res.warnings)
    assert not res.plan.journal["description"].astype(str).str.startswith("Catch-up of closed periods").any()
    assert not res.failed


def test_payment_removed_from_a_closed_period_is_reversed_in_the_open_period(tmp_path):
    from tests.attribution.cash_ledgers import IFRS_VALUES, ifrs_example_12

    # the other way round: the 2032-01-01 exercise (225,000.00, as above) was booked, then taken out
    # of the ledger (entered in error): the next close books Cr liability / Dr cash 225,000.00
    reg = tmp_path / "r.gvreg"
    before, after = _late_exercise_ledgers(tmp_path)
    C.close(after, register=reg, through="2032-12-31", period="year")
    res = C.close(before, register=reg, through="2033-12-31", period="year")
    late = res.plan.journal[res.plan.journal["description"].str.startswith("Catch-up of closed periods")]
    assert late.loc[late["account"] == "Cash", "debit_cents"].sum() == 22_500_000
    assert late.loc[late["account"] == "Share-based payment liability", "credit_cents"].sum() == 22_500_000
    assert int(res.plan.rows["catch_up_cents"].sum()) == 9_600_000 and not res.failed
    assert any("differs from the cash booked through it by -225,000.00" in w for w in res.warnings)
