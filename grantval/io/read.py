"""Reading ledger tables from a folder of CSV files or one ``.xlsx`` workbook.

The reader does no typing: it returns each table's cells with the row
numbers a spreadsheet user sees (header = row 1), so that every later problem
can name its file or sheet, row and column.  Typing and validation happen in
:mod:`grantval.ledger.parse`.
"""

from __future__ import annotations

import csv
import datetime as _dt
import hashlib
import io
import pathlib
import zipfile
from dataclasses import dataclass, field

from grantval.errors import LedgerError, Problem

#: largest input file accepted, in bytes (a guard against exhausting memory)
MAX_FILE_BYTES = 512 * 2**20


@dataclass
class RawTable:
    """One table as read, before typing.

    Attributes
    ----------
    name : str
        Table name (``grants``, ``assumptions``, ...).
    source : str
        How problems name where the table came from: ``grants.csv`` or ``sheet grants``.
    headers : list of str
        Normalised column names (trimmed, lower case), in file order.
    original_headers : list of str
        The header cells as written.
    cells : list of list
        Data rows (blank rows removed); each row has one cell per header.
        CSV cells are text; xlsx cells are text, numbers, dates or None.
    rows : list of int
        Spreadsheet row number of each data row.
    """

    name: str
    source: str
    headers: list[str]
    original_headers: list[str]
    cells: list[list]
    rows: list[int]
    problems: list[Problem] = field(default_factory=list)

    def column(self, name: str) -> list:
        """Cells of one column (by normalised name), or an empty-cell list when absent."""
        if name not in self.headers:
            return [None] * len(self.rows)
        i = self.headers.index(name)
        return [r[i] for r in self.cells]


@dataclass
class RawLedger:
    """Every table found in a ledger location, with the input files' digests."""

    location: str
    tables: dict[str, RawTable]
    files: list[tuple[str, str]]  # (path, sha256 hex)
    problems: list[Problem] = field(default_factory=list)


def normalise_header(text) -> str:
    """Header matching key: trimmed, lower case, inner spaces as underscores."""
    return "_".join(str(text if text is not None else "").strip().lower().split())


def sha256_of(path: pathlib.Path) -> str:
    """SHA-256 hex digest of a file's bytes."""
    h = hashlib.sha256()
    with open(path, "rb") as fh:
        for chunk in iter(lambda: fh.read(1 << 20), b""):
            h.update(chunk)
    return h.hexdigest()


def _is_blank(cell) -> bool:
    return cell is None or (isinstance(cell, str) and cell.strip() == "")


def _table_from_rows(name: str, source: str, rows_iter) -> RawTable:
    """Build a :class:`RawTable` from ``(row_number, [cells])`` pairs."""
    problems: list[Problem] = []
    header = None
    header_row = 0
    cells: list[list] = []
    rows: list[int] = []
    for number, row in rows_iter:
        if header is None:
            if all(_is_blank(c) for c in row):
                continue
            header = list(row)
            header_row = number
            continue
        if all(_is_blank(c) for c in row):
            continue
        cells.append(list(row))
        rows.append(number)
    if header is None:
        problems.append(Problem(source, None, None, "the table is empty: no header row was found"))
        return RawTable(name, source, [], [], [], [], problems)
    if header_row != 1:
        problems.append(Problem(
            source, header_row, None,
            f"the header must be the first row of the table; it was found in row {header_row}",
        ))
    # trailing empty header cells are dropped when their columns are empty
    while header and _is_blank(header[-1]):
        j = len(header) - 1
        if any(len(r) > j and not _is_blank(r[j]) for r in cells):
            break
        header.pop()
    width = len(header)
    names = [normalise_header(h) for h in header]
    seen: dict[str, int] = {}
    for j, n in enumerate(names):
        if n == "":
            problems.append(Problem(source, header_row, f"column {j + 1}", "the header cell is empty"))
        elif n in seen:
            problems.append(Problem(source, header_row, n, f"the column appears twice (columns {seen[n] + 1} and {j + 1})"))
        else:
            seen[n] = j
    for r, number in zip(cells, rows):
        if len(r) > width and any(not _is_blank(c) for c in r[width:]):
            problems.append(Problem(source, number, None, f"the row has {len(r)} cells but the header has {width}"))
        if len(r) < width:
            r.extend([None] * (width - len(r)))
        del r[width:]
    return RawTable(name, source, names, [str(h).strip() if h is not None else "" for h in header],
                    cells, rows, problems)


def read_csv_table(path: pathlib.Path, name: str) -> RawTable:
    """Read one CSV file (UTF-8, with or without byte-order mark, comma-delimited)."""
    source = path.name
    data = path.read_bytes()
    try:
        text = data.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        line = data[: exc.start].count(b"\n") + 1
        return RawTable(name, source, [], [], [], [], [Problem(
            source, line, None,
            "the file is not UTF-8 text (byte %d); save it as CSV UTF-8" % (exc.start + 1),
        )])
    if "\x00" in text:
        return RawTable(name, source, [], [], [], [], [Problem(source, None, None, "the file is not a CSV text file")])
    reader = csv.reader(io.StringIO(text, newline=""))
    table = _table_from_rows(name, source, ((reader.line_num, row) for row in reader))
    if table.headers and len(table.headers) == 1 and ";" in table.original_headers[0]:
        table.problems.append(Problem(
            source, 1, None, "the file seems to use ';' as its delimiter; grantval reads comma-separated files",
        ))
    return table


def _xlsx_cell(value):
    if isinstance(value, _dt.datetime):
        if value.time() == _dt.time(0):
            return value.date()
        return value
    return value


def read_xlsx(path: pathlib.Path, names: tuple[str, ...]) -> tuple[dict[str, RawTable], list[Problem]]:
    """Read the sheets named like ledger tables from a workbook (cached values, read-only)."""
    import openpyxl  # imported here: only xlsx inputs need it

    problems: list[Problem] = []
    if not zipfile.is_zipfile(path):
        return {}, [Problem(path.name, None, None, "the file is not an Excel .xlsx workbook (it is not a zip archive)")]
    try:
        wb = openpyxl.load_workbook(path, read_only=True, data_only=True)
    except Exception as exc:  # openpyxl raises many types for damaged files
        return {}, [Problem(path.name, None, None, f"the workbook cannot be read ({type(exc).__name__}: {exc})")]
    tables: dict[str, RawTable] = {}
    try:
        for ws in wb.worksheets:
            key = normalise_header(ws.title)
            if key not in names:
                continue
            if key in tables:
                problems.append(Problem(path.name, None, None, f"two sheets are named like the table {key!r}"))
                continue
            source = f"sheet {ws.title}"
            rows_iter = ((i, [_xlsx_cell(c) for c in row]) for i, row in
                         enumerate(ws.iter_rows(min_row=1, values_only=True), start=1))
            tables[key] = _table_from_rows(key, source, rows_iter)
    finally:
        wb.close()
    return tables, problems


def read_ledger_files(location: str | pathlib.Path, names: tuple[str, ...]) -> RawLedger:
    """Read every ledger table found at ``location`` (a CSV folder or an .xlsx file).

    Raises
    ------
    LedgerError
        When the location does not exist or is not a folder or workbook.
    """
    path = pathlib.Path(location)
    if not path.exists():
        raise LedgerError([Problem(str(path), None, None, "no such file or folder")], str(path))
    tables: dict[str, RawTable] = {}
    files: list[tuple[str, str]] = []
    problems: list[Problem] = []
    if path.is_dir():
        for name in names:
            f = path / f"{name}.csv"
            if not f.exists():
                continue
            if f.stat().st_size > MAX_FILE_BYTES:
                problems.append(Problem(f.name, None, None,
                                        f"the file is larger than the limit of {MAX_FILE_BYTES // 2**20} MiB"))
                continue
            files.append((str(f), sha256_of(f)))
            tables[name] = read_csv_table(f, name)
        others = sorted(p.name for p in path.glob("*.csv") if p.stem.lower() not in names)
        for other in others:
            problems.append(Problem(other, None, None, "not a ledger table name; the file was not read", "warning"))
    elif path.suffix.lower() in (".xlsx", ".xlsm"):
        if path.stat().st_size > MAX_FILE_BYTES:
            raise LedgerError([Problem(path.name, None, None,
                                       f"the file is larger than the limit of {MAX_FILE_BYTES // 2**20} MiB")], str(path))
        files.append((str(path), sha256_of(path)))
        tables, problems = read_xlsx(path, names)
    else:
        raise LedgerError([Problem(path.name, None, None,
                                   "a ledger is a folder of CSV files or an .xlsx workbook")], str(path))
    return RawLedger(str(path), tables, files, problems)
