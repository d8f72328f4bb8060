"""Reading ledger tables from the sheets of one workbook.

Sheets are read by streaming their XML once (openpyxl's read-only sheet
parser): only cells that hold a value are kept, so a workbook whose declared
dimension or stray formatting reaches cell XFD1048576 costs no more than its
XML.  Each formula cell is seen with its saved value; hidden rows and columns
are noted as the sheet is read.
"""

from __future__ import annotations

import datetime as _dt
import pathlib
import re
import zipfile
from dataclasses import dataclass, field

from grantval.errors import Problem
from grantval.io import limits
from grantval.io.tables import RawTable, _table_from_rows, normalise_header
from grantval.io.xlsx.safety import inspect_xlsx


_ESCAPE = re.compile(r"_x([0-9A-Fa-f]{4})_")


def _xlsx_cell(value):
    if isinstance(value, str) and "_x" in value:
        # Office's escape of characters XML cannot hold (ECMA-376 Part 1, 22.9.2.19 ST_Xstring): Excel writes
        # a form feed as _x000C_ and a literal "_x" as _x005F_x; decoded, the ledger checks see the real text
        return _ESCAPE.sub(lambda m: chr(int(m.group(1), 16)), value)
    if isinstance(value, _dt.datetime):
        if value.time() == _dt.time(0):
            return value.date()
        return value
    return value


@dataclass
class _SheetRead:
    """What streaming one sheet found besides its values."""

    formulas: list[tuple[int, int, str, object]] = field(default_factory=list)  # row, column, formula, saved value
    beyond: list[str] = field(default_factory=list)  # cells holding a value past MAX_COLUMNS
    hidden_rows: list[int] = field(default_factory=list)
    hidden_columns: list[tuple[int, int]] = field(default_factory=list)  # (first, last) column numbers
    rows_hidden_by_default: bool = False


def _formula_text(f) -> str:
    """How a formula element is named in messages: its text, or what kind of formula it is."""
    kind = f.get("t")
    text = (f.text or "").strip()
    if kind == "array":
        return f"array formula {{={text}}}" if text else "array formula"
    if kind == "dataTable":
        return "data-table formula"
    if kind == "shared" and not text:
        return "shared formula"
    return "=" + text


def _parser_class():
    from openpyxl.worksheet._reader import FORMULA_TAG, WorkSheetParser

    class CellParser(WorkSheetParser):
        """Cached values as with ``data_only``, plus the formula (if any) of each cell."""

        def parse_cell(self, element):
            cell = super().parse_cell(element)
            f = element.find(FORMULA_TAG)
            if f is not None:
                cell["formula"] = _formula_text(f)
            return cell

    return CellParser


def _is_true(v) -> bool:
    return str(v).lower() in ("1", "true")


def _note_hidden(parser, found: _SheetRead) -> None:
    """Rows and columns the sheet hides (hidden, filtered out, or zero height or width)."""
    for r, attrs in parser.row_dimensions.items():
        if _is_true(attrs.get("hidden")) or (attrs.get("ht") is not None and float(attrs["ht"]) == 0.0):
            found.hidden_rows.append(int(r))
    for attrs in parser.column_dimensions.values():
        if _is_true(attrs.get("hidden")) or (attrs.get("width") is not None and float(attrs["width"]) == 0.0):
            found.hidden_columns.append((int(attrs.get("min", 0)), int(attrs.get("max", attrs.get("min", 0)))))
    fmt = getattr(parser, "sheet_format", None)
    found.rows_hidden_by_default = bool(fmt is not None and getattr(fmt, "zeroHeight", False))


def _sheet_rows(wb, ws, found: _SheetRead):
    """``(row number, [values])`` of each row holding a value, streamed from the sheet's XML."""
    from openpyxl.utils import get_column_letter

    src = ws._get_source()
    parser = _parser_class()(src, ws._shared_strings, data_only=True, epoch=wb.epoch,
                             date_formats=wb._date_formats, timedelta_formats=wb._timedelta_formats)
    try:
        for number, cells in parser.parse():
            values = {}
            for c in cells:
                col, v = c["column"], c["value"]
                if "formula" in c:
                    found.formulas.append((number, col, c["formula"], v))
                if v is None:
                    continue
                if col > limits.MAX_COLUMNS:
                    found.beyond.append(f"{get_column_letter(col)}{number}")
                    continue
                values[col] = v
            if values:
                row = [None] * max(values)
                for col, v in values.items():
                    row[col - 1] = _xlsx_cell(v)
                yield number, row
        _note_hidden(parser, found)
    finally:
        src.close()


def _ranges(numbers: list[int], limit: int = 8) -> str:
    """``5, 7-9, 12`` for a list of row numbers (at most ``limit`` ranges shown)."""
    numbers = sorted(set(numbers))
    out: list[str] = []
    start = prev = numbers[0]
    for n in numbers[1:] + [None]:
        if n is not None and n == prev + 1:
            prev = n
            continue
        out.append(str(start) if start == prev else f"{start}-{prev}")
        if n is not None:
            start = prev = n
    more = f" and {len(out) - limit} more ranges" if len(out) > limit else ""
    return ", ".join(out[:limit]) + more


def _sheet_problems(table: RawTable, found: _SheetRead) -> list[Problem]:
    """Formula cells, values past the column limit and hidden rows or columns of one table sheet."""
    from openpyxl.utils import get_column_letter

    src = table.source
    problems: list[Problem] = []
    first_data = min(table.rows) if table.rows else float("inf")  # rows above it hold the header
    for number, col, formula, saved in found.formulas:
        name = table.headers[col - 1] if col - 1 < len(table.headers) and table.headers[col - 1] else \
            get_column_letter(col)
        if saved is None or number < first_data:
            problems.append(Problem(src, number, name, f"the cell holds a formula ({formula[:40]}) with no saved "
                                    "value; enter the value itself, or open and save the workbook in Excel first"))
        else:
            problems.append(Problem(src, number, name, f"the cell holds a formula ({formula[:40]}); its saved value "
                                    f"{_as_typed(saved)} was used", "warning"))
    if found.beyond:
        problems.append(Problem(src, None, None, f"cells beyond column {get_column_letter(limits.MAX_COLUMNS)} hold "
                                f"values ({', '.join(found.beyond[:5])}); a table has at most "
                                f"{limits.MAX_COLUMNS:,} columns"))
    problems += _hidden_problems(table, found)
    return problems


def _hidden_problems(table: RawTable, found: _SheetRead) -> list[Problem]:
    """Warnings for hidden rows and columns that hold table data (they are read like the visible ones)."""
    from openpyxl.utils import get_column_letter

    problems: list[Problem] = []
    data = set(table.rows)
    rows = [r for r in found.hidden_rows if r in data]
    if rows:
        many = len(rows) > 1
        problems.append(Problem(table.source, None, None, f"row{'s' if many else ''} {_ranges(rows)} "
                                f"{'are' if many else 'is'} hidden or filtered out; the data was read and is used "
                                "like that of the visible rows", "warning"))
    elif found.rows_hidden_by_default and data:
        problems.append(Problem(table.source, None, None, "the sheet hides rows by default (zero row height); every "
                                "row was read", "warning"))
    for first, last in found.hidden_columns:
        for col in range(first, min(last, len(table.headers)) + 1):
            j = col - 1
            if any(r[j] is not None and not (isinstance(r[j], str) and not r[j].strip()) for r in table.cells):
                problems.append(Problem(table.source, None, table.headers[j] or get_column_letter(col),
                                        f"column {get_column_letter(col)} is hidden; its data was read and is used",
                                        "warning"))
    return problems


def _workbook_problems(path: pathlib.Path, info, names) -> list[Problem]:
    """Hidden or merged table sheets and two sheets named like one table."""
    problems: list[Problem] = []
    seen: dict[str, str] = {}
    for sh in info:
        key = normalise_header(sh.name)
        if key not in names:
            continue
        if sh.state != "visible":
            problems.append(Problem(f"sheet {sh.name}", None, None,
                                    f"the sheet is {sh.state}; unhide it or rename it (grantval reads only visible sheets)"))
        if sh.merged:
            problems.append(Problem(f"sheet {sh.name}", None, None,
                                    f"the sheet has merged cells ({', '.join(sh.merged[:5])}); unmerge them so each "
                                    "cell holds its own value"))
        if key in seen:
            problems.append(Problem(path.name, None, None,
                                    f"two sheets, {seen[key]!r} and {sh.name!r}, are named like the table {key!r}"))
        seen[key] = sh.name
    return problems


def _open_problems(path: pathlib.Path) -> list[Problem]:
    """The refusal of a file that is too large or not a complete zip archive (empty when it may be opened)."""
    too_large = limits.file_too_large(path.stat().st_size)
    if too_large:
        return [Problem(path.name, None, None, too_large)]
    if zipfile.is_zipfile(path):
        return []
    with open(path, "rb") as fh:
        head = fh.read(4)
    if head == b"PK\x03\x04":
        return [Problem(path.name, None, None, "the workbook cannot be read: it is not a complete .xlsx file "
                        "(the zip archive is truncated or damaged)")]
    return [Problem(path.name, None, None, "the file is not an Excel .xlsx workbook (it is not a zip archive)")]


def read_xlsx(path: pathlib.Path, names: tuple[str, ...], known: dict | None = None, with_names: bool = False):
    """Read the sheets named like ledger tables from a workbook (cached values, read-only).

    Sheet names match table names whatever their case and surrounding
    spaces.  Refused: hidden sheets named like a table, merged cells in a
    table, formula cells (array formulas included) that have no saved value;
    formula cells with a saved value contribute that value, with a warning,
    and so do hidden or filtered-out rows and hidden columns.

    Returns
    -------
    tables : dict of RawTable
    problems : list of Problem
    found : list of str
        Only with ``with_names``: every sheet name of the workbook, in order.
    """
    tables, problems, found = _read_xlsx(path, names, known or {})
    return (tables, problems, found) if with_names else (tables, problems)


def _read_xlsx(path: pathlib.Path, names, known: dict):
    import openpyxl  # imported here: only xlsx inputs need it

    problems = _open_problems(path)
    if problems:
        return {}, problems, []
    info, problems = inspect_xlsx(path)
    found = [s.name for s in info]
    if problems:
        return {}, problems, found
    problems = _workbook_problems(path, info, names)
    if any(p.severity == "error" for p in problems):
        return {}, problems, found
    tables: dict[str, RawTable] = {}
    try:
        wb = openpyxl.load_workbook(path, read_only=True, data_only=True)
    except Exception as exc:  # noqa: BLE001 - openpyxl raises many types for damaged files
        return {}, [Problem(path.name, None, None, f"the workbook cannot be read ({type(exc).__name__}: {exc})")], found
    try:
        for ws in wb.worksheets:
            key = normalise_header(ws.title)
            if key not in names:
                continue
            sheet = _SheetRead()
            table = _table_from_rows(key, f"sheet {ws.title}", _sheet_rows(wb, ws, sheet), known.get(key, frozenset()))
            if not table.fatal:
                table.problems += _sheet_problems(table, sheet)
            tables[key] = table
    except Exception as exc:  # noqa: BLE001 - damaged or refused sheet XML (defusedxml raises on entities)
        return {}, [Problem(path.name, None, None, f"the workbook cannot be read ({type(exc).__name__}: {exc})")], found
    finally:
        wb.close()
    return tables, problems, found


def _as_typed(value) -> str:
    """A cell value as a person types it: ISO dates, plain numbers, quoted text."""
    import datetime as _dt

    if isinstance(value, _dt.datetime):
        return value.date().isoformat() if value.time() == _dt.time() else value.isoformat(sep=" ")
    if isinstance(value, _dt.date):
        return value.isoformat()
    if isinstance(value, (int, float)):
        return f"{value:g}"
    return repr(value)
