"""The CSV reader's column-by-column path for plain files against its record-by-record path.

A plain file (no quote, ``\\n`` or ``\\r\\n`` line breaks, every non-blank line as
wide as the header) is split by pandas' C parser; any other file is read with
Python's csv module.  The two must give the same table (cells, row numbers,
headers, problems) whenever the fast path accepts a file; the reference is the
record-by-record reader, which the rest of the test suite exercises on damaged
files.  Invented data (common practice).
"""

import itertools

import numpy as np
import pytest

from grantval.io import csv_read
from grantval.io.csv_read import read_csv_table

KNOWN = frozenset({"grant_id", "holder_id", "quantity"})


def _both(path, known=KNOWN, monkeypatch=None):
    """(table read as it is, table read with the fast path switched off)."""
    fast = read_csv_table(path, "grants", known)
    monkeypatch.setattr(csv_read, "_plain_table", lambda *a: None)
    slow = read_csv_table(path, "grants", known)
    monkeypatch.undo()
    return fast, slow


def _same(fast, slow):
    assert (fast.headers, fast.original_headers, fast.rows, fast.fatal) == (
        slow.headers, slow.original_headers, slow.rows, slow.fatal)
    assert [list(r) for r in fast.cells] == [list(r) for r in slow.cells]
    assert [(p.source, p.row, p.column, p.message, p.severity) for p in fast.problems] == [
        (p.source, p.row, p.column, p.message, p.severity) for p in slow.problems]
    for name in fast.headers:
        assert list(fast.column(name)) == list(slow.column(name))


#: lines a ledger file may hold: ordinary rows, blank ones of several kinds, white space and
#: characters that are not ASCII (a no-break space alone makes a blank line for str.strip)
LINES = ["G1,H1,100", "G2, H2 ,", ",,", "", "  ", " , ,\t", "\u00a0,\u3000,", "G\u00e9,H\u00fc,7", "\x01,,",
         "G3,,", ",,0"]


@pytest.mark.parametrize("ending", ["\n", "\r\n"])
@pytest.mark.parametrize("bom", [b"", b"\xef\xbb\xbf"])
def test_plain_files_read_as_the_record_reader_reads_them(tmp_path, monkeypatch, ending, bom):
    path = tmp_path / "grants.csv"
    for k, combo in enumerate(itertools.product(LINES, repeat=2)):
        for last in ("", ending):
            body = ending.join(("grant_id, Holder ID ,quantity", *combo, "G9,H9,9")) + last
            path.write_bytes(bom + body.encode("utf-8"))
            fast, slow = _both(path, monkeypatch=monkeypatch)
            assert fast.by_column is not None, combo  # the fast path took it
            _same(fast, slow)


def test_blank_lines_give_the_row_numbers_a_user_sees(tmp_path):
    path = tmp_path / "grants.csv"
    path.write_text("grant_id,holder_id,quantity\n\nG1,H1,1\n , ,\n\u00a0,,\nG2,H2,2\n")
    t = read_csv_table(path, "grants", KNOWN)
    assert t.by_column is not None and t.rows == [3, 6] and list(t.column("grant_id")) == ["G1", "G2"]


@pytest.mark.parametrize("body", [
    'grant_id,holder_id,quantity\nG1,"H1",1\n',          # a quote: only the csv module knows quoting
    "grant_id,holder_id,quantity\nG1,H1\n",              # a short row: its own message
    "grant_id,holder_id,quantity\nG1,H1,1,extra\n",      # a long row
    "grant_id,holder_id,quantity\n,,,,,\nG1,H1,1\n",     # a blank line wider than the header
    "grant_id,holder_id,quantity\rG1,H1,1\r",            # old Mac line breaks
    "\ngrant_id,holder_id,quantity\nG1,H1,1\n",          # the header below a blank line
    "notes\nx\ngrant_id,holder_id,quantity\nG1,H1,1\n",  # a misplaced header
    "grant_id,holder_id,quantity,\nG1,H1,1,\n",          # a blank last header cell
    "grant_id;holder_id;quantity\nG1;H1;1\n",            # semicolons: no known name in the header
])
def test_other_files_take_the_record_reader(tmp_path, monkeypatch, body):
    path = tmp_path / "grants.csv"
    path.write_bytes(body.encode("utf-8"))
    fast, slow = _both(path, monkeypatch=monkeypatch)
    assert fast.by_column is None
    _same(fast, slow)


def test_header_problems_and_the_row_limit_match(tmp_path, monkeypatch):
    path = tmp_path / "grants.csv"
    path.write_text("grant_id,grant_id,,quantity\u200b,holder_id\nG1,G1,x,1,H\nG2,G2,y,2,H\n")
    fast, slow = _both(path, monkeypatch=monkeypatch)
    assert fast.by_column is not None and len(fast.problems) == 3
    _same(fast, slow)
    monkeypatch.setenv("GRANTVAL_MAX_ROWS", "1")
    fast, slow = _both(path, monkeypatch=monkeypatch)
    assert fast.by_column is None and any("more than 1 data rows" in p.message for p in fast.problems)
    _same(fast, slow)


def test_the_comparison_can_fail(tmp_path, monkeypatch):
    # the check above turns false when the fast path misjudges a blank line: here it keeps them all
    path = tmp_path / "grants.csv"
    path.write_text("grant_id,holder_id,quantity\nG1,H1,1\n\u00a0,,\nG2,H2,2\n")
    monkeypatch.setattr(csv_read, "_blank_lines", lambda data, arr, starts: np.zeros(len(starts), bool))
    fast = read_csv_table(path, "grants", KNOWN)
    monkeypatch.undo()
    slow = read_csv_table(path, "grants", KNOWN)
    with pytest.raises(AssertionError):
        monkeypatch.setattr(csv_read, "_plain_table", lambda *a: None)
        _same(fast, slow)


@pytest.mark.parametrize("body", [b"grant_id,holder_id,quantity", b"grant_id,holder_id,quantity\n",
                                  b"grant_id,holder_id,quantity\r\n\r\n"])
def test_a_header_alone_reads_as_the_record_reader_reads_it(tmp_path, monkeypatch, body):
    path = tmp_path / "grants.csv"
    path.write_bytes(body)
    fast, slow = _both(path, monkeypatch=monkeypatch)
    assert fast.by_column is not None and fast.rows == [] and fast.headers == ["grant_id", "holder_id", "quantity"]
    _same(fast, slow)
