"""Fast writing of large worksheet tables as SpreadsheetML rows (vectorised with numpy).

openpyxl writes the sheet's header and first data row, which fixes each
column's cell style; the remaining rows are generated here, column by column
with numpy byte arrays, and spliced into the sheet's XML part before the
workbook is zipped again.  Cells carry explicit references (``r``), numbers
are written in shortest round-trip form, dates as Excel serial numbers, text
as inline strings (never formulas), and :class:`~grantval.io.xlsx.sheet.Formula`
values as formulas.
"""

from __future__ import annotations

import re

import numpy as np
import pandas as pd

from grantval.io.cells import col_letter

#: rows generated per block (bounds memory)
CHUNK = 100_000
_EXCEL_EPOCH = 25569  # days from 1899-12-30 to 1970-01-01
_BAD_XML = re.compile("[\x00-\x08\x0b\x0c\x0e-\x1f]")


def _xml_text(text: str) -> bytes:
    text = _BAD_XML.sub("", text)
    return text.replace("&", "&amp;").replace("<", "&lt;").replace(">", "&gt;").encode("utf-8")


def first_row_styles(sheet_xml: bytes) -> dict[str, bytes]:
    """Column letters -> `` s="k"`` attribute, from the cells of row 2 written by openpyxl."""
    m = re.search(rb'<row r="2"[^>]*>(.*?)</row>', sheet_xml, re.S)
    out: dict[str, bytes] = {}
    if m:
        for ref, attrs in re.findall(rb'<c r="([A-Z]+)2"([^>]*?)/?>', m.group(1)):
            s = re.search(rb'\ss="(\d+)"', attrs)
            out[ref.decode()] = b' s="' + s.group(1) + b'"' if s else b""
    return out


def _fill(buf: np.ndarray, at: int, piece) -> int:
    """Write a constant (bytes) or per-row (S array) piece into the row buffer at column ``at``."""
    if isinstance(piece, bytes):
        w = len(piece)
        buf[:, at : at + w] = np.frombuffer(piece, dtype=np.uint8)
    else:
        w = piece.dtype.itemsize
        buf[:, at : at + w] = piece.view(np.uint8).reshape(len(piece), w)
    return at + w


def _width(piece) -> int:
    return len(piece) if isinstance(piece, bytes) else piece.dtype.itemsize


def _any_cell(v) -> bytes:
    """The rest of one cell after its reference and style, for a value of any type (mixed columns)."""
    import datetime as _dt

    from grantval.io.xlsx.sheet import Formula

    if isinstance(v, Formula):
        return b"><f>" + _xml_text(str(v)[1:]) + b"</f></c>"
    if isinstance(v, str):
        return b' t="inlineStr"><is><t xml:space="preserve">' + _xml_text(v) + b"</t></is></c>"
    if v is None or v is pd.NaT or (isinstance(v, float) and np.isnan(v)):
        return b"/>"
    if isinstance(v, (bool, np.bool_)):
        return b' t="b"><v>' + (b"1" if v else b"0") + b"</v></c>"
    if isinstance(v, (np.datetime64, pd.Timestamp, _dt.date)):
        d = np.datetime64(v, "D")
        if np.isnat(d):
            return b"/>"
        return b"><v>" + str(int(d.astype(np.int64)) + _EXCEL_EPOCH).encode() + b"</v></c>"
    if isinstance(v, (int, np.integer)):
        return b"><v>" + str(int(v)).encode() + b"</v></c>"
    return b"><v>" + repr(float(v)).encode() + b"</v></c>"


def _column_pieces(values: np.ndarray, letter: bytes, style: bytes, rownum: np.ndarray) -> list:
    """The pieces of one column's cells for a block of rows."""
    from grantval.io.csv import _float_field
    from grantval.io.xlsx.sheet import Formula

    head = [b'<c r="', letter, rownum, b'"', style]
    if values.dtype == object and not all(v is None or (isinstance(v, str) and not isinstance(v, Formula))
                                          for v in values):
        return head + [np.array([_any_cell(v) for v in values], dtype=bytes)]
    if values.dtype == bool:
        return head + [b' t="b"><v>', np.where(values, b"1", b"0"), b"</v></c>"]
    if np.issubdtype(values.dtype, np.datetime64):
        days = values.astype("datetime64[D]")
        nat = np.isnat(days)
        serial = np.where(nat, 0, days.astype(np.int64) + _EXCEL_EPOCH).astype("S12")
        return head + [np.where(nat, b"/>", b"><v>"), np.where(nat, b"", serial), np.where(nat, b"", b"</v></c>")]
    if np.issubdtype(values.dtype, np.integer):
        return head + [b"><v>", values.astype("S21"), b"</v></c>"]
    if np.issubdtype(values.dtype, np.floating):
        missing = np.isnan(values)
        text = _float_field(values.astype(float))
        return head + [np.where(missing, b"/>", b"><v>"), text, np.where(missing, b"", b"</v></c>")]
    # text (from the ledger or the tool): inline strings, never formulas
    codes, uniques = pd.factorize(pd.Series(values, dtype=object), use_na_sentinel=True)
    table = np.array([_xml_text(str(u)) for u in uniques] + [b""], dtype=bytes)
    text = table[codes]
    missing = codes < 0
    return head + [np.where(missing, b"/>", b' t="inlineStr"><is><t xml:space="preserve">'), text,
                   np.where(missing, b"", b"</t></is></c>")]


def rows_xml(frame: pd.DataFrame, first_row: int, styles: dict[str, bytes]) -> bytes:
    """SpreadsheetML ``<row>`` elements for every row of ``frame``, numbered from ``first_row``."""
    out = []
    cols = list(frame.columns)
    letters = [col_letter(j + 1).encode() for j in range(len(cols))]
    arrays = [frame[c].to_numpy() for c in cols]
    for start in range(0, len(frame), CHUNK):
        stop = min(start + CHUNK, len(frame))
        rownum = np.arange(first_row + start, first_row + stop).astype("S10")
        pieces: list = [b'<row r="', rownum, b'">']
        for a, L in zip(arrays, letters):
            pieces += _column_pieces(a[start:stop], L, styles.get(L.decode(), b""), rownum)
        pieces.append(b"</row>")
        buf = np.zeros((stop - start, sum(_width(p) for p in pieces)), dtype=np.uint8)
        at = 0
        for p in pieces:
            at = _fill(buf, at, p)
        flat = buf.ravel()
        out.append(flat[flat != 0].tobytes())
    return b"".join(out)


def splice(sheet_xml: bytes, frame: pd.DataFrame) -> bytes:
    """Insert rows 3.. of ``frame`` (all but its first data row) into a sheet written by openpyxl."""
    styles = first_row_styles(sheet_xml)
    body = rows_xml(frame.iloc[1:], 3, styles)
    at = sheet_xml.rindex(b"</sheetData>")
    return sheet_xml[:at] + body + sheet_xml[at:]
