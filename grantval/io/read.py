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

def _limit(name: str, default: int) -> int:
    import os

    try:
        return int(os.environ.get(name, default))
    except ValueError:
        return default


#: largest input file accepted, in bytes (environment variable GRANTVAL_MAX_FILE_MB)
MAX_FILE_BYTES = _limit("GRANTVAL_MAX_FILE_MB", 64) * 2**20
#: most data rows accepted in one table (environment variable GRANTVAL_MAX_ROWS)
MAX_ROWS = _limit("GRANTVAL_MAX_ROWS", 2_000_000)
#: largest total uncompressed size of a workbook's parts, in bytes (a guard against zip bombs)
MAX_UNZIPPED_BYTES = 8 * MAX_FILE_BYTES


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


#: how many leading rows are searched for a misplaced header
_HEADER_SEARCH = 20


def _table_from_rows(name: str, source: str, rows_iter, known: frozenset = frozenset()) -> RawTable:
    """Build a :class:`RawTable` from ``(row_number, [cells])`` pairs.

    ``known`` holds the table's column names: when the first non-blank row has
    none of them but a later one of the first rows has several, the header is
    misplaced and that is the only problem reported.
    """
    problems: list[Problem] = []
    header = None
    header_row = 0
    cells: list[list] = []
    rows: list[int] = []
    rows_iter = iter(rows_iter)
    lead: list[tuple[int, list]] = []
    for number, row in rows_iter:
        lead.append((number, row))
        if len(lead) >= _HEADER_SEARCH:
            break
    if known:
        def hits(row):
            return sum(normalise_header(c) in known for c in row if isinstance(c, str))

        first = next(((n, r) for n, r in lead if not all(_is_blank(c) for c in r)), None)
        if first is not None and hits(first[1]) == 0:
            later = next(((n, r) for n, r in lead if n > first[0] and hits(r) >= 2), None)
            if later is not None:
                return RawTable(name, source, [], [], [], [], [Problem(
                    source, later[0], None, f"the header must be the first row of the table; it was found in row "
                    f"{later[0]} (delete the rows above it)")])
    import itertools

    for number, row in itertools.chain(lead, rows_iter):
        if header is None:
            if all(_is_blank(c) for c in row):
                continue
            header = list(row)
            header_row = number
            continue
        if all(_is_blank(c) for c in row):
            continue
        if len(rows) >= MAX_ROWS:
            problems.append(Problem(source, number, None, f"the table has more than {MAX_ROWS:,} data rows, the "
                                    "limit (environment variable GRANTVAL_MAX_ROWS); nothing beyond was read"))
            break
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


def read_csv_table(path: pathlib.Path, name: str, known: frozenset = frozenset()) -> RawTable:
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
    table = _table_from_rows(name, source, ((reader.line_num, row) for row in reader), known)
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


@dataclass
class SheetInfo:
    """What the workbook's XML says about one sheet, before openpyxl reads it."""

    name: str
    part: str
    state: str = "visible"
    merged: list[str] = field(default_factory=list)
    has_formulas: bool = False


_SCAN_CHUNK = 1 << 20


def _scan_part(zf: zipfile.ZipFile, name: str, needles: tuple[bytes, ...]) -> set[bytes]:
    """Which of ``needles`` occur in one zip member (read in chunks)."""
    found: set[bytes] = set()
    tail = b""
    keep = max(len(n) for n in needles)
    with zf.open(name) as fh:
        while True:
            chunk = fh.read(_SCAN_CHUNK)
            if not chunk:
                break
            data = tail + chunk
            for n in needles:
                if n in data:
                    found.add(n)
            tail = data[-keep:]
    return found


def inspect_xlsx(path: pathlib.Path) -> tuple[list[SheetInfo], list[Problem]]:
    """Check a workbook's parts before parsing: size, XML entity declarations, sheet states, merges, formulas.

    A part that declares a document type or entities is refused outright
    (entity expansion, "billion laughs"); so is a workbook whose parts would
    unpack to more than the limit.
    """
    import re

    src = path.name
    try:
        zf = zipfile.ZipFile(path)
    except (zipfile.BadZipFile, OSError) as exc:
        return [], [Problem(src, None, None, f"the workbook cannot be read: it is not a complete .xlsx file ({exc})")]
    with zf:
        infos = zf.infolist()
        total = sum(i.file_size for i in infos)
        if total > MAX_UNZIPPED_BYTES:
            return [], [Problem(src, None, None, f"the workbook unpacks to {total / 2**20:.0f} MiB, more than the limit "
                                f"of {MAX_UNZIPPED_BYTES / 2**20:.0f} MiB")]
        names = {i.filename for i in infos}
        if "xl/workbook.xml" not in names:
            return [], [Problem(src, None, None, "the file is a zip archive but not an Excel .xlsx workbook")]
        try:
            for i in infos:
                if i.filename.endswith((".xml", ".rels")):
                    hit = _scan_part(zf, i.filename, (b"<!DOCTYPE", b"<!ENTITY"))
                    if hit:
                        return [], [Problem(src, None, None, f"the workbook part {i.filename} declares XML entities or a "
                                            "document type; grantval refuses such files (they can expand without bound)")]
            wb_xml = zf.read("xl/workbook.xml").decode("utf-8", "replace")
            rels = zf.read("xl/_rels/workbook.xml.rels").decode("utf-8", "replace") if \
                "xl/_rels/workbook.xml.rels" in names else ""
        except (zipfile.BadZipFile, OSError, EOFError, zlib_error()) as exc:
            return [], [Problem(src, None, None, f"the workbook cannot be read: it is damaged ({exc})")]
        targets = {m.group(1): m.group(2) for m in re.finditer(r'<Relationship[^>]*Id="([^"]+)"[^>]*Target="([^"]+)"', rels)}
        targets.update({m.group(2): m.group(1) for m in re.finditer(r'<Relationship[^>]*Target="([^"]+)"[^>]*Id="([^"]+)"', rels)})
        sheets = []
        for m in re.finditer(r"<(?:\w+:)?sheet\b([^>]*)/?>", wb_xml):
            attrs = dict(re.findall(r'([\w:]+)="([^"]*)"', m.group(1)))
            rid = next((v for k, v in attrs.items() if k.endswith(":id")), "")
            target = targets.get(rid, "")
            part = target.lstrip("/") if target.startswith("/") else "xl/" + target
            info = SheetInfo(_xml_unescape(attrs.get("name", "")), part, attrs.get("state", "visible"))
            if part in names:
                hit = _scan_part(zf, part, (b"<mergeCell ", b"<f>", b"<f ", b"<f/>"))
                info.has_formulas = bool(hit & {b"<f>", b"<f ", b"<f/>"})
                if b"<mergeCell " in hit:
                    info.merged = re.findall(r'<mergeCell ref="([^"]+)"', zf.read(part).decode("utf-8", "replace"))
            sheets.append(info)
    return sheets, []


def zlib_error():
    import zlib

    return zlib.error


def _xml_unescape(text: str) -> str:
    return text.replace("&lt;", "<").replace("&gt;", ">").replace("&quot;", '"').replace("&apos;", "'").replace("&amp;", "&")


def read_xlsx(path: pathlib.Path, names: tuple[str, ...], known: dict | None = None) -> tuple[dict[str, RawTable], list[Problem]]:
    """Read the sheets named like ledger tables from a workbook (cached values, read-only).

    Refused: hidden sheets named like a table, merged cells in a table, and
    formula cells that have no saved value; formula cells with a saved value
    contribute that value, with a warning.
    """
    import openpyxl  # imported here: only xlsx inputs need it

    if not zipfile.is_zipfile(path):
        with open(path, "rb") as fh:
            head = fh.read(4)
        if head == b"PK\x03\x04":
            return {}, [Problem(path.name, None, None, "the workbook cannot be read: it is not a complete .xlsx file "
                                "(the zip archive is truncated or damaged)")]
        return {}, [Problem(path.name, None, None, "the file is not an Excel .xlsx workbook (it is not a zip archive)")]
    info, problems = inspect_xlsx(path)
    if problems:
        return {}, problems
    by_name = {normalise_header(s.name): s for s in info}
    tables: dict[str, RawTable] = {}
    for key, sh in by_name.items():
        if key in names and sh.state != "visible":
            problems.append(Problem(f"sheet {sh.name}", None, None,
                                    f"the sheet is {sh.state}; unhide it or rename it (grantval reads only visible sheets)"))
        if key in names and sh.merged:
            problems.append(Problem(f"sheet {sh.name}", None, None,
                                    f"the sheet has merged cells ({', '.join(sh.merged[:5])}); unmerge them so each "
                                    "cell holds its own value"))
    seen: dict[str, str] = {}
    for s in info:
        k = normalise_header(s.name)
        if k in names:
            if k in seen:
                problems.append(Problem(path.name, None, None,
                                        f"two sheets, {seen[k]!r} and {s.name!r}, are named like the table {k!r}"))
            seen[k] = s.name
    if any(p.severity == "error" for p in problems):
        return {}, problems
    try:
        wb = openpyxl.load_workbook(path, read_only=True, data_only=True)
        formulas = openpyxl.load_workbook(path, read_only=True, data_only=False) if any(
            s.has_formulas and normalise_header(s.name) in names for s in info) else None
    except Exception as exc:  # openpyxl raises many types for damaged files
        return {}, [Problem(path.name, None, None, f"the workbook cannot be read ({type(exc).__name__}: {exc})")]
    try:
        for ws in wb.worksheets:
            key = normalise_header(ws.title)
            if key not in names:
                continue
            source = f"sheet {ws.title}"
            rows_iter = ((i, [_xlsx_cell(c) for c in row]) for i, row in
                         enumerate(ws.iter_rows(min_row=1, values_only=True), start=1))
            table = _table_from_rows(key, source, rows_iter, (known or {}).get(key, frozenset()))
            if formulas is not None and by_name[key].has_formulas:
                _check_formulas(formulas[ws.title], table)
            tables[key] = table
    finally:
        wb.close()
        if formulas is not None:
            formulas.close()
    return tables, problems


def _check_formulas(ws, table: RawTable) -> None:
    """Flag formula cells: an error without a saved value, a warning (value used) with one."""
    from openpyxl.utils import get_column_letter

    index = {r: i for i, r in enumerate(table.rows)}
    for number, row in enumerate(ws.iter_rows(min_row=1, values_only=True), start=1):
        for j, v in enumerate(row):
            if not (isinstance(v, str) and v.startswith("=")):
                continue
            col = table.headers[j] if j < len(table.headers) else get_column_letter(j + 1)
            i = index.get(number)
            saved = table.cells[i][j] if i is not None and j < len(table.cells[i]) else None
            if number == 1 or saved is None:
                table.problems.append(Problem(table.source, number, col or get_column_letter(j + 1),
                                              f"the cell holds a formula ({v[:40]}) with no saved value; enter the "
                                              "value itself, or open and save the workbook in Excel first"))
            else:
                table.problems.append(Problem(table.source, number, col, f"the cell holds a formula ({v[:40]}); "
                                              f"its saved value {saved!r} was used", "warning"))


def read_ledger_files(location: str | pathlib.Path, names: tuple[str, ...], known: dict | None = None) -> RawLedger:
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
                                        f"the file is {f.stat().st_size / 2**20:.0f} MiB, larger than the limit of "
                                        f"{MAX_FILE_BYTES // 2**20} MiB (environment variable GRANTVAL_MAX_FILE_MB)"))
                continue
            files.append((str(f), sha256_of(f)))
            tables[name] = read_csv_table(f, name, (known or {}).get(name, frozenset()))
        others = sorted(p.name for p in path.glob("*.csv") if p.stem.lower() not in names)
        for other in others:
            problems.append(Problem(other, None, None, "not a ledger table name; the file was not read", "warning"))
    elif path.suffix.lower() in (".xlsx", ".xlsm"):
        if path.stat().st_size > MAX_FILE_BYTES:
            raise LedgerError([Problem(path.name, None, None,
                                       f"the file is {path.stat().st_size / 2**20:.0f} MiB, larger than the limit of "
                                       f"{MAX_FILE_BYTES // 2**20} MiB (environment variable GRANTVAL_MAX_FILE_MB)")],
                              str(path))
        files.append((str(path), sha256_of(path)))
        tables, problems = read_xlsx(path, names, known)
    else:
        raise LedgerError([Problem(path.name, None, None,
                                   "a ledger is a folder of CSV files or an .xlsx workbook")], str(path))
    return RawLedger(str(path), tables, files, problems)
