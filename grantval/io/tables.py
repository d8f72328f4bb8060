"""Raw tables as read (cells with the row numbers a user sees), before typing."""

from __future__ import annotations

import hashlib
import pathlib
from dataclasses import dataclass, field

from grantval.errors import Problem
from grantval.io.limits import MAX_ROWS


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
