"""Reading ledger tables from the sheets of one workbook."""

from __future__ import annotations

import datetime as _dt
import pathlib
import zipfile

from grantval.errors import Problem
from grantval.io.tables import RawTable, _table_from_rows, normalise_header
from grantval.io.xlsx.safety import inspect_xlsx


def _xlsx_cell(value):
    if isinstance(value, _dt.datetime):
        if value.time() == _dt.time(0):
            return value.date()
        return value
    return value


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
