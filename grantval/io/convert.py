"""Converting a ledger between a CSV folder and one workbook, cell for cell."""

from __future__ import annotations

import csv
import datetime as _dt
import pathlib
import re

from grantval.io.files import atomic_path

_ISO = re.compile(r"^\d{4}-\d{2}-\d{2}$")
_INT = re.compile(r"^-?\d+$")
_FLOAT = re.compile(r"^-?(\d+\.\d*|\.\d+|\d+)([eE][+-]?\d+)?$")


def _typed(cell: str):
    if cell == "":
        return None
    if _ISO.match(cell):
        try:
            return _dt.date.fromisoformat(cell)
        except ValueError:
            return cell
    if _INT.match(cell) and len(cell.lstrip("-")) <= 15 and not (cell.lstrip("-").startswith("0") and len(cell.lstrip("-")) > 1):
        return int(cell)
    if _FLOAT.match(cell):
        return float(cell)
    return cell


def csv_folder_to_workbook(folder: pathlib.Path, target: pathlib.Path, names: tuple[str, ...],
                           text_columns: frozenset = frozenset()) -> None:
    """Write each ``<name>.csv`` of ``folder`` as a sheet of ``target``.

    ISO dates become date cells, numbers become numbers, except in
    ``text_columns`` (identifiers), which stay text.  The workbook's
    timestamps are fixed, so the same folder gives the same workbook.
    """
    from openpyxl import Workbook
    from openpyxl.cell import WriteOnlyCell

    wb = Workbook(write_only=True)
    for name in names:
        path = pathlib.Path(folder) / f"{name}.csv"
        if not path.exists():
            continue
        ws = wb.create_sheet(name)
        with open(path, newline="", encoding="utf-8-sig") as fh:
            header: list[str] = []
            for i, row in enumerate(csv.reader(fh)):
                if i == 0:
                    header = [h.strip().lower() for h in row]
                    ws.append(row)
                    continue
                out = []
                for j, cell in enumerate(row):
                    col = header[j] if j < len(header) else ""
                    v = cell if col in text_columns else _typed(cell)
                    if isinstance(v, _dt.date):
                        c = WriteOnlyCell(ws, value=v)
                        c.number_format = "yyyy-mm-dd"
                        out.append(c)
                    elif isinstance(v, str) and v:
                        c = WriteOnlyCell(ws, value=v)
                        c.data_type = "s"
                        out.append(c)
                    else:
                        out.append(v if v != "" else None)
                ws.append(out)
    fixed = _dt.datetime(2000, 1, 1)
    wb.properties.created = fixed
    wb.properties.modified = fixed
    with atomic_path(pathlib.Path(target)) as tmp:
        wb.save(tmp)


def workbook_to_csv_folder(book: pathlib.Path, folder: pathlib.Path, names: tuple[str, ...]) -> None:
    """Write each sheet of ``book`` named like a table as ``<name>.csv`` (dates as ISO text)."""
    from grantval.io.xlsx.read import read_xlsx
    from grantval.io.csv import csv_text

    tables, problems = read_xlsx(pathlib.Path(book), names)
    errors = [p for p in problems if p.severity == "error"]
    if errors:
        from grantval.errors import LedgerError

        raise LedgerError(errors, str(book))
    folder = pathlib.Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    for name, t in tables.items():
        with atomic_path(folder / f"{name}.csv") as tmp, open(tmp, "w", newline="", encoding="utf-8") as fh:
            w = csv.writer(fh, lineterminator="\n")
            w.writerow(t.original_headers)
            for row in t.cells:
                w.writerow(["" if v is None else (v.isoformat() if isinstance(v, _dt.date) else
                                                  (v if isinstance(v, str) else csv_text(v))) for v in row])
