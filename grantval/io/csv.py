"""CSV output: one vectorised column-by-column writer, money to cents."""

from __future__ import annotations

import datetime as _dt
import math
import pathlib
from typing import Sequence

import numpy as np
import pandas as pd

from grantval.io.files import atomic_path
from grantval.io.xlsx.sheet import _FORMULA_START


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
