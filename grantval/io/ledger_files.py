"""Finding and reading every table of a ledger location (a CSV folder or a workbook)."""

from __future__ import annotations

import pathlib

from grantval.errors import LedgerError, Problem
from grantval.io.csv_read import read_csv_table
from grantval.io.limits import MAX_FILE_BYTES
from grantval.io.tables import RawLedger, RawTable, sha256_of
from grantval.io.xlsx.read import read_xlsx


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
