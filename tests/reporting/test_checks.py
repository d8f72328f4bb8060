"""Every verdict on the checks sheet comes from two independent computations and can turn to FAIL.

Each case corrupts one side of one check (a doctored table or figure) and expects that
check, and the command, to fail (exit 1).  Common practice: a tie-out that cannot fail
is no evidence.
"""

import dataclasses
import pathlib

import numpy as np
import pytest
from typer.testing import CliRunner

import grantval.reporting.checks as C
import grantval.reporting.expense_tables as T
import grantval.runs.expense as RE
from grantval.cli import app

SAMPLE = pathlib.Path(__file__).resolve().parents[2] / "sample_grants"


def _drop_last_row(fn):
    def wrapped(*a, **k):
        return fn(*a, **k).iloc[:-1].reset_index(drop=True)
    return wrapped


def _bump_total(fn):
    def wrapped(*a, **k):
        frame = fn(*a, **k)
        frame.loc[0, "total"] += 0.01
        return frame
    return wrapped


def _drop_group(fn):
    def wrapped(*a, **k):
        frame, sums = fn(*a, **k)
        sums = sums.copy()
        sums[0, :] = 0
        return frame, sums
    return wrapped


def _bump_unrecognised(fn):
    def wrapped(*a, **k):
        frame, total, wa = fn(*a, **k)
        frame.loc[0, "unrecognised_cost"] += 1.0
        return frame, total, wa
    return wrapped


def _one_cent_in_schedule(fn):
    def wrapped(*a, **k):
        sched = fn(*a, **k)
        cents = sched.expense_cents.copy()
        cents[0, -1] += 1
        return dataclasses.replace(sched, expense_cents=cents)
    return wrapped


def _bsm_value_off(fn):
    def wrapped(*a, **k):
        fv = fn(*a, **k)
        t = fv.table.copy()
        i = int(np.flatnonzero(t["model"].to_numpy() == "bsm")[0])
        t.loc[i, "fair_value_per_unit"] *= 1.001
        return dataclasses.replace(fv, table=t)
    return wrapped


def _tie_off(fn):
    def wrapped(*a, **k):
        d = fn(*a, **k)
        return dataclasses.replace(d, option_tie=(d.option_tie[0], d.option_tie[1] + 1))
    return wrapped


def _fewer_valued(fn):
    def wrapped(*a, **k):
        fv = fn(*a, **k)
        return dataclasses.replace(fv, table=fv.table.iloc[1:].reset_index(drop=True))
    return wrapped


CASES = [
    ("Grants in the ledger = grants valued", "grantval.runs.expense.compute_fair_values", _fewer_valued),
    ("Grants valued = grant rows in the expense schedule", "grantval.reporting.expense_tables.wide_by_grant",
     _drop_last_row),
    ("Period cells of all grants sum to the engine's total from the per-tranche costs",
     "grantval.runs.expense.compute_schedule", _one_cent_in_schedule),
    ("Column totals sum to the total of the row totals", "grantval.reporting.expense_tables.wide_by_grant",
     _bump_total),
    ("Expense by group (its own grouping) sums to the engine's total",
     "grantval.reporting.expense_tables.wide_by_group", _drop_group),
    ("Recognised + unrecognised = expected quantity x fair value (all tranches)",
     "grantval.reporting.expense_tables.unrecognised_table", _bump_unrecognised),
    ("Grants whose recognised + unrecognised differs from expected quantity x fair value by over a cent",
     "grantval.reporting.expense_tables.unrecognised_table", _bump_unrecognised),
    ("Option roll-forward: start + granted - exercised - forfeited - expired = end",
     "grantval.reporting.disclosure.compute_disclosure", _tie_off),
    ("Formula-recomputed BSM fair values sum to the tool's (relative tolerance)",
     "grantval.runs.expense.compute_fair_values", _bsm_value_off),
]


def _run(tmp_path, *extra):
    return CliRunner().invoke(app, ["expense", str(SAMPLE), "--through", "2026-12-31", "-o", str(tmp_path / "e.xlsx"),
                                    *extra])


def test_clean_run_passes_every_check(tmp_path):
    r = _run(tmp_path)
    assert r.exit_code == 0, r.output
    assert "check failed" not in r.output


def test_every_check_has_a_corruption_case():
    run = RE.expense(SAMPLE, through="2026-12-31")
    names = {c.name for c in RE.write_expense(run, None, None).checks}
    covered = {name for name, _, _ in CASES} | {"RSU roll-forward: start + granted - vested - forfeited = end",
                                                 PSU_CHECK, ESPP_CHECK}
    assert names == covered


@pytest.mark.parametrize("name,target,corrupt", CASES, ids=[c[0][:40] for c in CASES])
def test_corrupted_side_fails_the_check_and_the_command(tmp_path, monkeypatch, name, target, corrupt):
    module, attr = target.rsplit(".", 1)
    import importlib

    mod = importlib.import_module(module)
    monkeypatch.setattr(mod, attr, corrupt(getattr(mod, attr)))
    monkeypatch.setattr(RE, "reconcile", lambda *a, **k: None)  # let a doctored table reach the checks
    r = _run(tmp_path)
    assert r.exit_code == 1, r.output
    assert f"check failed: {name}" in r.output


def test_rsu_roll_forward_turns_to_fail(tmp_path, monkeypatch):
    import grantval.reporting.disclosure as D

    real = D.compute_disclosure

    def off(*a, **k):
        d = real(*a, **k)
        return dataclasses.replace(d, rsu_tie=(d.rsu_tie[0] + 1, d.rsu_tie[1]))
    monkeypatch.setattr(D, "compute_disclosure", off)
    r = _run(tmp_path)
    assert r.exit_code == 1 and "check failed: RSU roll-forward" in r.output


PSU_CHECK = "Performance-unit roll-forward: start + granted + adjustments - vested - forfeited = end"


def test_performance_unit_roll_forward_turns_to_fail(tmp_path, monkeypatch):
    import grantval.reporting.disclosure as D

    real = D.compute_disclosure

    def off(*a, **k):
        d = real(*a, **k)
        return dataclasses.replace(d, psu_tie=(d.psu_tie[0], d.psu_tie[1] - 1))
    monkeypatch.setattr(D, "compute_disclosure", off)
    r = _run(tmp_path)
    assert r.exit_code == 1 and f"check failed: {PSU_CHECK}" in r.output


ESPP_CHECK = "Purchase-plan roll-forward: start + granted - reached - withdrawn - rolled over - forfeited = end"


def test_purchase_plan_roll_forward_turns_to_fail(tmp_path, monkeypatch):
    # the demo's offering (sample_grants/): the flows' side of the tie off by one share
    import grantval.reporting.espp_tables as E

    real = E.purchase_plan_activity

    def off(*a, **k):
        frame, (flows, end) = real(*a, **k)
        return frame, (flows + 1, end)
    monkeypatch.setattr(E, "purchase_plan_activity", off)
    r = _run(tmp_path)
    assert r.exit_code == 1 and f"check failed: {ESPP_CHECK}" in r.output


def test_second_bsm_implementation_agrees_with_the_pricing_core():
    # The independent formula against a textbook figure: Hull, Options, Futures and Other Derivatives,
    # the worked Black-Scholes example S=42, K=40, r=0.10, sigma=0.20, T=0.5: call 4.76 (example number
    # differs by edition; figure from memory).
    assert C._bsm_by_erf(np.array([42.0]), 40.0, 0.5, 0.10, 0.20, 0.0)[0] == pytest.approx(4.76, abs=0.005)


def test_engine_total_by_blocks_of_grants_is_the_whole_ledgers(tmp_path, monkeypatch):
    # reference: the two whole-ledger measurements; blocks of grants (a memory device) must give the
    # same cents, and both the schedule's total (the check's other side)
    from grantval.attribution import blocks
    from grantval.reporting.checks import engine_total_cents
    from tests.attribution.random_ledgers import random_ledger
    from tests.factory import write_ledger

    folder = write_ledger(tmp_path / "l", random_ledger(6, n=30))
    run = RE.expense(folder, through="2031-03-15", start="2027-01-01")
    whole = engine_total_cents(run.inputs, run.policy, run.start, run.through)
    monkeypatch.setattr(blocks, "MIN_TRANCHES", 0)
    monkeypatch.setattr(blocks, "BLOCK_TRANCHES", 7)
    assert blocks.blockable(run.inputs)
    by_blocks = engine_total_cents(run.inputs, run.policy, run.start, run.through)
    assert by_blocks == whole == int(run.schedule.expense_cents.sum()) and whole != 0


@pytest.mark.parametrize("chunk", [1, 7, 1 << 20])
def test_cents_of_the_written_cells_in_chunks_are_the_whole_sum(chunk):
    # reference: each amount rounded to its cents one at a time with Python's round, then added (common practice)
    rng = np.random.default_rng(3)
    cells = np.round(rng.normal(0, 5000, (40, 13)), 2)
    expected = sum(round(v * 100) for v in cells.ravel().tolist())
    assert C._cents(cells, chunk=chunk) == expected
    assert C._cents(cells + 0.01, chunk=chunk) != expected  # one cent more on every cell: a different sum
