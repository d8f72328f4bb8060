"""Typing of raw ledger tables into pandas frames, collecting every problem.

Each frame keeps a ``_row`` column with the spreadsheet row number of each
record, so later checks can point at it.
"""

from __future__ import annotations

import datetime as _dt
import math
import re

import numpy as np
import pandas as pd

from grantval.errors import Problem
from grantval.io.read import RawTable
from grantval.ledger.schema import Column

_ISO = re.compile(r"^\d{4}-\d{2}-\d{2}$")
_NUMBER = re.compile(r"^[+-]?(\d+(\.\d*)?|\.\d+)([eE][+-]?\d+)?$")


def _blank(v) -> bool:
    return v is None or (isinstance(v, str) and v.strip() == "") or (isinstance(v, float) and math.isnan(v))


def _text(v) -> str:
    if isinstance(v, float) and v.is_integer():
        return str(int(v))
    if isinstance(v, (_dt.date, _dt.datetime)):
        return v.isoformat()
    return str(v).strip()


def _number(v):
    """Return (value, error words or None) for one non-blank cell."""
    if isinstance(v, bool):
        return None, "must be a number"
    if isinstance(v, (int, float)):
        if isinstance(v, float) and not math.isfinite(v):
            return None, "must be a finite number"
        return float(v), None
    if isinstance(v, (_dt.date, _dt.datetime)):
        return None, f"must be a number, not a date ({_text(v)})"
    s = str(v).strip()
    if _NUMBER.match(s):
        x = float(s)
        if not math.isfinite(x):
            return None, f"{s!r} is too large to be a number"
        return x, None
    if s.endswith("%") and _NUMBER.match(s[:-1].strip()):
        return None, f"{s!r} is a percentage; write rates and volatilities as decimals (35% is 0.35)"
    if re.match(r"^[+-]?\d{1,3}(,\d{3})+(\.\d*)?$", s):
        return None, f"{s!r} has thousands separators; write numbers without them"
    return None, f"{s!r} is not a number"


def _date(v):
    if isinstance(v, _dt.datetime):
        if v.time() != _dt.time(0):
            return None, f"{v.isoformat()} has a time of day; dates must be whole days"
        return np.datetime64(v.date(), "D"), None
    if isinstance(v, _dt.date):
        return np.datetime64(v, "D"), None
    if isinstance(v, (int, float)) and not isinstance(v, bool):
        return None, f"{v!r} is a number, not a date; format the cell as a date or write ISO text (2027-03-15)"
    s = str(v).strip()
    if _ISO.match(s):
        try:
            return np.datetime64(_dt.date.fromisoformat(s), "D"), None
        except ValueError:
            return None, f"{s!r} is not a calendar date"
    return None, f"{s!r} is not an ISO date (write 2027-03-15)"


def parse_table(table: RawTable, columns: tuple[Column, ...]) -> tuple[pd.DataFrame, list[Problem]]:
    """Type one raw table.

    Returns the typed frame (one column per schema column, present or not,
    plus ``_row``) and the problems found.  Rows with cell problems are kept,
    with the bad cells blank, so that later checks can still run on the
    rest; any error stops the run before anything is written.
    """
    problems = list(table.problems)
    src = table.source
    known = {c.name for c in columns}
    for h in table.headers:
        if h and h not in known and not h.startswith("source_"):
            problems.append(Problem(src, 1, h, "unknown column; it is ignored", "warning"))
    data: dict[str, object] = {"_row": np.asarray(table.rows, dtype=np.int64)}
    n = len(table.rows)
    for col in columns:
        present = col.name in table.headers
        if col.required and not present and table.headers:
            problems.append(Problem(src, 1, col.name, "required column is missing"))
        cells = table.column(col.name)
        if col.kind == "text":
            vals = [None if _blank(v) else _text(v) for v in cells]
            if col.required and present:
                for v, r in zip(vals, table.rows):
                    if v is None:
                        problems.append(Problem(src, r, col.name, "is required and is empty"))
            data[col.name] = pd.array(vals, dtype="object")
        elif col.kind == "choice":
            vals = []
            for v, r in zip(cells, table.rows):
                if _blank(v):
                    if col.required and present:
                        problems.append(Problem(src, r, col.name, "is required and is empty"))
                    vals.append(col.default)
                    continue
                s = _text(v).lower()
                if s not in col.choices:
                    problems.append(Problem(src, r, col.name,
                                            f"{_text(v)!r} is not one of: {', '.join(col.choices)}"))
                    vals.append(None)
                else:
                    vals.append(s)
            data[col.name] = pd.array(vals, dtype="object")
        elif col.kind in ("number", "integer"):
            out = np.full(n, np.nan)
            for i, (v, r) in enumerate(zip(cells, table.rows)):
                if _blank(v):
                    if col.required and present:
                        problems.append(Problem(src, r, col.name, "is required and is empty"))
                    elif col.default is not None:
                        out[i] = float(col.default)
                    continue
                x, err = _number(v)
                if err is None and col.kind == "integer" and not float(x).is_integer():
                    err = f"{_text(v)!r} must be a whole number"
                if err:
                    problems.append(Problem(src, r, col.name, err))
                else:
                    out[i] = x
            data[col.name] = out
        elif col.kind == "date":
            out = np.full(n, np.datetime64("NaT"), dtype="datetime64[D]")
            for i, (v, r) in enumerate(zip(cells, table.rows)):
                if _blank(v):
                    if col.required and present:
                        problems.append(Problem(src, r, col.name, "is required and is empty"))
                    continue
                x, err = _date(v)
                if err:
                    problems.append(Problem(src, r, col.name, err))
                else:
                    out[i] = x
            data[col.name] = out
        else:  # pragma: no cover - schema error
            raise AssertionError(col.kind)
    frame = pd.DataFrame(data)
    frame.attrs["source"] = src
    frame.attrs["present"] = [c.name for c in columns if c.name in table.headers]
    return frame, problems
