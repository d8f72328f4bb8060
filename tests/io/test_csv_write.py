"""The vectorised CSV writer (grantval/io/csv.py) against a cell-by-cell reference written here.

The reference follows the writer's documented rules one Python value at a
time (common practice for CSV, RFC 4180 quoting): a field holding a comma,
a quote or a line break is quoted with inner quotes doubled; text starting
with = + - @ gets a leading apostrophe so spreadsheets do not run it as a
formula; NaN, NaT and None are empty; whole floats are written without a
decimal point, others as Python's shortest round-trip text; money columns
have exactly two decimals from whole cents.
"""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
import pytest

from grantval.io import csv as C
from grantval.io.csv import column_field, money_field, write_csv


def _ref_text(v) -> str:
    if v is None or v is pd.NA or v is pd.NaT:
        return ""
    if isinstance(v, (bool, np.bool_)):
        return "true" if v else "false"
    if isinstance(v, (int, np.integer)):
        return str(int(v))
    if isinstance(v, (float, np.floating)):
        v = float(v)
        if math.isnan(v):
            return ""
        return str(int(v)) if math.isfinite(v) and v == math.floor(v) and abs(v) < 1e15 else repr(v)
    if isinstance(v, np.datetime64):
        return "" if np.isnat(v) else str(v.astype("datetime64[D]"))
    if isinstance(v, pd.Timestamp):
        return v.date().isoformat()
    text = str(v).replace("\x00", "")
    return "'" + text if text[:1] in ("=", "+", "-", "@") else text


def _ref_money(v) -> str:
    if v is None or (isinstance(v, float) and math.isnan(v)):
        return ""
    cents = int(np.rint(float(v) * 100.0))
    return f"{'-' if cents < 0 else ''}{abs(cents) // 100}.{abs(cents) % 100:02d}"


def _ref_quote(text: str) -> str:
    return '"' + text.replace('"', '""') + '"' if any(c in text for c in ',"\r\n') else text


def _reference(frame: pd.DataFrame, money=()) -> bytes:
    lines = [",".join(_ref_quote(str(c)) for c in frame.columns)]
    cols = [frame[c].tolist() if frame[c].dtype == object else list(frame[c].to_numpy()) for c in frame.columns]
    for row in zip(*cols):
        lines.append(",".join(_ref_quote(_ref_money(v) if c in money else _ref_text(v))
                              for c, v in zip(frame.columns, row)))
    return ("\n".join(lines) + "\n").encode("utf-8")


def _written(tmp_path, frame, money=()) -> bytes:
    path = tmp_path / "t.csv"
    write_csv(path, frame, money=money)
    return path.read_bytes()


def test_text_quoting_and_formula_guard(tmp_path):
    texts = ["plain", "a,b", 'say "hi"', "two\nlines", "cr\rhere", "=SUM(A1:A3)", "+1", "-x", "@cmd", "=a,b",
             "", "x=1", "  lead space", None]
    frame = pd.DataFrame({"t": np.array(texts, dtype=object), "n": np.arange(len(texts))})
    got = _written(tmp_path, frame)
    assert got == _reference(frame)
    lines = got.decode().split("\n")
    assert lines[2] == '"a,b",1' and lines[3] == '"say ""hi""",2' and lines[4:6] == ['"two', 'lines",3']
    assert lines[7:11] == ["'=SUM(A1:A3),5", "'+1,6", "'-x,7", "'@cmd,8"]
    assert lines[11] == "\"'=a,b\",9" and lines[12] == ",10" and lines[15] == ",13"


def test_formula_guard_among_plain_texts(tmp_path):
    # no text needs quotes here, so the writer's all-plain path decides the guard
    frame = pd.DataFrame({"t": ["ok", "=1+2", "plain", "-3", "@x", "+y", "mid=dle"]})
    got = _written(tmp_path, frame)
    assert got == _reference(frame)
    assert got.decode().split("\n")[1:8] == ["ok", "'=1+2", "plain", "'-3", "'@x", "'+y", "mid=dle"]
    first = pd.DataFrame({"t": ["=first", "second"]})
    assert _written(tmp_path, first) == b"t\n'=first\nsecond\n"


def test_unicode_and_nul_in_text(tmp_path):
    frame = pd.DataFrame({"name": ["Zoë", "日本語", "emoji 🎉", "nul\x00gone", "Ünïcødé,comma"]})
    got = _written(tmp_path, frame)
    assert got == _reference(frame)
    assert got.decode("utf-8").split("\n")[1:6] == ["Zoë", "日本語", "emoji 🎉", "nulgone", '"Ünïcødé,comma"']


def test_numbers_nan_negative_zero_and_extremes(tmp_path):
    floats = [0.0, -0.0, 1.0, -5.0, 0.1 + 0.2, 1e-05, 123.456, float("nan"), float("inf"), -float("inf"),
              1e15, 999999999999999.0, -2.5, 1e300, 5e-324]
    ints = [0, -1, 7, 2**62, -(2**62), np.iinfo(np.int64).min, np.iinfo(np.int64).max, 10, 99, 100, -100, 1, 3,
            4, 5]
    frame = pd.DataFrame({"f": np.array(floats), "i": np.array(ints, dtype=np.int64)})
    got = _written(tmp_path, frame)
    assert got == _reference(frame)
    rows = [r.split(",") for r in got.decode().split("\n")[1:-1]]
    assert [r[0] for r in rows[:8]] == ["0", "0", "1", "-5", "0.30000000000000004", "1e-05", "123.456", ""]
    assert rows[8][0] == "inf" and rows[10][0] == "1000000000000000.0" and rows[11][0] == "999999999999999"
    assert rows[5][1] == str(np.iinfo(np.int64).min) and rows[6][1] == str(np.iinfo(np.int64).max)


def test_money_to_cents(tmp_path):
    amounts = [0.0, -0.0, 0.004, -0.004, -0.006, 0.01, -0.01, 1.5, -1.5, 1234567.891, -98765.4321, float("nan"),
               12345678901234.56, 100.0, -100.0, 0.125, 0.135]
    frame = pd.DataFrame({"amount": amounts, "plain": amounts})
    got = _written(tmp_path, frame, money=("amount",))
    assert got == _reference(frame, money=("amount",))
    col = [r.split(",")[0] for r in got.decode().split("\n")[1:-1]]
    assert col[:12] == ["0.00", "0.00", "0.00", "0.00", "-0.01", "0.01", "-0.01", "1.50", "-1.50", "1234567.89",
                        "-98765.43", ""]
    assert col[12] == "12345678901234.56" and col[13:15] == ["100.00", "-100.00"]
    assert money_field(np.array(amounts[:3])).tolist() == [b"0.00", b"0.00", b"0.00"]


def test_dates_bools_and_mixed_objects(tmp_path):
    days = np.array(["2027-03-15", "NaT", "1999-12-31", "2027-03-15"], dtype="datetime64[D]")
    frame = pd.DataFrame({
        "d": days.astype("datetime64[s]"),
        "b": [True, False, True, False],
        # True equals 1 in Python, but is written as a boolean; pd.NA and NaN are empty
        "o": np.array([True, 1, pd.NA, 1.0], dtype=object),
        "ts": np.array([pd.Timestamp("2026-01-02"), None, np.datetime64("2026-05-06"), float("nan")], dtype=object),
    })
    got = _written(tmp_path, frame)
    assert got == _reference(frame)
    assert got.decode().split("\n")[1:5] == ["2027-03-15,true,true,2026-01-02", ",false,1,",
                                             "1999-12-31,true,,2026-05-06", "2027-03-15,false,1,"]


def test_blocks_give_the_same_file(tmp_path, monkeypatch):
    rng = np.random.default_rng(7)
    n = 1000
    ids = np.repeat(np.array([f"G{i:04d}" for i in range(n // 10)], dtype=object), 10)
    ids[5] = "=odd,id"
    frame = pd.DataFrame({"grant_id": ids, "q": rng.integers(-10**6, 10**6, n),
                          "v": np.where(rng.random(n) < 0.1, np.nan, rng.normal(0, 1e4, n)),
                          "m": np.round(rng.normal(0, 1e6, n), 2)})
    whole = _written(tmp_path, frame, money=("m",))
    assert whole == _reference(frame, money=("m",))
    monkeypatch.setattr(C, "BLOCK_ROWS", 7)
    assert _written(tmp_path, frame, money=("m",)) == whole
    monkeypatch.setenv("GRANTVAL_PROCESSES", "2")  # the 143 blocks encoded in worker processes (grantval/workers.py)
    assert _written(tmp_path, frame, money=("m",)) == whole


def test_empty_frame_and_column_field(tmp_path):
    frame = pd.DataFrame({"a,b": pd.Series([], dtype=object), "c": pd.Series([], dtype=float)})
    assert _written(tmp_path, frame) == b'"a,b",c\n'
    assert column_field(pd.Series([1.0, -2.5, np.nan])).tolist() == [b"1", b"-2.5", b""]
    assert column_field(pd.Series(np.array([-3, 40], dtype=np.int64))).tolist() == [b"-3", b"40"]


@pytest.mark.parametrize("seed", [1, 2])
def test_random_frames_match_the_reference(tmp_path, seed):
    rng = np.random.default_rng(seed)
    n = 400
    pool = np.array(["a", "b,c", "=x", "", "Zoë", 'q"q', "-1", None, 3, 2.5, True], dtype=object)
    frame = pd.DataFrame({
        "obj": pool[rng.integers(0, len(pool), n)],
        "f": np.where(rng.random(n) < 0.2, np.round(rng.normal(0, 100, n)), rng.normal(0, 100, n)),
        "i": rng.integers(-(10**12), 10**12, n),
        "d": (np.datetime64("2020-01-01") + rng.integers(0, 3000, n).astype("timedelta64[D]")),
        "m": rng.normal(0, 1e5, n),
    })
    frame.loc[rng.random(n) < 0.1, "m"] = np.nan
    assert _written(tmp_path, frame, money=("m",)) == _reference(frame, money=("m",))
