"""Reading one ledger table from a CSV file."""

from __future__ import annotations

import csv
import io
import pathlib

import numpy as np
import pandas as pd

from grantval.errors import Problem
from grantval.io import limits
from grantval.io.tables import ColumnRows, RawTable, _header_problems, _is_blank, _table_from_rows, normalise_header


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


def _line_starts(data: bytes) -> tuple[np.ndarray, np.ndarray]:
    """The bytes of ``data`` as an array, and the offset of the first byte of each line."""
    arr = np.frombuffer(data, dtype=np.uint8)
    starts = np.concatenate(([0], np.flatnonzero(arr == 10) + 1))
    return arr, starts[starts < len(arr)] if len(arr) else starts[:0]


def _blank_lines(data: bytes, arr: np.ndarray, starts: np.ndarray) -> np.ndarray:
    """Which lines are blank (nothing but commas and white space), as the record-by-record reader decides.

    A line holding no printable ASCII byte but the comma is a candidate; each
    candidate (rare: blank lines, or lines of control or non-ASCII characters)
    is then decided on its text.
    """
    printable = (arr > 32) & (arr < 128) & (arr != 44)
    candidates = np.flatnonzero(~np.logical_or.reduceat(printable, starts))
    blank = np.zeros(len(starts), dtype=bool)
    ends = np.append(starts[1:], len(arr))
    for i in candidates:
        blank[i] = not data[starts[i]:ends[i]].decode("utf-8").replace(",", "").strip()
    return blank


def _plain_table(name: str, source: str, data: bytes, known: frozenset) -> RawTable | None:
    """The table read column by column when the file is plain, else None (read it record by record).

    Plain: UTF-8 (a byte-order mark is passed over), no quote character, no line break
    but ``\\n`` or ``\\r\\n``, the header (with a known column name, its
    last cell not blank) on line 1, every non-blank line with as many cells as
    the header, no line with more, and no more data rows than the limit.  For
    such a file a record is a line and a cell is the text between commas, so
    pandas' C parser splits it into the cells, row numbers and problems that
    :func:`~grantval.io.tables._table_from_rows` makes from the records.  (The
    caller has decoded the file and checked that no line is longer than the
    longest cell allowed.)
    """
    if data.startswith(b"\xef\xbb\xbf"):
        data = data[3:]
    if b'"' in data or data.count(b"\r") != data.count(b"\r\n"):
        return None
    arr, starts = _line_starts(data)
    if not len(starts):
        return None
    first_break = data.find(b"\n")
    header = data[: first_break if first_break >= 0 else len(data)].decode("utf-8").rstrip("\r").split(",")
    names = [normalise_header(h) for h in header]
    if not "".join(header).strip() or _is_blank(header[-1]) or (known and not known & set(names)):
        return None
    blank = _blank_lines(data, arr, starts)
    commas = np.add.reduceat(arr == 44, starts, dtype=np.int64)
    keep = np.flatnonzero(~blank)[1:]
    if (commas[~blank] != len(header) - 1).any() or (commas > len(header) - 1).any() or len(keep) > limits.max_rows():
        return None
    frame = pd.read_csv(io.BytesIO(data), header=None, dtype=object, na_filter=False, quoting=csv.QUOTE_NONE,
                        skip_blank_lines=False, encoding="utf-8", engine="c")
    if frame.shape != (len(starts), len(header)):  # pragma: no cover - the checks above make one row per line
        return None
    columns = [frame[j].to_numpy(dtype=object)[keep] for j in frame.columns]
    return RawTable(name, source, names, [h.strip() for h in header], ColumnRows(columns), (keep + 1).tolist(),
                    _header_problems(source, 1, header, names), by_column=columns)


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
    long_lines = _longest_line(data) > limits.MAX_CELL_CHARS
    plain = None if long_lines else _plain_table(name, source, data, known)
    if plain is not None:
        return _semicolon_hint(plain)
    csv.field_size_limit(max(csv.field_size_limit(), len(data) + 1))  # no field is longer than its file
    records = _Records(text)
    table = _table_from_rows(name, source, records, known, check_long=long_lines)
    if records.error is not None:
        return _refused(name, source, records.error[0], f"the file cannot be read as CSV ({records.error[1]})")
    stray = _stray_quote(records.spans, table, known) if records.spans else None
    if stray is not None:
        return _refused(name, source, stray[0],
                        f"a quoted field opens on this line and runs to line {stray[1]}: a quote (\") is unbalanced; "
                        "remove the stray quote or close it on the same line (no ledger cell may hold a line break)")
    return _semicolon_hint(table)


def _semicolon_hint(table: RawTable) -> RawTable:
    """``table``, with a problem added when its one header cell suggests a semicolon-separated file."""
    if table.headers and len(table.headers) == 1 and ";" in table.original_headers[0]:
        table.problems.append(Problem(
            table.source, 1, None, "the file seems to use ';' as its delimiter; grantval reads comma-separated files",
        ))
    return table
