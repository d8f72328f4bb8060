"""Reruns give byte-identical outputs; ledger text is never a formula in the workbook."""

import pathlib

import openpyxl

from grantval import api
from tests.factory import BASE, set_cell, write_ledger

SAMPLE = pathlib.Path(__file__).resolve().parents[2] / "sample_grants"
# the CSV files of an expense run with --forecast-through (README, "expense")
EXPENSE_CSVS = sorted(["expense.csv", "expense_by_group.csv", "tranches.csv", "forecast.csv", "unrecognized.csv"])


def _run(out: pathlib.Path, timestamp: bool):
    run = api.expense(SAMPLE, through="2026-12-31", forecast_through="2027-06-30")
    api.write_expense(run, out / "e.xlsx", out / "csv", timestamp=timestamp, share_price=30.0)


def test_reruns_are_byte_identical_without_timestamp(tmp_path):
    _run(tmp_path / "a", False)
    _run(tmp_path / "b", False)
    assert (tmp_path / "a" / "e.xlsx").read_bytes() == (tmp_path / "b" / "e.xlsx").read_bytes()
    names = sorted(f.name for f in (tmp_path / "a" / "csv").iterdir())
    assert names == sorted(f.name for f in (tmp_path / "b" / "csv").iterdir()) == EXPENSE_CSVS
    for name in names:
        assert (tmp_path / "a" / "csv" / name).read_bytes() == (tmp_path / "b" / "csv" / name).read_bytes(), name


def test_with_timestamp_only_the_run_time_differs(tmp_path):
    _run(tmp_path / "a", True)
    _run(tmp_path / "b", False)
    a = openpyxl.load_workbook(tmp_path / "a" / "e.xlsx")
    b = openpyxl.load_workbook(tmp_path / "b" / "e.xlsx")
    assert a.sheetnames == b.sheetnames
    skipped = 0
    for ws in a.worksheets:
        rows_a, rows_b = list(ws.iter_rows(values_only=True)), list(b[ws.title].iter_rows(values_only=True))
        assert len(rows_a) == len(rows_b), ws.title
        for ra, rb in zip(rows_a, rows_b):
            if ra and ra[0] == "Run at":
                skipped += 1
                continue
            assert ra == rb, ws.title
    assert skipped == 1  # the one run-time row exists and is the only row left out


def test_ledger_text_starting_with_equals_is_text_in_expense_workbook(tmp_path):
    data = set_cell(BASE, "grants", 0, "group", "=1+1")
    run = api.expense(write_ledger(tmp_path / "l", data), through="2028-12-31")
    api.write_expense(run, tmp_path / "e.xlsx", None)
    ws = openpyxl.load_workbook(tmp_path / "e.xlsx")["expense_by_grant"]
    cells = [c for c in ws[2] if c.value == "=1+1"]
    assert cells and all(c.data_type == "s" for c in cells)


def test_csv_and_xlsx_inputs_give_byte_identical_expense_csv(tmp_path):
    for name, ledger in (("csv", SAMPLE), ("xlsx", SAMPLE / "sample_grants.xlsx")):
        run = api.expense(ledger, through="2026-12-31", forecast_through="2027-06-30")
        api.write_expense(run, None, tmp_path / name)
    names = sorted(f.name for f in (tmp_path / "csv").iterdir())
    assert names == sorted(f.name for f in (tmp_path / "xlsx").iterdir()) == EXPENSE_CSVS
    for name in names:
        assert (tmp_path / "csv" / name).read_bytes() == (tmp_path / "xlsx" / name).read_bytes(), name
