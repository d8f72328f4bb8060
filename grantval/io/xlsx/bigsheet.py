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

import datetime as _dt
import functools
import re

import numpy as np
import pandas as pd

from grantval.io.cells import col_letter

#: rows generated per block (bounds memory)
CHUNK = 100_000
_EXCEL_EPOCH = 25569  # days from 1899-12-30 to 1970-01-01
_BAD_XML = re.compile("[\x00-\x08\x0b\x0c\x0e-\x1f]")
_BAD_XML_BUT_SEP = re.compile("[\x00\x02-\x08\x0b\x0c\x0e-\x1f]")


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


#: kinds of the values of an object column, by Python type (anything else is written cell by cell)
_NONE, _FORMULA, _TEXT, _BOOL, _FLOAT, _INT, _DATE, _OTHER = range(8)


def _kind_of(t: type) -> int:
    from grantval.io.xlsx.sheet import Formula

    if t is Formula:
        return _FORMULA
    if t is type(None) or t is type(pd.NaT):
        return _NONE
    if issubclass(t, str):
        return _TEXT
    if issubclass(t, (bool, np.bool_)):
        return _BOOL
    if issubclass(t, (float, np.floating)):
        return _FLOAT
    if issubclass(t, (int, np.integer)):
        return _INT
    if issubclass(t, (_dt.date, np.datetime64)):  # pd.Timestamp is a datetime
        return _DATE
    return _OTHER


def _object_kinds(values: np.ndarray) -> np.ndarray:
    """The kind of every value of an object array, classifying each distinct type once."""
    codes, types = pd.factorize(np.array(list(map(type, values)), dtype=object))
    return np.array([_kind_of(t) for t in types], dtype=np.int8)[codes]


def _escaped(texts: list[str]) -> np.ndarray:
    """XML-escaped UTF-8 bytes of many texts, escaped as one joined block (\\x01 between them)."""
    joined = "\x01".join(texts)
    if joined.count("\x01") != len(texts) - 1:  # a text holds the separator: escape one by one
        return np.array([_xml_text(t) for t in texts], dtype=bytes)
    joined = _BAD_XML_BUT_SEP.sub("", joined)
    joined = joined.replace("&", "&amp;").replace("<", "&lt;").replace(">", "&gt;")
    return np.array(joined.encode("utf-8").split(b"\x01"), dtype=bytes)


def _tail_pieces(values: np.ndarray, kind: int) -> list:
    """Pieces of the cells' text after reference and style, for values that are all of one kind."""
    n = len(values)
    if kind == _NONE:
        return [b"/>"]
    if kind == _FORMULA:
        return [b"><f>", _escaped([v[1:] for v in values.tolist()]), b"</f></c>"]
    if kind == _BOOL:
        return [b' t="b"><v>', np.where(values.astype(bool), b"1", b"0"), b"</v></c>"]
    if kind == _FLOAT:  # written like repr(float), as for single cells
        v = values.astype(float)
        codes, uniques = pd.factorize(v, use_na_sentinel=True)
        table = np.array([repr(x).encode() for x in np.asarray(uniques, dtype=float).tolist()] + [b""], dtype=bytes)
        missing = codes < 0
        return [np.where(missing, b"/>", b"><v>"), table[codes], np.where(missing, b"", b"</v></c>")]
    if kind == _INT:
        try:
            text = values.astype(np.int64).astype("S21")
        except OverflowError:
            text = np.array([str(int(v)).encode() for v in values.tolist()], dtype=bytes)
        return [b"><v>", text, b"</v></c>"]
    if kind == _DATE:
        try:
            days = np.array(values.tolist(), dtype="datetime64[D]")
        except (TypeError, ValueError):  # for example dates with a time zone: one by one
            return [np.array([_any_cell(v) for v in values.tolist()], dtype=bytes)]
        nat = np.isnat(days)
        serial = np.where(nat, 0, days.astype(np.int64) + _EXCEL_EPOCH).astype("S12")
        return [np.where(nat, b"/>", b"><v>"), np.where(nat, b"", serial), np.where(nat, b"", b"</v></c>")]
    if kind == _TEXT:
        codes, uniques = pd.factorize(pd.Series(values, dtype=object), use_na_sentinel=True)
        table = np.array([_xml_text(str(u)) for u in uniques] + [b""], dtype=bytes)
        missing = codes < 0
        return [np.where(missing, b"/>", b' t="inlineStr"><is><t xml:space="preserve">'), table[codes],
                np.where(missing, b"", b"</t></is></c>")]
    return [np.array([_any_cell(v) for v in values.tolist()], dtype=bytes)] if n else [b""]


def _joined(pieces: list, n: int) -> np.ndarray:
    """One bytes array from constant and per-row pieces."""
    out = np.full(n, b"", dtype="S1")
    for p in pieces:
        out = np.char.add(out, p)
    return out


def _has_formula(texts: np.ndarray) -> bool:
    """Whether an object array of text holds a :class:`~grantval.io.xlsx.sheet.Formula` (a str subclass
    whose text starts with ``=``): only the values starting with ``=`` are looked at one by one."""
    from grantval.io.xlsx.sheet import Formula

    starts = pd.Series(texts, dtype=object).str.startswith("=", na=False).to_numpy(dtype=bool)
    return any(type(v) is Formula for v in texts[starts].tolist())


def _object_tail(values: np.ndarray) -> list:
    """Tail pieces of an object column: vectorised per kind of value, scattered back in row order."""
    inferred = pd.api.types.infer_dtype(values, skipna=True)  # one C pass; None and NaN are skipped
    if inferred in ("floating", "integer", "boolean"):
        kind = {"floating": _FLOAT, "integer": _INT, "boolean": _BOOL}[inferred]
        try:
            if kind == _FLOAT or not pd.isna(values).any():  # missing ints and bools are written by kind below
                return _tail_pieces(values, kind)
        except (TypeError, ValueError):  # for example NaT among floats
            pass
    if inferred == "string" and not _has_formula(values):  # text, perhaps with None or NaN: as _TEXT below
        return _tail_pieces(values, _TEXT)
    kinds = _object_kinds(values)
    present = np.unique(kinds)
    if len(present) == 1:
        return _tail_pieces(values, int(present[0]))
    if set(present.tolist()) <= {_NONE, _TEXT}:
        return _tail_pieces(values, _TEXT)
    out = np.empty(len(values), dtype=object)
    for k in present.tolist():
        at = np.flatnonzero(kinds == k)
        out[at] = _joined(_tail_pieces(values[at], k), len(at)).tolist()
    return [np.array(out.tolist(), dtype=bytes)]


def _column_pieces(values: np.ndarray, letter: bytes, style: bytes, rownum: np.ndarray) -> list:
    """The pieces of one column's cells for a block of rows."""
    from grantval.io.csv import _float_field

    head = [b'<c r="', letter, rownum, b'"', style]
    if values.dtype == object:
        return head + _object_tail(values)
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
    # text of other dtypes (from the ledger or the tool): inline strings, never formulas
    return head + _tail_pieces(np.asarray(values, dtype=object), _TEXT)


def _block_xml(arrays: list, letters: list, styles: dict[str, bytes], start: int, stop: int,
               first_row: int) -> bytes:
    """SpreadsheetML ``<row>`` elements of rows ``start:stop`` of the column arrays, numbered from ``first_row``."""
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
    return flat[flat != 0].tobytes()


def row_blocks(frame: pd.DataFrame, first_row: int, styles: dict[str, bytes]) -> list:
    """Functions that each return the ``<row>`` elements of one block of :data:`CHUNK` rows of ``frame``.

    The blocks are independent, so they can be made in any order or in other processes
    (:mod:`grantval.io.xlsx.parallel`); joined in order they are :func:`rows_xml`.
    """
    cols = list(frame.columns)
    letters = [col_letter(j + 1).encode() for j in range(len(cols))]
    arrays = [frame[c].to_numpy() for c in cols]
    return [functools.partial(_block_xml, arrays, letters, styles, start, min(start + CHUNK, len(frame)), first_row)
            for start in range(0, len(frame), CHUNK)]


def rows_xml(frame: pd.DataFrame, first_row: int, styles: dict[str, bytes]) -> bytes:
    """SpreadsheetML ``<row>`` elements for every row of ``frame``, numbered from ``first_row``."""
    return b"".join(block() for block in row_blocks(frame, first_row, styles))


def _is_total_row(row: pd.Series) -> bool:
    """A column-totals row (it holds the label ``Total``), as the openpyxl path detects it."""
    return any(isinstance(v, str) and v == "Total" for v in row.tolist())


def splice_parts(sheet_xml: bytes, frame: pd.DataFrame) -> list:
    """The pieces of a sheet written by openpyxl with rows 3.. of ``frame`` (all but its first data row) inserted.

    Each piece is bytes or a function returning bytes (a block of rows, :func:`row_blocks`);
    joined in order they are the sheet's XML.  A trailing totals row (formulas, the label
    ``Total``) is written apart from the data rows, so each data column keeps one kind of value
    and is written vectorised.
    """
    styles = first_row_styles(sheet_xml)
    data = frame.iloc[1:]
    total: list = []
    if len(data) > 1 and _is_total_row(data.iloc[-1]):
        total = row_blocks(data.iloc[-1:], 3 + len(data) - 1, styles)
        data = data.iloc[:-1]
    at = sheet_xml.rindex(b"</sheetData>")
    return [sheet_xml[:at], *row_blocks(data, 3, styles), *total, sheet_xml[at:]]


def splice(sheet_xml: bytes, frame: pd.DataFrame) -> bytes:
    """Insert rows 3.. of ``frame`` (all but its first data row) into a sheet written by openpyxl
    (:func:`splice_parts`, joined)."""
    return b"".join(p if isinstance(p, bytes) else p() for p in splice_parts(sheet_xml, frame))
