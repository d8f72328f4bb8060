"""Writing workbooks with openpyxl, deterministic and atomic; long tables via the fast row writer."""

from __future__ import annotations

import datetime as _dt
import math
import pathlib
from typing import Sequence

import numpy as np
import pandas as pd

from grantval.errors import OutputError
from grantval.io.csv import _column_values
from grantval.io.files import atomic_path
from grantval.io.xlsx.charts import build_chart
from grantval.io.xlsx.sheet import (
    EXCEL_COLUMNS,
    EXCEL_ROWS,
    FAST_ROWS,
    Formula,
    Sheet,
    label,
)

#: characters of column width one landscape A4 page holds at about 50% scale (common practice: an
#: 11-point font printed at about 6 points, the smallest still read without a magnifier); a wider
#: table prints over more pages
PAGE_CHARACTERS = 300


def _cell_value(v):
    if v is None:
        return None
    if isinstance(v, (float, np.floating)):
        return None if math.isnan(v) else float(v)
    if isinstance(v, (np.integer,)):
        return int(v)
    if isinstance(v, np.datetime64):
        return None if np.isnat(v) else v.astype("datetime64[D]").astype(_dt.date)
    if isinstance(v, pd.Timestamp):
        return None if v is pd.NaT else v.date()
    if isinstance(v, np.bool_):
        return bool(v)
    return v


def _frame_sheet(ws, sh: Sheet, index: int, big: dict, widths: list[float]) -> None:
    """A table sheet: widths, frozen and filtered header, then the rows (long tables finished by bigsheet)."""
    from openpyxl.cell import WriteOnlyCell
    from openpyxl.styles import Alignment, Border, Font, Side
    from openpyxl.utils import get_column_letter

    bold, top, under = Font(bold=True), Border(top=Side(style="thin")), Border(bottom=Side(style="thin"))
    cols = list(sh.frame.columns)
    if len(cols) > EXCEL_COLUMNS:
        raise OutputError(f"the sheet {sh.name} would have {len(cols):,} columns, more than Excel's "
                          f"{EXCEL_COLUMNS:,}; use fewer periods (a longer --period) or --csv-dir")
    for j, width in enumerate(widths, start=1):
        ws.column_dimensions[get_column_letter(j)].width = width
    height = _header_height([sh.labels.get(c, label(c)) for c in cols], widths)
    if height:
        ws.row_dimensions[1].height = height
    ws.freeze_panes = "A2"
    if len(sh.frame):
        ws.auto_filter.ref = f"A1:{get_column_letter(len(cols))}{len(sh.frame) + 1}"
    header = []
    for c in cols:
        cell = WriteOnlyCell(ws, value=sh.labels.get(c, label(c)))
        cell.font, cell.border = bold, under
        cell.alignment = Alignment(wrap_text=True, vertical="top")
        header.append(cell)
    ws.append(header)
    frame = sh.frame
    if len(frame) > FAST_ROWS:
        big[f"xl/worksheets/sheet{index + 1}.xml"] = frame
        frame = frame.iloc[:1]
    values = [_column_values(frame[c]) for c in cols]
    fmts = [sh.formats.get(c) for c in cols]
    texts = [c in sh.text_columns for c in cols]
    wrap = [j for j, c in enumerate(cols) if c in sh.wrap_text_columns] if len(sh.frame) <= FAST_ROWS else []
    for r, row in enumerate(zip(*values), start=2):
        total = any(isinstance(v, str) and v == "Total" for v in row)
        out = [_frame_cell(ws, v, fmt, is_text) for v, fmt, is_text in zip(row, fmts, texts)]
        if wrap:
            _wrap_cells(ws, out, row, wrap, widths, r)
        if total:  # a totals row: bold, with a rule above
            out = [c if hasattr(c, "font") else WriteOnlyCell(ws, value=c) for c in out]
            for c in out:
                c.font, c.border = bold, top
        ws.append(out)


def _wrap_cells(ws, out: list, row: tuple, wrap: list[int], widths: list[float], r: int) -> None:
    """Wrap the text of columns ``wrap`` of table row ``r`` (in place) and make the row tall enough.

    Every cell of the row is aligned to the top, so a grant id and its figures stand on the first line.
    """
    from openpyxl.cell import WriteOnlyCell
    from openpyxl.styles import Alignment

    wrapped, top = Alignment(wrap_text=True, vertical="top"), Alignment(vertical="top")
    for j in range(len(out)):
        if not hasattr(out[j], "alignment"):
            out[j] = WriteOnlyCell(ws, value=out[j])
        out[j].alignment = wrapped if j in wrap else top
    texts = [(str(row[j]), widths[j]) for j in wrap if isinstance(row[j], str)]
    height = _header_height([t for t, _ in texts], [w for _, w in texts], per_width=1.2)
    if height:
        ws.row_dimensions[r].height = height


def _frame_cell(ws, v, fmt, is_text):
    """One cell of a table row: formulas as formulas, ledger text as text, numbers with their format."""
    from openpyxl.cell import WriteOnlyCell

    v = _cell_value(v)
    if isinstance(v, Formula):
        cell = WriteOnlyCell(ws, value=str(v))
        if fmt:
            cell.number_format = fmt
        return cell
    if isinstance(v, str) or is_text:
        cell = WriteOnlyCell(ws, value=None if v is None else str(v))
        if v is not None:
            cell.data_type = "s"  # never a formula
        return cell
    if fmt:
        cell = WriteOnlyCell(ws, value=v)  # a styled cell even when empty
        cell.number_format = fmt
        return cell
    return v


def _rows_sheet(ws, sh: Sheet) -> None:
    """A free-form sheet (notes, summaries, checks): rows as given, the first bold; wrapped columns made tall."""
    from openpyxl.cell import WriteOnlyCell
    from openpyxl.styles import Alignment, Font
    from openpyxl.utils import get_column_letter

    bold = Font(bold=True)
    wrap, top = Alignment(wrap_text=True, vertical="top"), Alignment(vertical="top")
    for j, w in sh.widths.items():
        if isinstance(j, int):
            ws.column_dimensions[get_column_letter(j)].width = w
    for i, row in enumerate(sh.rows):
        out = []
        for j, v in enumerate(row):
            v = _cell_value(v)
            fmt = sh.row_formats.get((i, j))
            if isinstance(v, Formula):
                cell = WriteOnlyCell(ws, value=str(v))
            elif isinstance(v, str):
                cell = WriteOnlyCell(ws, value=v)
                cell.data_type = "s"
                if i == 0 or (isinstance(row[0], str) and row[0] == "Total"):
                    cell.font = bold
            elif fmt is not None and v is not None:
                cell = WriteOnlyCell(ws, value=v)
            else:
                out.append(v)
                continue
            if fmt:
                cell.number_format = fmt
            if sh.wrap_columns:  # one vertical alignment on the row, labels wrapped
                cell.alignment = wrap if j + 1 in sh.wrap_columns else top
            out.append(cell)
        height = _wrapped_height(row, sh)
        if height:
            ws.row_dimensions[i + 1].height = height
        ws.append(out)


def _wrapped_height(row: list, sh: Sheet) -> float | None:
    """Height in points of a rows-sheet row whose wrapped text needs more than one line (None: one line)."""
    texts = [(str(row[j - 1]), sh.widths.get(j, 10)) for j in sh.wrap_columns if j - 1 < len(row)
             and isinstance(row[j - 1], str)]
    return _header_height([t for t, _ in texts], [w for _, w in texts], per_width=1.2) if texts else None


def _cached_cells(sh: Sheet) -> dict[str, object]:
    """The sheet's cached formula results by cell reference (``"F2"``)."""
    from grantval.io.cells import col_letter

    return {f"{col_letter(j + 1)}{i + 1}": _cell_value(v) for (i, j), v in sh.cached.items()}


def _frame_widths(sh: Sheet) -> list[float]:
    """Width of each column of a table sheet, in characters.

    A width given in ``sh.widths`` is used as given; otherwise the label's length plus two, and for a
    text column (ids and names from the ledger) at least its longest value plus two, within 10 to 40,
    so that an id such as ``CV-ESPP-2026H1/H0042`` prints whole.
    """
    out = []
    for c in sh.frame.columns:
        if c in sh.widths:
            out.append(sh.widths[c])
            continue
        want = len(sh.labels.get(c, label(c))) + 2
        if c in sh.text_columns and len(sh.frame):
            longest = sh.frame[c].dropna().astype(str).str.len().max()
            want = max(want, int(longest) + 2 if longest == longest else 0)  # NaN when every value is blank
        out.append(max(10, min(40, want)))
    return out


def pages_wide(sh: Sheet, widths: list[float] | None = None) -> int:
    """Pages across that a sheet prints on: tables wider than a landscape page at a readable size run on.

    A landscape A4 page holds about :data:`PAGE_CHARACTERS` characters of column width at the smallest
    scale still easy to read; a wider table prints over more pages, its first column (the grant or
    line it describes) repeated on each.  Free-form sheets always fit one page wide.  ``widths``: the
    sheet's column widths when already computed (:func:`_frame_widths`).
    """
    if sh.frame is None:
        return 1
    return max(1, math.ceil(sum(_frame_widths(sh) if widths is None else widths) / PAGE_CHARACTERS))


def _page_setup(ws, sh: Sheet, footer: str, widths: list[float] | None) -> None:
    """Print set-up: landscape where wide, pages wide as needed, header row and first column repeated, a footer."""
    n_cols = len(sh.frame.columns) if sh.frame is not None else max((len(r) for r in sh.rows or [[]]), default=1)
    wide = n_cols > 6 or sh.rows is not None and n_cols > 3 or bool(sh.charts)  # a chart sits beside the table
    ws.page_setup.orientation = "landscape" if wide else "portrait"
    ws.page_setup.paperSize = "9"  # A4
    across = pages_wide(sh, widths)
    ws.page_setup.fitToWidth = across
    ws.page_setup.fitToHeight = sh.fit_height
    ws.sheet_properties.pageSetUpPr.fitToPage = True
    ws.print_options.gridLines = sh.frame is not None and not sh.charts  # no grid printed around a chart
    ws.page_margins.left = ws.page_margins.right = 0.4
    if sh.frame is not None:
        ws.print_title_rows = "1:1"
        if across > 1:
            ws.print_title_cols = "A:A"
    ws.oddFooter.left.text = footer.replace("&", "&&")
    ws.oddFooter.left.size = 8
    ws.oddFooter.right.text = "&A, page &P of &N"
    ws.oddFooter.right.size = 8
    if sh.verdicts is not None:
        _colour_verdicts(ws, sh.verdicts)


def _colour_verdicts(ws, ref: str) -> None:
    """PASS green, FAIL red, in the cells ``ref`` (conditional formats, so recalculated verdicts colour too)."""
    from openpyxl.formatting.rule import CellIsRule
    from openpyxl.styles import Font, PatternFill

    ws.conditional_formatting.add(ref, CellIsRule(operator="equal", formula=['"PASS"'], font=Font(color="006100"),
                                                  fill=PatternFill("solid", fgColor="C6EFCE")))
    ws.conditional_formatting.add(ref, CellIsRule(operator="equal", formula=['"FAIL"'], font=Font(color="9C0006"),
                                                  fill=PatternFill("solid", fgColor="FFC7CE")))


def write_workbook(path: pathlib.Path, sheets: Sequence[Sheet], fixed_time: _dt.datetime | None = None,
                   footer: str | None = None) -> None:
    """Write ``sheets`` to an .xlsx workbook atomically (openpyxl write-only mode).

    ``fixed_time`` sets the workbook's created/modified properties (for reproducible files);
    default is the current time.  ``footer`` is printed at the foot of every page (the run's
    identity: tool version, ledger digest), beside the sheet name and page numbers.
    """
    from openpyxl import Workbook

    from grantval import __version__

    wb = Workbook(write_only=True)
    stamp = fixed_time or _dt.datetime.now().replace(microsecond=0)
    wb.properties.created = stamp
    wb.properties.modified = stamp
    wb.properties.creator = "grantval"
    big: dict[str, pd.DataFrame] = {}
    cached: dict[str, dict] = {}
    for index, sh in enumerate(_split_long(sheets)):
        ws = wb.create_sheet(sh.name)
        widths = _frame_widths(sh) if sh.frame is not None else None  # one pass over the text columns
        _page_setup(ws, sh, footer or f"grantval {__version__}", widths)  # before the rows: the head is streamed first
        if sh.frame is not None:
            _frame_sheet(ws, sh, index, big, widths)
        if sh.rows is not None:
            _rows_sheet(ws, sh)
            if sh.cached:
                cached[f"xl/worksheets/sheet{index + 1}.xml"] = _cached_cells(sh)
        _place_charts(ws, sh)
    with atomic_path(path) as tmp:
        wb.save(tmp)
        _normalise_zip(tmp, stamp, big, cached)


def _place_charts(ws, sh: Sheet) -> None:
    """Add the sheet's charts at their anchors, with a page break above those printed on their own page."""
    from openpyxl.utils.cell import coordinate_from_string
    from openpyxl.worksheet.pagebreak import Break

    for ch in sh.charts:
        ws.add_chart(build_chart(ch, ws), ch.anchor)
        if ch.new_page:
            ws.row_breaks.append(Break(id=coordinate_from_string(ch.anchor)[1] - 1))


def _header_height(labels: list[str], widths: list[float], per_width: float = 1.0) -> float | None:
    """Height in points of a row whose text wraps in its column widths (None: one line).

    ``per_width`` is characters per unit of column width: about 1.0 for the bold headers, 1.2
    for plain text (a width unit is one digit of the default font).  Words are wrapped greedily
    as a spreadsheet does; an estimate that errs towards one line too many.
    """
    lines = max((_wrapped_lines(t, per_width * (w - 0.5)) for t, w in zip(labels, widths)), default=1)
    return 15.0 * lines if lines > 1 else None


def _wrapped_lines(text: str, capacity: float) -> int:
    """Lines ``text`` takes when its words are wrapped at ``capacity`` characters (a longer word breaks)."""
    lines, used = 1, 0
    for word in text.split():
        need = len(word) if used == 0 else used + 1 + len(word)
        if need <= capacity:
            used = need
            continue
        if used:
            lines += 1
        lines += max(0, math.ceil(len(word) / max(1.0, capacity)) - 1)
        used = len(word) % max(1, int(capacity)) or len(word)
    return lines


def _split_long(sheets: Sequence[Sheet]) -> list[Sheet]:
    """Split frame sheets longer than Excel allows into numbered parts (name, name_2, ...)."""
    import dataclasses

    out: list[Sheet] = []
    per = EXCEL_ROWS - 1
    for sh in sheets:
        if sh.frame is None or len(sh.frame) <= per:
            out.append(sh)
            continue
        if any(sh.frame[c].dtype == object and sh.frame[c].map(lambda v: isinstance(v, Formula)).any()
               for c in sh.frame.columns):
            raise OutputError(f"the sheet {sh.name} would have {len(sh.frame):,} rows, more than Excel's "
                              f"{per:,}; write the CSV tables instead (--csv-dir with --no-workbook)")
        for k, start in enumerate(range(0, len(sh.frame), per)):
            part = sh.frame.iloc[start : start + per].reset_index(drop=True)
            out.append(dataclasses.replace(sh, name=sh.name if k == 0 else f"{sh.name}_{k + 1}"[:31], frame=part,
                                           charts=sh.charts if k == 0 else []))
    return out


def _normalise_zip(path: pathlib.Path, stamp: _dt.datetime, big: dict | None = None,
                   cached: dict | None = None) -> None:
    """Rewrite a saved workbook with fixed zip entry times and ``stamp`` as its modified time.

    openpyxl stamps the save time into docProps/core.xml and the zip entries;
    with this, equal content gives equal bytes.  ``big`` (sheet part -> frame) adds the long
    tables' rows; ``cached`` (sheet part -> {cell: result}) the cached results of formula cells.
    The long tables' rows are generated and compressed block by block (:func:`_write_entries`).
    """
    import re
    import zipfile

    with zipfile.ZipFile(path) as src:
        entries = [(info, src.read(info.filename)) for info in src.infolist()]
    when = stamp.strftime("%Y-%m-%dT%H:%M:%SZ").encode()
    entries = [(info, re.sub(rb"(<dcterms:modified[^>]*>)[^<]*(</dcterms:modified>)", rb"\g<1>" + when + rb"\g<2>", data)
                if info.filename == "docProps/core.xml" else data) for info, data in entries]
    if cached:
        from grantval.io.xlsx.cached import splice_cached

        entries = [(info, splice_cached(data, cached[info.filename]) if info.filename in cached else data)
                   for info, data in entries]
    if big:
        from grantval.io.xlsx.bigsheet import splice_parts

        entries = [(info, splice_parts(data, big[info.filename]) if info.filename in big else [data])
                   for info, data in entries]
    else:
        entries = [(info, [data]) for info, data in entries]
    _write_entries(path, entries)


def _write_entries(path: pathlib.Path, entries: list) -> None:
    """Write ``entries`` ((zip info, pieces): bytes or functions returning bytes) as the zip ``path``.

    The pieces are made and deflated in order (in worker processes where that pays,
    :mod:`grantval.io.xlsx.parallel`) and each entry's pieces joined into one
    (:mod:`grantval.io.xlsx.zipwrite`); no long sheet is held whole in memory.
    """
    from grantval.io.xlsx.parallel import deflated
    from grantval.io.xlsx.zipwrite import ZipWriter

    made = deflated([p for _, pieces in entries for p in pieces])
    try:
        with open(path, "wb") as out:
            writer = ZipWriter(out)
            for info, pieces in entries:
                writer.add(info.filename, (next(made) for _ in pieces), info.external_attr)
            writer.close()
    finally:
        made.close()  # stops the worker processes
