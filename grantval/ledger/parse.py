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
from grantval.io.tables import RawTable
from grantval.ledger.schema import Column

_ISO = re.compile(r"^\d{4}-\d{2}-\d{2}$")
_NUMBER = re.compile(r"^[+-]?(\d+(\.\d*)?|\.\d+)([eE][+-]?\d+)?$")
#: characters no cell may hold: C0 controls (tab and line breaks included), DEL, C1 controls, and the
#: invisible format characters that make two equal-looking ids differ (zero-width space,
#: direction marks and overrides, word joiner and invisible operators, byte-order mark)
_FORBIDDEN = re.compile("[\x00-\x1f\x7f-\x9f\u200b\u200e\u200f\u202a-\u202e\u2060-\u2064\u2066-\u2069\ufeff]")


def _blank(v) -> bool:
    return v is None or (isinstance(v, str) and v.strip() == "") or (isinstance(v, float) and math.isnan(v))


def _text(v) -> str:
    if isinstance(v, float) and v.is_integer():
        return str(int(v))
    if isinstance(v, (_dt.date, _dt.datetime)):
        return v.isoformat()
    return str(v).strip()


def _forbidden(v) -> str | None:
    """The error words for a text cell holding control or invisible characters, else None."""
    if not isinstance(v, str):
        return None
    m = _FORBIDDEN.search(v)
    if m is None:
        return None
    from grantval.io.tables import invisible_characters

    chars = invisible_characters("".join(dict.fromkeys(_FORBIDDEN.findall(v))))
    return (f"holds control or invisible characters ({', '.join(chars)}; first at character {m.start() + 1}); "
            "remove them (no cell may hold a tab, line break, escape or zero-width character)")


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


class _Bool:
    """A boolean cell, kept apart from the numbers 0 and 1 when cells are grouped."""

    __slots__ = ("value",)

    def __init__(self, value: bool):
        self.value = value

    def __hash__(self):
        return hash(("bool", self.value))

    def __eq__(self, other):
        return isinstance(other, _Bool) and other.value == self.value


def _type_uniques(col: Column, uniques, blank_u) -> tuple[list, list]:
    """Typed value and error (or None) of each distinct cell of a column."""
    typed, errors = [], []
    for u, is_blank in zip(uniques, blank_u):
        u = u.value if isinstance(u, _Bool) else u
        bad = _forbidden(u)
        if is_blank or bad:
            typed.append(None if col.kind in ("text", "choice") else (np.nan if col.kind != "date" else np.datetime64("NaT")))
            errors.append(bad)
            continue
        if col.kind == "text":
            typed.append(_text(u))
            errors.append(None)
        elif col.kind == "choice":
            t = _text(u).lower()
            ok = t in col.choices
            typed.append(t if ok else None)
            errors.append(None if ok else f"{_text(u)!r} is not one of: {', '.join(col.choices)}")
        elif col.kind in ("number", "integer"):
            x, err = _number(u)
            if err is None and col.kind == "integer" and not float(x).is_integer():
                err = f"{_text(u)!r} must be a whole number"
            typed.append(np.nan if err else x)
            errors.append(err)
        else:
            x, err = _date(u)
            typed.append(np.datetime64("NaT") if err else x)
            errors.append(err)
    return typed, errors


def _type_texts(col: Column, uniques: list[str]) -> tuple[list, list, np.ndarray]:
    """Typed value, error (or None) and blankness of each distinct cell of a column of text cells (CSV).

    The same results as :func:`_type_uniques`, with the work that is the same
    for every cell done once over the column: one search for forbidden
    characters over all the text, text and choice values by list operations.
    """
    stripped = [u.strip() for u in uniques]
    blank_u = np.array([not t for t in stripped], dtype=bool)
    if _FORBIDDEN.search("".join(uniques)) is None:
        bad = [None] * len(uniques)
    else:
        bad = [_forbidden(u) for u in uniques]
    if col.kind not in ("text", "choice"):
        typed, errors = _type_uniques(col, stripped, blank_u | np.array([b is not None for b in bad], dtype=bool))
        return typed, [b if b is not None else e for b, e in zip(bad, errors)], blank_u
    skip = blank_u.tolist()
    if col.kind == "text":
        typed = [None if k or b else t for t, k, b in zip(stripped, skip, bad)]
        return typed, bad, blank_u
    lower = [t.lower() for t in stripped]
    ok = [t in col.choices for t in lower]
    typed = [t if g and not (k or b) else None for t, g, k, b in zip(lower, ok, skip, bad)]
    errors = [b if (k or b) else (None if g else f"{t!r} is not one of: {', '.join(col.choices)}")
              for t, g, k, b in zip(stripped, ok, skip, bad)]
    return typed, errors, blank_u


def _distinct(cells, sheet: bool) -> tuple[np.ndarray, list]:
    """Codes (-1 for a missing cell) and the distinct cells of one column."""
    if sheet and any(isinstance(c, bool) for c in cells):  # CSV cells are text: no booleans
        cells = [_Bool(c) if isinstance(c, bool) else c for c in cells]  # True must not merge with 1
    values = np.empty(len(cells), dtype=object)
    values[:] = cells
    codes, uniques = pd.factorize(values, use_na_sentinel=True)
    return codes, np.asarray(uniques, dtype=object).tolist()


def _typed_column(col: Column, cells, sheet: bool):
    """Codes, typed value and error of each distinct cell, and which distinct cells are blank."""
    codes, uniques = _distinct(cells, sheet)
    if all(type(u) is str for u in uniques):
        typed, errors, blank_u = _type_texts(col, uniques)
    else:
        blank_u = np.array([_blank(u) for u in uniques], dtype=bool)
        typed, errors = _type_uniques(col, uniques, blank_u)
    return codes, typed, errors, blank_u


def parse_table(table: RawTable, columns: tuple[Column, ...]) -> tuple[pd.DataFrame, list[Problem]]:
    """Type one raw table.

    Returns the typed frame (one column per schema column, present or not,
    plus ``_row``) and the problems found.  Rows with cell problems are kept,
    with the bad cells blank, so that later checks can still run on the
    rest; any error stops the run before anything is written.  Each distinct
    cell of a column is typed once and its result and problem spread back to
    every row holding it.
    """
    problems = list(table.problems)
    src = table.source
    known = {c.name for c in columns}
    for h in table.headers:
        if h and h not in known and not h.startswith("source_"):
            problems.append(Problem(src, 1, h, "unknown column; it is ignored", "warning"))
    data: dict[str, object] = {"_row": np.asarray(table.rows, dtype=np.int64)}
    rows = np.asarray(table.rows, dtype=np.int64)
    n = len(rows)
    for col in columns:
        present = col.name in table.headers
        if col.required and not present and table.headers:
            problems.append(Problem(src, 1, col.name, "required column is missing"))
        if present:
            codes, typed, errors, blank_u = _typed_column(col, table.column(col.name), "sheet" in src)
        else:  # every cell missing
            codes, typed, errors, blank_u = np.full(n, -1, dtype=np.int64), [], [], np.zeros(0, bool)
        blank = (codes < 0) | (blank_u[codes] if len(blank_u) else np.zeros(n, bool))
        if col.required and present and blank.any():
            for r in rows[blank]:
                problems.append(Problem(src, int(r), col.name, "is required and is empty"))
        bad = np.flatnonzero(np.array([e is not None for e in errors], dtype=bool))
        if bad.size:
            where = np.isin(codes, bad)
            for r, c in zip(rows[where], codes[where]):
                problems.append(Problem(src, int(r), col.name, errors[c]))
        data[col.name] = _spread(col, typed, codes, blank, present)
    frame = pd.DataFrame(data, copy=False)  # the columns are made here: no need to copy them into blocks
    frame.attrs["source"] = src
    frame.attrs["present"] = [c.name for c in columns if c.name in table.headers]
    return frame, problems


def _spread(col: Column, typed: list, codes: np.ndarray, blank: np.ndarray, present: bool):
    """The typed column: each row's distinct cell's value (missing cells as None, NaN or NaT), defaults filled."""
    if col.kind in ("text", "choice"):
        table_u = np.empty(len(typed) + 1, dtype=object)
        table_u[:-1] = typed
        vals = table_u[codes]
        if col.kind == "choice" and col.default is not None:
            vals = np.where(blank, col.default, vals)
        return pd.array(vals, dtype="object")
    if col.kind in ("number", "integer"):
        table_u = np.array(list(typed) + [np.nan], dtype=float)
        out = table_u[codes]
        if col.default is not None and not (col.required and present):
            out = np.where(blank, float(col.default), out)
        return out
    if col.kind == "date":
        table_u = np.array(list(typed) + [np.datetime64("NaT")], dtype="datetime64[D]")
        return table_u[codes]
    raise AssertionError(col.kind)  # pragma: no cover - schema error
