"""The vectorised row writer (grantval.io.xlsx.bigsheet) against a cell-by-cell reference.

Reference: each cell written on its own by ``_any_cell`` (the per-value
writer), after the cell's reference and style; the vectorised writer must
give the same bytes for every kind of object column, including a trailing
column-totals row of SUM formulas written apart from the data rows.
"""

import datetime as dt

import numpy as np
import pandas as pd

from grantval.io.cells import col_letter
from grantval.io.xlsx import bigsheet as B
from grantval.io.xlsx.sheet import Formula


def _reference(frame: pd.DataFrame, first_row: int) -> bytes:
    out = []
    for i, row in enumerate(frame.itertuples(index=False)):
        r = str(first_row + i).encode()
        cells = [b'<c r="' + col_letter(j + 1).encode() + r + b'"' + B._any_cell(v) for j, v in enumerate(row)]
        out.append(b'<row r="' + r + b'">' + b"".join(cells) + b"</row>")
    return b"".join(out)


def _frame() -> pd.DataFrame:
    return pd.DataFrame({
        "label": np.array(["a", None, "x & <y>", "=not a formula", "Total"], dtype=object),
        "floats": np.array([0.1, None, 1 / 3, 2.0, Formula("=SUM(B2:B5)")], dtype=object),
        "formulas": np.array([Formula(f"=IF(B{r}<C{r},1,0)&\"x\"") for r in range(2, 6)] + [None], dtype=object),
        "mixed": np.array([1, 2.5, "t", True, pd.Timestamp("2027-01-01")], dtype=object),
        "ints": np.array([1, 2, np.int64(3), 4, None], dtype=object),
        "nan_text": np.array(["u", np.nan, None, "v", pd.NaT], dtype=object),
        "bools": np.array([True, False, np.bool_(True), False, True], dtype=object),
        "empty": np.array([None] * 5, dtype=object),
        "dates": np.array([dt.date(2027, 1, 1), pd.Timestamp("2028-02-29 13:00"), None, np.datetime64("2030-12-31"),
                           dt.datetime(1999, 12, 31, 23, 59)], dtype=object),
    })


def test_object_columns_match_cell_by_cell():
    frame = _frame()
    assert B.rows_xml(frame, 3, {}) == _reference(frame, 3)


def test_data_blocks_match_cell_by_cell():
    frame = _frame().iloc[:4]  # without the totals row: every column of one kind or None
    assert B.rows_xml(frame, 7, {}) == _reference(frame, 7)


def test_totals_row_is_written_apart_and_last():
    n = 50
    frame = pd.DataFrame({"grant_id": [f"G{i}" for i in range(n)] + ["Total"],
                          "q1": list(np.arange(n) * 0.25) + [Formula(f"=SUM(B2:B{n + 1})")]})
    assert frame["q1"].dtype == object
    kinds = B._object_kinds(frame["q1"].to_numpy()[:-1])
    assert set(kinds.tolist()) == {B._FLOAT}
    sheet = b'<worksheet><sheetData><row r="1"></row><row r="2"></row></sheetData></worksheet>'
    got = B.splice(sheet, frame)
    body = got[got.index(b'<row r="2"></row>') + len(b'<row r="2"></row>'):got.index(b"</sheetData>")]
    assert body == _reference(frame.iloc[1:], 3)
    assert body.endswith(b'<row r="52"><c r="A52" t="inlineStr"><is><t xml:space="preserve">Total</t></is></c>'
                         b'<c r="B52"><f>SUM(B2:B51)</f></c></row>')


def _long_workbook(tmp_path, monkeypatch, n=5_000, long_tail=False):
    """A workbook of a table longer than the fast-path limit, written in blocks of 700 rows
    (``long_tail``: the last 1,000 rows' status 2,000 characters long)."""
    from grantval.io.xlsx.write import write_workbook
    from grantval.io.xlsx.sheet import Sheet

    monkeypatch.setattr(B, "CHUNK", 700)
    frame = pd.DataFrame({"grant_id": [f"G{i:05d}" for i in range(n)], "units": np.arange(n),
                          "value": np.arange(n) / 7, "status": np.where(np.arange(n) % 3, "open", "vested").astype(object)})
    if long_tail:
        frame.loc[n - 1000:, "status"] = "x" * 2000
    path = tmp_path / "long.xlsx"
    write_workbook(path, [Sheet("long", frame=frame)], fixed_time=dt.datetime(2027, 1, 1))
    return path, frame


def test_long_table_streamed_in_blocks_reads_back_whole(tmp_path, monkeypatch):
    """Blocks generated ahead in threads and compressed in order give every row once, in order
    (reference: the frame itself, read back with openpyxl)."""
    import openpyxl

    path, frame = _long_workbook(tmp_path, monkeypatch)
    ws = openpyxl.load_workbook(path, read_only=True)["long"]
    rows = list(ws.iter_rows(min_row=2, values_only=True))
    assert len(rows) == len(frame)
    assert [r[0] for r in rows] == frame["grant_id"].tolist()
    assert [r[2] for r in rows] == frame["value"].tolist()
    assert rows[-1] == ("G04999", 4999, 4999 / 7, "open")


def test_worker_processes_and_this_process_write_the_same_bytes(tmp_path, monkeypatch):
    """The blocks made and deflated in forked workers give the same file as made here one by one
    (two independent computations of the same workbook)."""
    from grantval import workers

    monkeypatch.setenv("GRANTVAL_PROCESSES", "2")
    assert workers.processes(3) == 2
    (tmp_path / "a").mkdir()
    forked = _long_workbook(tmp_path / "a", monkeypatch)[0].read_bytes()
    monkeypatch.setenv("GRANTVAL_PROCESSES", "1")
    assert workers.processes(3) == 0
    (tmp_path / "b").mkdir()
    here = _long_workbook(tmp_path / "b", monkeypatch)[0].read_bytes()
    assert forked == here and len(here) > 10_000

