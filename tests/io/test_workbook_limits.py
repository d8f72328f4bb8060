"""Workbooks stay within Excel's limits; the fast row writer matches openpyxl; progress stays quiet."""

import pathlib
import re

import numpy as np
import openpyxl
import pandas as pd
import pytest
from typer.testing import CliRunner

import grantval.io.write as W
from grantval.cli import app
from grantval.errors import OutputError

SAMPLE = pathlib.Path(__file__).resolve().parents[2] / "sample_grants"


def test_long_table_is_split_across_sheets(tmp_path, monkeypatch):
    monkeypatch.setattr("grantval.io.xlsx.write.EXCEL_ROWS", 11)  # 10 data rows per sheet for the test
    frame = pd.DataFrame({"grant_id": [f"G{i}" for i in range(25)], "x": np.arange(25) * 1.5})
    W.write_workbook(tmp_path / "b.xlsx", [W.Sheet("tranches", frame=frame)])
    wb = openpyxl.load_workbook(tmp_path / "b.xlsx")
    assert wb.sheetnames == ["tranches", "tranches_2", "tranches_3"]
    got = [r for ws in wb.worksheets for r in ws.iter_rows(min_row=2, values_only=True)]
    assert [g for g, _ in got] == list(frame["grant_id"])


def test_too_many_columns_is_a_clear_error(tmp_path, monkeypatch):
    monkeypatch.setattr("grantval.io.xlsx.write.EXCEL_COLUMNS", 5)
    frame = pd.DataFrame({f"c{i}": [1.0] for i in range(6)})
    with pytest.raises(OutputError, match="more than Excel's"):
        W.write_workbook(tmp_path / "b.xlsx", [W.Sheet("wide", frame=frame)])
    assert not (tmp_path / "b.xlsx").exists()


def test_fast_rows_equal_openpyxl_rows(tmp_path, monkeypatch):
    frame = pd.DataFrame({
        "grant_id": ["A", "=B", "C & <D>", None, "E"], "n": np.arange(5), "x": [0.1, np.nan, 1 / 3, 2.0, -5.25],
        "d": np.array(["2027-01-01", "NaT", "2028-02-29", "2030-12-31", "2031-01-01"], dtype="datetime64[D]"),
        "b": [True, False, True, False, True],
        "f": [W.Formula(f"=B{r}*2") for r in range(2, 7)],
    })
    fmts = {"x": "0.00", "d": "yyyy-mm-dd", "n": "#,##0"}
    W.write_workbook(tmp_path / "slow.xlsx", [W.Sheet("s", frame=frame, formats=fmts, text_columns=("grant_id",))])
    monkeypatch.setattr("grantval.io.xlsx.write.FAST_ROWS", 1)
    W.write_workbook(tmp_path / "fast.xlsx", [W.Sheet("s", frame=frame, formats=fmts, text_columns=("grant_id",))])
    a = openpyxl.load_workbook(tmp_path / "slow.xlsx")["s"]
    b = openpyxl.load_workbook(tmp_path / "fast.xlsx")["s"]
    assert (a.max_row, a.max_column) == (b.max_row, b.max_column) == (6, 6)  # zip below would hide a short sheet
    for ra, rb in zip(a.iter_rows(), b.iter_rows()):
        for ca, cb in zip(ra, rb):
            assert (ca.value, ca.data_type, ca.number_format) == (cb.value, cb.data_type, cb.number_format), ca.coordinate
    assert b["A3"].value == "=B" and b["A3"].data_type == "s"  # ledger text is never a formula


def test_no_progress_output_when_not_a_terminal(tmp_path):
    r = CliRunner().invoke(app, ["expense", str(SAMPLE), "--through", "2026-12-31", "--csv-dir", str(tmp_path)])
    assert r.exit_code == 0
    assert "⠋" not in r.output and "━" not in r.output


def test_verbose_prints_stage_timings(tmp_path):
    r = CliRunner().invoke(app, ["--verbose", "value", str(SAMPLE), "--csv-dir", str(tmp_path)])
    assert r.exit_code == 0, r.output
    # one timing line per stage, "  <stage padded to 10> <seconds, 8.2f> s" (grantval.progress.Reporter),
    # in the order the stages ran; a plain "value" would also match "valued" in the summary line
    timings = re.findall(r"^  (\S+) +\d+\.\d\d s$", r.output, flags=re.MULTILINE)
    assert timings == ["read+check", "value"], r.output
    quiet = CliRunner().invoke(app, ["value", str(SAMPLE), "--csv-dir", str(tmp_path)])
    assert quiet.exit_code == 0 and not re.search(r"\d\.\d\d s$", quiet.output, flags=re.MULTILINE), quiet.output
