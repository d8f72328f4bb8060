"""CSV and xlsx ledgers give identical results; output files are reproducible."""

import pathlib

from grantval import api
from grantval.io.convert import csv_folder_to_workbook
from grantval.ledger.schema import TABLE_NAMES, TEXT_COLUMNS
from tests.factory import tables, write_ledger

SAMPLE = pathlib.Path(__file__).resolve().parents[2] / "sample_grants"


def test_csv_and_xlsx_ledgers_give_identical_fair_value_files(tmp_path):
    a = api.value(SAMPLE)
    b = api.value(SAMPLE / "sample_grants.xlsx")
    api.write_fair_values(a, None, tmp_path / "a")
    api.write_fair_values(b, None, tmp_path / "b")
    assert (tmp_path / "a" / "fair_values.csv").read_bytes() == (tmp_path / "b" / "fair_values.csv").read_bytes()


def test_written_workbook_reads_back_as_the_same_ledger(tmp_path):
    folder = write_ledger(tmp_path / "l", tables())
    csv_folder_to_workbook(folder, tmp_path / "l.xlsx", TABLE_NAMES, TEXT_COLUMNS)
    x = api.value(folder).fair_values.table
    y = api.value(tmp_path / "l.xlsx").fair_values.table
    assert x.equals(y)


def test_rerun_gives_identical_csv(tmp_path):
    for d in ("r1", "r2"):
        api.write_fair_values(api.value(SAMPLE), None, tmp_path / d)
    assert (tmp_path / "r1" / "fair_values.csv").read_bytes() == (tmp_path / "r2" / "fair_values.csv").read_bytes()
