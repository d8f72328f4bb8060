"""Reading one ledger table from a CSV file."""

from __future__ import annotations

import csv
import io
import pathlib

import numpy as np

from grantval.errors import Problem
from grantval.io import limits
from grantval.io.tables import RawTable, _table_from_rows


def _refused(name: str, source: str, row: int | None, message: str) -> RawTable:
    """A table that could not be read at all, with the one problem saying why."""
    return RawTable(name, source, [], [], [], [], [Problem(source, row, None, message)], fatal=True)


def _decode(data: bytes, name: str, source: str) -> str | RawTable:
    """The file's text (UTF-8, with or without byte-order mark), or the refusal naming the line at fault."""
    if data[:2] in (b"\xff\xfe", b"\xfe\xff"):
        return _refused(name, source, None, "the file is not UTF-8 text (it is UTF-16, byte-order mark at byte 1); "
                        "save it as CSV UTF-8")
    nul = data.find(b"\x00")
    if nul >= 0:
        line = data[:nul].count(b"\n") + 1
        sample = data[:4096]
        quarter = len(sample) // 4
        utf16 = len(sample) >= 4 and (sample[1::2].count(0) > quarter or sample[0::2].count(0) > quarter)
        what = ("it looks like UTF-16 text without a byte-order mark; save it as CSV UTF-8" if utf16
                else "it may be a binary file, or damaged")
        return _refused(name, source, line, f"the file is not a CSV text file: it holds a NUL byte (byte {nul + 1}); "
                        f"{what}")
    try:
        return data.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        line = data[: exc.start].count(b"\n") + 1
        byte = data[exc.start]
        hint = " (it may be Windows-1252 or Latin-1 text)" if byte >= 0x80 else ""
        return _refused(name, source, line, f"the file is not UTF-8 text (byte {exc.start + 1}, 0x{byte:02X}){hint}; "
                        "save it as CSV UTF-8")


def _longest_line(data: bytes) -> int:
    """Length in bytes of the longest line of ``data`` (an upper bound on any one-line field's characters)."""
    ends = np.flatnonzero(np.frombuffer(data, dtype=np.uint8) == 10)
    bounds = np.concatenate(([-1], ends, [len(data)]))
    return int(np.diff(bounds).max()) - 1 if len(data) else 0


class _Records:
    """``(line, cells)`` of each CSV record, noting the records spread over several lines (a quoted
    field holding line breaks): ``spans`` holds (first line, last line, cells) of each."""

    def __init__(self, text: str):
        self.reader = csv.reader(io.StringIO(text, newline=""))
        self.spans: list[tuple[int, int, list[str]]] = []
        self.error: tuple[int, str] | None = None

    def __iter__(self):
        last = 0
        try:
            for row in self.reader:
                start, last = last + 1, self.reader.line_num
                if last > start and any("\n" in c or "\r" in c for c in row):
                    self.spans.append((start, last, row))
                yield start, row
        except csv.Error as exc:
            self.error = (last + 1, str(exc))


def _stray_quote(spans, table: RawTable, known: frozenset) -> tuple[int, int] | None:
    """(first, last line) of the first multi-line record that marks an unbalanced quote, else None.

    A quoted line break is accepted only in a column grantval ignores, in a
    record with as many cells as the header; anywhere else no cell may hold
    one, so the quote that opened it is a stray one.
    """
    width = len(table.headers)
    for first, last, row in spans:
        cols = [j for j, c in enumerate(row) if "\n" in c or "\r" in c]
        if len(row) != width or not known or any(j >= width or table.headers[j] in known for j in cols):
            return first, last
    return None


def read_csv_table(path: pathlib.Path, name: str, known: frozenset = frozenset()) -> RawTable:
    """Read one CSV file (UTF-8, with or without byte-order mark, comma-delimited).

    Files over the size limit, undecodable files, files holding NUL bytes and
    files with a quoted field spanning lines in a column of ``known`` (or in a
    record whose cell count differs from the header's: a stray quote) are
    refused with one problem naming the file and line; the table is then
    marked ``fatal``.
    """
    source = path.name
    size = path.stat().st_size
    too_large = limits.file_too_large(size)
    if too_large:
        return _refused(name, source, None, too_large)
    data = path.read_bytes()
    text = _decode(data, name, source)
    if isinstance(text, RawTable):
        return text
    csv.field_size_limit(max(csv.field_size_limit(), len(data) + 1))  # no field is longer than its file
    records = _Records(text)
    table = _table_from_rows(name, source, records, known, check_long=_longest_line(data) > limits.MAX_CELL_CHARS)
    if records.error is not None:
        return _refused(name, source, records.error[0], f"the file cannot be read as CSV ({records.error[1]})")
    stray = _stray_quote(records.spans, table, known) if records.spans else None
    if stray is not None:
        return _refused(name, source, stray[0],
                        f"a quoted field opens on this line and runs to line {stray[1]}: a quote (\") is unbalanced; "
                        "remove the stray quote or close it on the same line (no ledger cell may hold a line break)")
    if table.headers and len(table.headers) == 1 and ";" in table.original_headers[0]:
        table.problems.append(Problem(
            source, 1, None, "the file seems to use ';' as its delimiter; grantval reads comma-separated files",
        ))
    return table
