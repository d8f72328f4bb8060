"""Writing CSV files and Excel workbooks, atomically and deterministically.

- Every output is written to a temporary file beside its target and renamed
  into place only when complete, so a failure never leaves a partial file.
- An output path that is one of the inputs is refused.
- Text that begins with ``=``, ``+``, ``-`` or ``@`` is never written as a
  formula: in workbooks it is stored as a text cell; in CSV files it is
  prefixed with an apostrophe (the usual guard against formula injection when
  a CSV file is opened in a spreadsheet).
- CSV numbers are written in Python's shortest round-trip form, dates as
  ISO text, missing values as empty fields; the same inputs give the same bytes.
"""

from __future__ import annotations

import contextlib
import csv
import datetime as _dt
import math
import os
import pathlib
import tempfile
from dataclasses import dataclass, field
from typing import Iterator, Sequence

import numpy as np
import pandas as pd

from grantval.errors import OutputError

_FORMULA_START = ("=", "+", "-", "@")
#: frame sheets longer than this are written by grantval.io.bigsheet after the first data row
FAST_ROWS = 2_000
#: Excel's limits: rows per sheet (with the header) and columns
EXCEL_ROWS = 1_048_576
EXCEL_COLUMNS = 16_384
#: timestamp written into reproducible workbooks (``--no-timestamp``)
FIXED_TIME = _dt.datetime(2000, 1, 1)


class Formula(str):
    """A cell formula (text starting with ``=``) that grantval itself wrote.

    Only values of this type are written as formulas; every other text is a
    text cell, whatever it starts with.
    """


@dataclass
class Chart:
    """A chart to place on a sheet (built with openpyxl at write time).

    ``data`` and ``categories`` are (min_col, min_row, max_col, max_row) on
    ``source`` (a sheet title; default the chart's own sheet); ``data``
    includes its title row.
    """

    kind: str  # "bar" or "line"
    title: str
    data: tuple[int, int, int, int]
    categories: tuple[int, int, int, int]
    anchor: str
    source: str | None = None
    y_title: str = ""
    x_title: str = ""


def refuse_overwriting_inputs(outputs: Sequence[pathlib.Path], inputs: Sequence[str]) -> None:
    """Raise :class:`OutputError` when an output path is one of the input files or folders."""
    ins = []
    for i in inputs:
        p = pathlib.Path(i).resolve()
        ins.append(p)
    for o in outputs:
        op = pathlib.Path(o).resolve()
        for ip in ins:
            if op == ip:
                raise OutputError(f"the output {o} is one of the inputs; choose another path")


@contextlib.contextmanager
def atomic_path(target: pathlib.Path) -> Iterator[pathlib.Path]:
    """Yield a temporary path beside ``target``; rename it to ``target`` on success."""
    target = pathlib.Path(target)
    if target.exists() and target.is_dir():
        raise OutputError(f"the output {target} is a folder; give a file name")
    parent = target.parent if str(target.parent) else pathlib.Path(".")
    if not parent.exists():
        raise OutputError(f"the folder {parent} for the output {target.name} does not exist")
    fd, tmp = tempfile.mkstemp(prefix=f".{target.name}.", suffix=".part", dir=parent)
    os.close(fd)
    tmp_path = pathlib.Path(tmp)
    try:
        yield tmp_path
        os.replace(tmp_path, target)
    except BaseException:
        with contextlib.suppress(OSError):
            tmp_path.unlink()
        raise


def csv_text(value) -> str:
    """The CSV field for one value."""
    if value is None:
        return ""
    if isinstance(value, (float, np.floating)):
        if math.isnan(value):
            return ""
        v = float(value)
        return repr(int(v)) if v.is_integer() and abs(v) < 1e15 else repr(v)
    if isinstance(value, (bool, np.bool_)):
        return "true" if value else "false"
    if isinstance(value, (int, np.integer)):
        return str(int(value))
    if isinstance(value, np.datetime64):
        return "" if np.isnat(value) else str(value.astype("datetime64[D]"))
    if isinstance(value, (_dt.date, _dt.datetime, pd.Timestamp)):
        if value is pd.NaT:
            return ""
        return value.date().isoformat() if isinstance(value, (_dt.datetime, pd.Timestamp)) else value.isoformat()
    text = str(value)
    if text.startswith(_FORMULA_START):
        return "'" + text
    return text


def _column_values(series: pd.Series) -> list:
    arr = series.to_numpy()
    if np.issubdtype(arr.dtype, np.datetime64):
        return list(arr.astype("datetime64[D]"))
    return list(arr)


def _csv_field(text: str) -> str:
    """One text field: formula guard, then CSV quoting when needed."""
    if text.startswith(_FORMULA_START):
        text = "'" + text
    if any(ch in text for ch in ',"\n\r'):
        text = '"' + text.replace('"', '""') + '"'
    return text


def _mapped(values: np.ndarray, encode) -> np.ndarray:
    """Encode each distinct value once (Python) and spread the results back (numpy)."""
    codes, uniques = pd.factorize(pd.Series(values), use_na_sentinel=True)
    table = np.array([encode(u).encode("utf-8").replace(b"\x00", b"") for u in uniques] + [b""], dtype=bytes)
    return table[codes]  # -1 (missing) takes the last entry, b""


_CENTS = np.array([f".{i:02d}".encode() for i in range(100)], dtype="S3")


def _float_field(arr: np.ndarray) -> np.ndarray:
    """Shortest round-trip text of floats (whole numbers without a decimal point); NaN as empty."""
    codes, uniques = pd.factorize(arr, use_na_sentinel=True)
    uniques = np.asarray(uniques, dtype=float)
    whole = (np.floor(uniques) == uniques) & (np.abs(uniques) < 1e15)
    table = np.empty(len(uniques) + 1, dtype=object)
    table[:-1][whole] = [str(int(x)).encode() for x in uniques[whole].tolist()]
    table[:-1][~whole] = [repr(x).encode() for x in uniques[~whole].tolist()]
    table[-1] = b""
    return np.array(table.tolist(), dtype=bytes)[codes]


def money_field(values: np.ndarray) -> np.ndarray:
    """Currency amounts with exactly two decimals, from values that are whole cents (vectorised)."""
    v = np.asarray(values, dtype=float)
    missing = np.isnan(v)
    cents = np.rint(np.where(missing, 0.0, v) * 100.0).astype(np.int64)
    a = np.abs(cents)
    out = np.char.add((a // 100).astype("S20"), _CENTS[a % 100])
    neg = cents < 0
    if neg.any():
        out = np.where(neg, np.char.add(b"-", out), out)
    if missing.any():
        out = np.where(missing, b"", out)
    return out


def column_field(series: pd.Series, money: bool = False) -> np.ndarray:
    """CSV fields (bytes) of one column, vectorised by kind."""
    arr = series.to_numpy()
    if money:
        return money_field(arr)
    if arr.dtype == bool:
        return np.where(arr, b"true", b"false")
    if np.issubdtype(arr.dtype, np.integer):
        return arr.astype("S21")
    if np.issubdtype(arr.dtype, np.floating):
        return _float_field(arr.astype(float))
    if np.issubdtype(arr.dtype, np.datetime64):
        days = arr.astype("datetime64[D]")
        nat = np.isnat(days)
        codes, uniques = pd.factorize(np.where(nat, 0, days.astype(np.int64)))
        table = np.array([str(np.datetime64(int(u), "D")).encode() for u in uniques], dtype=bytes)
        return np.where(nat, b"", table[codes]) if nat.any() else table[codes]
    return _mapped(np.asarray(arr, dtype=object), lambda x: _csv_field(csv_text(x)))


def write_csv(path: pathlib.Path, frame: pd.DataFrame, money: Sequence[str] = ()) -> None:
    """Write ``frame`` to ``path`` atomically with snake_case headers as given (vectorised by column).

    Columns named in ``money`` are written with exactly two decimals.
    """
    header = ",".join(_csv_field(str(c)) for c in frame.columns).encode("utf-8")
    if len(frame):
        # one fixed-width block per column, padded with NUL bytes, then a separator;
        # the padding is dropped at the end
        fields = [column_field(frame[c], c in money) for c in frame.columns]
        widths = [f.dtype.itemsize for f in fields]
        buf = np.zeros((len(frame), sum(widths) + len(widths)), dtype=np.uint8)
        at = 0
        for f, w in zip(fields, widths):
            buf[:, at : at + w] = f.view(np.uint8).reshape(len(frame), w)
            buf[:, at + w] = ord(",")
            at += w + 1
        buf[:, -1] = ord("\n")
        flat = buf.ravel()
        body = flat[flat != 0].tobytes()
    else:
        body = b""
    with atomic_path(path) as tmp:
        tmp.write_bytes(header + b"\n" + body)


@dataclass
class Sheet:
    """One worksheet to write.

    Attributes
    ----------
    name : str
        Sheet title.
    frame : DataFrame, optional
        A table written with a header row (labels from ``labels`` or the
        column names made readable), frozen and filtered.
    rows : list of list, optional
        Free-form rows (for notes and summaries), written as given; a string
        starting with ``=`` in a row from ``formula_rows`` is a formula.
    formats : dict
        Column name -> Excel number format.
    widths : dict
        Column name (or 1-based column number for ``rows``) -> width.
    text_columns : tuple of str
        Columns whose values came from the ledger: always stored as text.
    """

    name: str
    frame: pd.DataFrame | None = None
    rows: list[list] | None = None
    formats: dict[str, str] = field(default_factory=dict)
    widths: dict = field(default_factory=dict)
    labels: dict[str, str] = field(default_factory=dict)
    text_columns: tuple[str, ...] = ()
    charts: list = field(default_factory=list)
    row_formats: dict = field(default_factory=dict)  # rows sheets: (row index, column index) -> number format


def label(column: str) -> str:
    """Readable header for a snake_case column name."""
    text = column.replace("_", " ")
    return text[:1].upper() + text[1:]


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


def write_workbook(path: pathlib.Path, sheets: Sequence[Sheet], fixed_time: _dt.datetime | None = None) -> None:
    """Write ``sheets`` to an .xlsx workbook atomically (openpyxl write-only mode).

    ``fixed_time`` sets the workbook's created/modified properties (for
    reproducible files); default is the current time.
    """
    from openpyxl import Workbook
    from openpyxl.cell import WriteOnlyCell
    from openpyxl.styles import Alignment, Font
    from openpyxl.utils import get_column_letter

    wb = Workbook(write_only=True)
    stamp = fixed_time or _dt.datetime.now().replace(microsecond=0)
    wb.properties.created = stamp
    wb.properties.modified = stamp
    wb.properties.creator = "grantval"
    bold = Font(bold=True)
    big: dict[str, pd.DataFrame] = {}
    for index, sh in enumerate(_split_long(sheets)):
        ws = wb.create_sheet(sh.name)
        if sh.frame is not None:
            cols = list(sh.frame.columns)
            if len(cols) > EXCEL_COLUMNS:
                raise OutputError(f"the sheet {sh.name} would have {len(cols):,} columns, more than Excel's "
                                  f"{EXCEL_COLUMNS:,}; use fewer periods (a longer --period) or --csv-dir")
            for j, c in enumerate(cols, start=1):
                width = sh.widths.get(c, max(10, min(40, len(sh.labels.get(c, label(c))) + 2)))
                ws.column_dimensions[get_column_letter(j)].width = width
            ws.freeze_panes = "A2"
            if len(sh.frame):
                ws.auto_filter.ref = f"A1:{get_column_letter(len(cols))}{len(sh.frame) + 1}"
            header = []
            for c in cols:
                cell = WriteOnlyCell(ws, value=sh.labels.get(c, label(c)))
                cell.font = bold
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
            for row in zip(*values):
                out = []
                for v, fmt, is_text in zip(row, fmts, texts):
                    v = _cell_value(v)
                    if isinstance(v, Formula):
                        cell = WriteOnlyCell(ws, value=str(v))
                        if fmt:
                            cell.number_format = fmt
                        out.append(cell)
                    elif isinstance(v, str) or is_text:
                        cell = WriteOnlyCell(ws, value=None if v is None else str(v))
                        if v is not None:
                            cell.data_type = "s"  # never a formula
                        out.append(cell)
                    elif fmt:
                        cell = WriteOnlyCell(ws, value=v)  # a styled cell even when empty
                        cell.number_format = fmt
                        out.append(cell)
                    else:
                        out.append(v)
                ws.append(out)
        if sh.rows is not None:
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
                        if i == 0:
                            cell.font = bold
                    elif fmt is not None and v is not None:
                        cell = WriteOnlyCell(ws, value=v)
                    else:
                        out.append(v)
                        continue
                    if fmt:
                        cell.number_format = fmt
                    out.append(cell)
                ws.append(out)
        for ch in sh.charts:
            ws.add_chart(_build_chart(ch, wb, ws), ch.anchor)
    with atomic_path(path) as tmp:
        wb.save(tmp)
        _normalise_zip(tmp, stamp, big)


def _build_chart(spec: Chart, wb, ws):
    from openpyxl.chart import BarChart, LineChart, Reference

    chart = BarChart() if spec.kind == "bar" else LineChart()
    chart.title = spec.title
    chart.y_axis.title = spec.y_title
    chart.x_axis.title = spec.x_title
    chart.height, chart.width = 9, 18
    src = ws if spec.source is None else wb[spec.source]
    c0, r0, c1, r1 = spec.data
    chart.add_data(Reference(src, min_col=c0, min_row=r0, max_col=c1, max_row=r1), titles_from_data=True)
    c0, r0, c1, r1 = spec.categories
    chart.set_categories(Reference(src, min_col=c0, min_row=r0, max_col=c1, max_row=r1))
    return chart


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


def _normalise_zip(path: pathlib.Path, stamp: _dt.datetime, big: dict | None = None) -> None:
    """Rewrite a saved workbook with fixed zip entry times and ``stamp`` as its modified time.

    openpyxl stamps the save time into docProps/core.xml and the zip entries;
    with this, equal content gives equal bytes.
    """
    import re
    import zipfile

    with zipfile.ZipFile(path) as src:
        entries = [(info, src.read(info.filename)) for info in src.infolist()]
    when = stamp.strftime("%Y-%m-%dT%H:%M:%SZ").encode()
    entries = [(info, re.sub(rb"(<dcterms:modified[^>]*>)[^<]*(</dcterms:modified>)", rb"\g<1>" + when + rb"\g<2>", data)
                if info.filename == "docProps/core.xml" else data) for info, data in entries]
    if big:
        from grantval.io.bigsheet import splice

        entries = [(info, splice(data, big[info.filename]) if info.filename in big else data)
                   for info, data in entries]
    with zipfile.ZipFile(path, "w", compression=zipfile.ZIP_DEFLATED) as dst:
        for info, data in entries:
            fixed = zipfile.ZipInfo(info.filename, date_time=(1980, 1, 1, 0, 0, 0))
            fixed.compress_type = zipfile.ZIP_DEFLATED
            fixed.external_attr = info.external_attr
            dst.writestr(fixed, data, compresslevel=1 if len(data) > 2**24 else 6)
