"""CSV output: one vectorised column-by-column writer, money to cents."""

from __future__ import annotations

import datetime as _dt
import functools
import math
import pathlib
from typing import Sequence

import numpy as np
import pandas as pd

from grantval.io.files import atomic_path
from grantval.io.xlsx.sheet import _FORMULA_START
from grantval.workers import ordered_map


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
    codes, uniques = pd.factorize(np.asarray(values, dtype=object), use_na_sentinel=True)
    uniques = np.asarray(uniques, dtype=object).tolist()
    plain = _plain_texts(uniques) if encode is _object_text else None
    if plain is None:
        plain = [encode(u).encode("utf-8").replace(b"\x00", b"") for u in uniques]
    return np.array(plain + [b""], dtype=bytes)[codes]  # -1 (missing) takes the last entry, b""


def _plain_texts(values: list) -> list[bytes] | None:
    """UTF-8 fields of ``values`` when all are text needing no quoting or formula guard, else None.

    One scan over the joined text replaces a per-value check: the common case
    (ids, names, choices) is decided in C.
    """
    if not all(type(v) is str for v in values):
        return None
    joined = "\n".join(values)
    if any(c in joined for c in ',"\r\x00') or joined.startswith(_FORMULA_START):
        return None
    if any("\n" + c in joined for c in _FORMULA_START):
        return None
    fields = joined.encode("utf-8").split(b"\n")
    return fields if len(fields) == len(values) else None  # a value holding a line break needs quotes


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
    return _as_fields(_money_matrix(np.asarray(values, dtype=float)))


def column_field(series: pd.Series, money: bool = False) -> np.ndarray:
    """CSV fields (bytes) of one column, vectorised by kind."""
    return _as_fields(_field_matrix(series.to_numpy(), money))


#: rows encoded and written at a time: bounds the writer's working memory (about 100 bytes a row)
BLOCK_ROWS = 1 << 17
_NUL, _COMMA, _NEWLINE, _MINUS, _DOT, _ZERO = 0, ord(","), ord("\n"), ord("-"), ord("."), ord("0")


def _as_fields(matrix: np.ndarray) -> np.ndarray:
    """The byte strings held by the rows of a field matrix (padding dropped)."""
    if not len(matrix):
        return np.array([], dtype=bytes)
    lines = np.concatenate([matrix, np.full((len(matrix), 1), _NEWLINE, np.uint8)], axis=1).ravel()
    return np.array(lines[lines != _NUL].tobytes().split(b"\n")[:-1], dtype=bytes)


def _digits(a: np.ndarray) -> np.ndarray:
    """Decimal digits of non-negative integers as a (rows, width) uint8 matrix.

    Right-aligned; the unused leading places hold NUL (padding the writer drops); 0 is ``0``.
    """
    width = len(str(int(a.max()))) if len(a) else 1
    out = np.empty((len(a), width), dtype=np.uint8)
    rest = a
    for k in range(width - 1, -1, -1):
        rest, digit = np.divmod(rest, 10)
        col = digit.astype(np.uint8) + _ZERO
        if k < width - 1:
            col[(rest == 0) & (digit == 0)] = _NUL  # a leading zero
        out[:, k] = col
    return out


def _signed(digits: np.ndarray, negative: np.ndarray) -> np.ndarray:
    """``digits`` with one more leading place holding ``-`` before the first digit of negative rows."""
    out = np.zeros((len(digits), digits.shape[1] + 1), dtype=np.uint8)
    out[:, 1:] = digits
    rows = np.flatnonzero(negative)
    if rows.size:
        used = np.count_nonzero(digits[rows], axis=1)
        out[rows, digits.shape[1] - used] = _MINUS
    return out


def _int_matrix(values: np.ndarray) -> np.ndarray:
    """Decimal text of integers (as ``str(int(x))``)."""
    values = values.astype(np.int64, copy=False)
    if len(values) and values.min() == np.iinfo(np.int64).min:  # its absolute value does not fit
        return _text_matrix(values.astype("S21"))
    negative = values < 0
    digits = _digits(np.abs(values))
    return _signed(digits, negative) if negative.any() else digits


def _money_matrix(v: np.ndarray) -> np.ndarray:
    """Amounts with exactly two decimals (whole cents, half away from zero at the cent); NaN as empty."""
    missing = np.isnan(v)
    cents = np.rint(np.where(missing, 0.0, v) * 100.0).astype(np.int64)
    a = np.abs(cents)
    units = _digits(a // 100)
    frac = a % 100
    body = np.empty((len(a), units.shape[1] + 3), dtype=np.uint8)
    body[:, :-3] = units
    body[:, -3] = _DOT
    body[:, -2] = frac // 10 + _ZERO
    body[:, -1] = frac % 10 + _ZERO
    negative = cents < 0
    out = _signed(body, negative) if negative.any() else body
    out[missing] = _NUL
    return out


def _text_matrix(fields: np.ndarray) -> np.ndarray:
    """The bytes of a fixed-width bytes array as a (rows, width) matrix (short fields end in NUL padding)."""
    fields = np.ascontiguousarray(fields)
    return fields.view(np.uint8).reshape(len(fields), fields.dtype.itemsize)


def _float_matrix(v: np.ndarray) -> np.ndarray:
    """Floats as :func:`_float_field` writes them; the whole numbers by the integer path."""
    whole = np.isfinite(v) & (np.floor(v) == v) & (np.abs(v) < 1e15)
    if whole.all():
        return _int_matrix(v.astype(np.int64))
    if not whole.any():
        return _text_matrix(_float_field(v))
    ints = _int_matrix(v[whole].astype(np.int64))
    rest = _text_matrix(_float_field(v[~whole]))
    out = np.zeros((len(v), max(ints.shape[1], rest.shape[1])), dtype=np.uint8)
    out[whole, out.shape[1] - ints.shape[1]:] = ints
    out[~whole, : rest.shape[1]] = rest
    return out


def _date_matrix(values: np.ndarray) -> np.ndarray:
    """ISO days (``2027-03-15``); NaT as empty."""
    days = values.astype("datetime64[D]")
    nat = np.isnat(days)
    codes, uniques = pd.factorize(np.where(nat, 0, days.view(np.int64)))
    table = np.array([str(np.datetime64(int(u), "D")).encode() for u in uniques], dtype=bytes)
    fields = np.where(nat, b"", table[codes]) if nat.any() else table[codes]
    return _text_matrix(fields)


def _object_matrix(values: np.ndarray) -> np.ndarray:
    """Text of Python objects (:func:`csv_text`, formula guard, quoting), each run of equal cells encoded once."""
    n = len(values)
    start = np.ones(n, dtype=bool)
    try:
        np.not_equal(values[1:], values[:-1], out=start[1:])
    except (TypeError, ValueError):  # cells that do not compare to a truth value (pd.NA): each on its own
        start[:] = True
    if _bools_among_numbers(values):
        # True equals 1 as a Python value but is written "true": no grouping of equal cells here
        table = [b"" if x is pd.NA else _encode_object(x) for x in values.tolist()]
        return _text_matrix(np.array(table, dtype=bytes))
    heads = np.flatnonzero(start)
    lengths = np.diff(np.append(heads, n))
    fields = _mapped(values[heads], _object_text)
    return _text_matrix(np.repeat(fields, lengths) if len(heads) < n else fields)


def _bools_among_numbers(values: np.ndarray) -> bool:
    """Whether ``values`` mixes booleans with other kinds (a scan in C first: most columns are all text)."""
    if pd.api.types.infer_dtype(values, skipna=True) not in ("mixed", "mixed-integer"):
        return False
    return any(isinstance(x, (bool, np.bool_)) for x in values.tolist())


def _object_text(value) -> str:
    return _csv_field(csv_text(value))


def _encode_object(value) -> bytes:
    return _object_text(value).encode("utf-8").replace(b"\x00", b"")


def _field_matrix(arr: np.ndarray, money: bool) -> np.ndarray:
    """The CSV fields of one column (a block of rows) as a (rows, width) uint8 matrix, NUL-padded."""
    if money:
        return _money_matrix(np.asarray(arr, dtype=float))
    if arr.dtype == bool:
        return _text_matrix(np.where(arr, b"true", b"false"))
    if np.issubdtype(arr.dtype, np.integer):
        return _int_matrix(arr)
    if np.issubdtype(arr.dtype, np.floating):
        return _float_matrix(arr.astype(float))
    if np.issubdtype(arr.dtype, np.datetime64):
        return _date_matrix(arr)
    return _object_matrix(np.asarray(arr, dtype=object))


def _lines(matrices: list[np.ndarray]) -> bytes:
    """CSV lines of a block: the fields of each row joined by commas, NUL padding dropped."""
    rows = len(matrices[0])
    width = sum(m.shape[1] + 1 for m in matrices)
    buf = np.empty((rows, width), dtype=np.uint8)
    buf.fill(_COMMA)
    at = 0
    for m in matrices:
        # each field copied as one fixed-size item per row: much faster than a narrow 2-D slice
        w = m.shape[1]
        if w:
            into = np.ndarray((rows,), dtype=f"V{w}", buffer=buf, offset=at, strides=(width,))
            into[...] = np.ascontiguousarray(m).view(f"V{w}").ravel()
        at += w + 1
    buf[:, -1] = _NEWLINE
    flat = buf.ravel()
    return flat[flat != _NUL].tobytes()


def frame_blocks(frame: pd.DataFrame, rows: int | None = None) -> list[list[np.ndarray]]:
    """The columns of ``frame`` (numpy arrays, in order) in blocks of ``rows`` rows (views, not copies)."""
    rows = rows or BLOCK_ROWS
    arrays = [frame.iloc[:, j].to_numpy() for j in range(frame.shape[1])]
    return [[a[at : at + rows] for a in arrays] for at in range(0, len(frame), rows)]


def _block_lines(block, is_money: list[bool]) -> bytes:
    """The CSV lines of one block (a list of column arrays, or a function returning one)."""
    block = block() if callable(block) else block
    if not (len(block) and len(block[0])):
        return b""
    return _lines([_field_matrix(a, m) for a, m in zip(block, is_money)])


def write_csv_blocks(path: pathlib.Path, columns: Sequence[str], blocks, money: Sequence[str] = ()) -> None:
    """Write a CSV file atomically from ``blocks``, so no more than a block is held as text.

    Each block is a list of column arrays (in the order of ``columns``) or a function
    returning one.  When ``blocks`` is a sequence its blocks are encoded in worker
    processes where that pays (:func:`grantval.workers.ordered_map`; the same bytes);
    any other iterable is encoded here, a block at a time.  Columns named in ``money``
    are written with exactly two decimals (see :func:`write_csv`).
    """
    header = ",".join(_csv_field(str(c)) for c in columns).encode("utf-8") + b"\n"
    is_money = [c in money for c in columns]
    encode = functools.partial(_block_lines, is_money=is_money)
    lines = ordered_map(encode, blocks) if isinstance(blocks, Sequence) else map(encode, blocks)
    with atomic_path(path) as tmp, open(tmp, "wb") as fh:
        fh.write(header)
        try:
            for text in lines:
                fh.write(text)
        finally:
            getattr(lines, "close", lambda: None)()  # stops the worker processes


def write_csv(path: pathlib.Path, frame: pd.DataFrame, money: Sequence[str] = ()) -> None:
    """Write ``frame`` to ``path`` atomically with snake_case headers as given (vectorised by column).

    Columns named in ``money`` are written with exactly two decimals.  The rows
    are encoded and written a block of :data:`BLOCK_ROWS` at a time.
    """
    write_csv_blocks(path, [str(c) for c in frame.columns], frame_blocks(frame), money)
