"""Typing of ledger cells (grantval/ledger/parse.py): the text-column path against the cell-by-cell path.

CSV cells are all text, and their columns are typed by list operations over
the distinct cells (:func:`_type_texts`); workbook columns with numbers or
dates go cell by cell (:func:`_type_uniques`).  Both must give the same
values and the same problem words for the same text.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from grantval.io.tables import RawTable
from grantval.ledger.columns import Column
from grantval.ledger.parse import _blank, _type_texts, _type_uniques, parse_table

CELLS = ["", "  ", "abc", " padded ", "Option", "RSU", "rsu ", "12", "12.50", " 3 ", "1e3", "-4", "+5", ".5", "5.",
         "35%", "1,000", "1,000.5", "nan", "inf", "1e999", "2.5.1", "2027-03-15", " 2027-03-15 ", "2027-02-30",
         "2027/03/15", "15.03.2027", "zero\u200bwidth", "tab\there", "line\nbreak", "é", "日本", "\ufeffbom",
         "x" * 50, "1_000", "0x10"]

COLUMNS = [Column("t", "text"), Column("c", "choice", choices=("option", "rsu", "psu")),
           Column("n", "number"), Column("i", "integer"), Column("d", "date")]


def _same(a, b) -> bool:
    if isinstance(a, float) and isinstance(b, float) and np.isnan(a) and np.isnan(b):
        return True
    if isinstance(a, np.datetime64) and isinstance(b, np.datetime64):
        return (np.isnat(a) and np.isnat(b)) or a == b
    return type(a) is type(b) and a == b


@pytest.mark.parametrize("col", COLUMNS, ids=[c.kind for c in COLUMNS])
def test_text_path_equals_cell_by_cell(col):
    typed, errors, blank = _type_texts(col, CELLS)
    blank_ref = np.array([_blank(c) for c in CELLS], dtype=bool)
    typed_ref, errors_ref = _type_uniques(col, CELLS, blank_ref)
    assert blank.tolist() == blank_ref.tolist()
    assert errors == errors_ref
    assert all(_same(a, b) for a, b in zip(typed, typed_ref)), list(zip(CELLS, typed, typed_ref))


def test_forbidden_characters_found_by_the_one_scan():
    # the scan over the joined text must still name the cell and the character
    col = Column("t", "text")
    typed, errors, _ = _type_texts(col, ["fine", "bad\u200bcell", "also fine"])
    assert errors[0] is None and errors[2] is None
    assert "U+200B ZERO WIDTH SPACE" in errors[1] and "first at character 4" in errors[1]
    assert typed == ["fine", None, "also fine"]


def test_parse_table_names_rows_of_csv_cells():
    rows = [["G1", "option", "12", "2027-03-15"], ["G2", "bogus", "x", "2027-13-01"], ["", "RSU", "", ""], ["G3", "", "7", ""],
            ["G1", "option", "12", "2027-03-15"]]
    table = RawTable("grants", "grants.csv", ["grant_id", "award_type", "quantity", "grant_date"],
                     ["grant_id", "award_type", "quantity", "grant_date"], rows, [2, 3, 5, 6, 7])
    cols = (Column("grant_id", "text", required=True), Column("award_type", "choice", choices=("option", "rsu"),
                                                               default="option"),
            Column("quantity", "integer", required=True), Column("grant_date", "date"),
            Column("vest_start_date", "date"), Column("cliff_months", "integer", default=0))
    frame, problems = parse_table(table, cols)
    got = [(p.row, p.column, p.message) for p in problems]
    assert got == [
        (5, "grant_id", "is required and is empty"),
        (3, "award_type", "'bogus' is not one of: option, rsu"),
        (5, "quantity", "is required and is empty"),
        (3, "quantity", "'x' is not a number"),
        (3, "grant_date", "'2027-13-01' is not a calendar date"),
    ]
    award = frame["award_type"].tolist()
    assert award[0] == "option" and pd.isna(award[1]) and award[2:] == ["rsu", "option", "option"]  # blank takes the default
    assert frame["cliff_months"].tolist() == [0.0] * 5
    assert frame["vest_start_date"].isna().all() and frame["_row"].tolist() == [2, 3, 5, 6, 7]
    assert frame["quantity"].tolist()[0] == 12.0 and np.isnan(frame["quantity"].tolist()[1])
    assert str(frame["grant_date"].dtype).startswith("datetime64")


def test_sheet_cells_keep_booleans_apart_from_numbers():
    table = RawTable("grants", "sheet grants", ["quantity"], ["quantity"], [[True], [1], [1.0], ["1"]], [2, 3, 4, 5])
    frame, problems = parse_table(table, (Column("quantity", "integer"),))
    assert [(p.row, p.message) for p in problems] == [(2, "must be a number")]
    assert pd.isna(frame["quantity"][0]) and frame["quantity"].tolist()[1:] == [1.0, 1.0, 1.0]
