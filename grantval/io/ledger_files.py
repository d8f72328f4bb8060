"""Finding and reading every table of a ledger location (a CSV folder or a workbook)."""

from __future__ import annotations

import pathlib

from grantval.errors import LedgerError, Problem
from grantval.io import limits
from grantval.io.csv_read import read_csv_table
from grantval.io.tables import RawLedger, RawTable, normalise_header, sha256_of
from grantval.io.xlsx.read import read_xlsx


def table_key(name: str) -> str:
    """The table a file stem or sheet name stands for, case and surrounding spaces ignored (``' Grants '``: grants)."""
    return normalise_header(name)


def _csv_files(path: pathlib.Path, names: tuple[str, ...]) -> tuple[dict[str, pathlib.Path], list[str], list[Problem]]:
    """CSV files of a folder by table name, every CSV file name found, and the problems of matching them."""
    found = sorted((p for p in path.iterdir() if p.suffix.lower() == ".csv" and p.is_file()), key=lambda p: p.name)
    by_table: dict[str, pathlib.Path] = {}
    problems: list[Problem] = []
    for p in found:
        key = table_key(p.stem)
        if key not in names:
            problems.append(Problem(p.name, None, None, "not a ledger table name; the file was not read", "warning"))
        elif key in by_table:
            problems.append(Problem(str(path), None, None, f"two files, {by_table[key].name!r} and {p.name!r}, "
                                    f"are named like the table {key!r}; keep one"))
        else:
            by_table[key] = p
    return by_table, [p.name for p in found], problems


def missing_table(raw: RawLedger, name: str) -> Problem:
    """The problem for a required table ``name`` absent from ``raw``, listing the files or sheets that were found."""
    workbook = raw.location.lower().endswith((".xlsx", ".xlsm"))
    what = f"sheet {name}" if workbook else f"{name}.csv"
    kind = "sheets" if workbook else "CSV files"
    listed = ", ".join(repr(f) for f in raw.found) if raw.found else "none"
    return Problem(raw.location, None, None, f"the required table {what} is missing (the {kind} found: {listed})")


def _stop_if_unreadable(raw: RawLedger) -> RawLedger:
    """Raise when a table could not be read at all: every later check would be about a table that is not there."""
    tables = list(raw.tables.values())
    problems = list(raw.problems) + [p for t in tables for p in t.problems]
    if any(t.fatal for t in tables) or (not raw.tables and any(p.severity == "error" for p in raw.problems)):
        raise LedgerError(problems, raw.location)
    return raw


def read_ledger_files(location: str | pathlib.Path, names: tuple[str, ...], known: dict | None = None) -> RawLedger:
    """Read every ledger table found at ``location`` (a CSV folder or an .xlsx file).

    File and sheet names match table names whatever their case and
    surrounding spaces (``Grants.csv``, sheet ``' GRANTS'``).

    Raises
    ------
    LedgerError
        When the location does not exist or is not a folder or workbook, or
        when a table found there cannot be read at all (file too large, not
        UTF-8 text, no header, unbalanced quote, a workbook refused as a
        whole); the error lists every problem the reading found.
    """
    path = pathlib.Path(location)
    if not path.exists():
        raise LedgerError([Problem(str(path), None, None, "no such file or folder")], str(path))
    tables: dict[str, RawTable] = {}
    files: list[tuple[str, str]] = []
    if path.is_dir():
        by_table, found, problems = _csv_files(path, names)
        for name in names:
            f = by_table.get(name)
            if f is None:
                continue
            tables[name] = read_csv_table(f, name, (known or {}).get(name, frozenset()))
            if limits.file_too_large(f.stat().st_size) is None:
                files.append((str(f), sha256_of(f)))
    elif path.suffix.lower() in (".xlsx", ".xlsm"):
        tables, problems, found = read_xlsx(path, names, known, with_names=True)
        if limits.file_too_large(path.stat().st_size) is None:
            files.append((str(path), sha256_of(path)))
    else:
        raise LedgerError([Problem(path.name, None, None,
                                   "a ledger is a folder of CSV files or an .xlsx workbook")], str(path))
    return _stop_if_unreadable(RawLedger(str(path), tables, files, problems, found))
