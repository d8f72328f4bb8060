"""Raw tables as read (cells with the row numbers a user sees), before typing."""

from __future__ import annotations

import hashlib
import pathlib
from dataclasses import dataclass, field

from grantval.errors import Problem
from grantval.io import limits


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
    #: True when the table could not be read at all (undecodable file, no header, ...): the
    #: ledger reader stops after reading, since nothing checked after it would be meaningful
    fatal: bool = False
    #: the cells held column by column (one object array per header; the CSV reader's fast
    #: path), ``cells`` then being a view of them row by row
    by_column: list | None = None

    def column(self, name: str):
        """Cells of one column (by normalised name), or an empty-cell list when absent."""
        if name not in self.headers:
            return [None] * len(self.rows)
        i = self.headers.index(name)
        if self.by_column is not None:
            return self.by_column[i]
        return [r[i] for r in self.cells]


class ColumnRows:
    """The rows of a table held column by column, as a read-only sequence of lists of cells."""

    def __init__(self, columns: list):
        self.columns = columns

    def __len__(self) -> int:
        return len(self.columns[0]) if self.columns else 0

    def __getitem__(self, i: int) -> list:
        return [c[i] for c in self.columns]

    def __iter__(self):
        return (list(r) for r in zip(*self.columns))

    def __eq__(self, other) -> bool:
        return list(self) == list(other)


@dataclass
class RawLedger:
    """Every table found in a ledger location, with the input files' digests."""

    location: str
    tables: dict[str, RawTable]
    files: list[tuple[str, str]]  # (path, sha256 hex)
    problems: list[Problem] = field(default_factory=list)
    #: every CSV file name or sheet name found at the location, in the order found
    found: list[str] = field(default_factory=list)


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


def _blank_row(row) -> bool:
    """Whether every cell of ``row`` is blank (a row of text cells, as CSV gives, is decided by one join)."""
    try:
        return not "".join(row).strip()
    except TypeError:  # cells that are not text (workbooks: numbers, dates, None)
        return all(_is_blank(c) for c in row)


#: how many leading rows are searched for a misplaced header
_HEADER_SEARCH = 20


def invisible_characters(text: str) -> list[str]:
    """Descriptions (``U+200B ZERO WIDTH SPACE``) of the characters of ``text`` that print as nothing or as a blank.

    Everything :meth:`str.isprintable` rejects counts: control and format
    characters (zero-width space, byte-order mark, direction marks) and every
    space but the plain one (no-break space, ...).
    """
    import unicodedata

    if text.isprintable():
        return []
    out = []
    for c in dict.fromkeys(c for c in text if not c.isprintable()):
        out.append(f"U+{ord(c):04X} {unicodedata.name(c, 'control character')}")
    return out


def _header_problems(source: str, header_row: int, header: list, names: list[str]) -> list[Problem]:
    """Empty, repeated and invisible-character header cells."""
    problems: list[Problem] = []
    seen: dict[str, int] = {}
    for j, n in enumerate(names):
        text = header[j] if isinstance(header[j], str) else ""
        bad = invisible_characters(text.strip())
        if bad:
            spaces = all(c.isspace() for c in text.strip() if not c.isprintable())
            problems.append(Problem(
                source, header_row, n or f"column {j + 1}",
                f"the header cell {text.strip()!r} holds invisible characters ({', '.join(bad)}); "
                + ("they were read as spaces" if spaces else "delete them so the column name matches"),
                "warning" if spaces else "error"))
        if n == "":
            problems.append(Problem(source, header_row, f"column {j + 1}", "the header cell is empty"))
        elif n in seen:
            problems.append(Problem(source, header_row, n, f"the column appears twice (columns {seen[n] + 1} and {j + 1})"))
        else:
            seen[n] = j
    return problems


def _misplaced_header(name: str, source: str, lead: list, known: frozenset) -> RawTable | None:
    """The refusal when the first non-blank row holds none of the known column names but a later one holds several."""
    def hits(row):
        return sum(normalise_header(c) in known for c in row if isinstance(c, str))

    first = next(((n, r) for n, r in lead if not all(_is_blank(c) for c in r)), None)
    if first is None or hits(first[1]) > 0:
        return None
    later = next(((n, r) for n, r in lead if n > first[0] and hits(r) >= 2), None)
    if later is None:
        return None
    return RawTable(name, source, [], [], [], [], [Problem(
        source, later[0], None, f"the header must be the first row of the table; it was found in row "
        f"{later[0]} (delete the rows above it)")], fatal=True)


def _long_cells(number: int, row: list, limit: int) -> list[tuple[int, int, int]]:
    """(row, column index, length) of the text cells of one row longer than ``limit``."""
    return [(number, j, len(c)) for j, c in enumerate(row) if isinstance(c, str) and len(c) > limit]


def _table_from_rows(name: str, source: str, rows_iter, known: frozenset = frozenset(),
                     check_long: bool = True) -> RawTable:
    """Build a :class:`RawTable` from ``(row_number, [cells])`` pairs.

    ``known`` holds the table's column names: when the first non-blank row has
    none of them but a later one of the first rows has several, the header is
    misplaced and that is the only problem reported.  With ``check_long``,
    text cells longer than :data:`~grantval.io.limits.MAX_CELL_CHARS` are
    refused (the CSV reader turns it off when no line of the file is that long).
    """
    import itertools

    max_rows = limits.max_rows()
    limit = limits.MAX_CELL_CHARS
    problems: list[Problem] = []
    header = None
    header_row = 0
    cells: list[list] = []
    rows: list[int] = []
    long: list[tuple[int, int, int]] = []
    rows_iter = iter(rows_iter)
    lead = list(itertools.islice(rows_iter, _HEADER_SEARCH))
    if known:
        misplaced = _misplaced_header(name, source, lead, known)
        if misplaced is not None:
            return misplaced
    for number, row in itertools.chain(lead, rows_iter):
        if _blank_row(row):
            continue
        if check_long:
            long += _long_cells(number, row, limit)
        if header is None:
            header = list(row)
            header_row = number
            continue
        if len(rows) >= max_rows:
            problems.append(Problem(source, number, None, f"the table has more than {max_rows:,} data rows, the "
                                    "limit (environment variable GRANTVAL_MAX_ROWS); nothing beyond was read"))
            break
        cells.append(list(row))
        rows.append(number)
    if header is None:
        problems.append(Problem(source, None, None, "the table is empty: no header row was found"))
        return RawTable(name, source, [], [], [], [], problems, fatal=True)
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
    problems += _header_problems(source, header_row, header, names)
    for number, j, n in long:
        col = names[j] if j < width and names[j] else f"column {j + 1}"
        problems.append(Problem(source, number, col, f"the text is {n:,} characters long, more than {limit:,} "
                                "(the most a spreadsheet cell holds)"))
    for r, number in zip(cells, rows):
        if len(r) > width and any(not _is_blank(c) for c in r[width:]):
            problems.append(Problem(source, number, None, f"the row has {len(r)} cells but the header has {width}"))
        if len(r) < width:
            r.extend([None] * (width - len(r)))
        del r[width:]
    return RawTable(name, source, names, [str(h).strip() if h is not None else "" for h in header],
                    cells, rows, problems)
