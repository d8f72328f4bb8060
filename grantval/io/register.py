"""The close register: one SQLite file that records every period close.

A *close* books every reporting period after the last closed period through a
date.  The register keeps, for each close, who closed what and with which
inputs (:class:`CloseRecord`), the amount booked per grant and period
(integers of cents) and the journal lines; a *reopen* marks the latest active
close superseded, with who, when and why.  Nothing is ever updated or deleted.

Guarantees (see ``docs/close-register.md``):

- a close or a reopen is one SQLite transaction (``BEGIN IMMEDIATE``, rollback
  journal, ``synchronous=FULL``): a crash, a kill or a full disk leaves the
  register as it was; a second writer waits for the busy timeout, then is
  refused; it re-reads the register once it holds the write lock, so no
  period is booked twice;
- every event (close or reopen) carries a SHA-256 digest chained to the
  previous event's; :meth:`Register.verify` recomputes them and reports any
  row changed, removed or added outside grantval;
- a file that is not a register, or a register of an incompatible schema
  version, is refused with a :class:`RegisterError` naming the file.

Only the standard library's :mod:`sqlite3` is used.
"""

from __future__ import annotations

import contextlib
import csv
import dataclasses
import datetime as _dt
import hashlib
import io
import json
import math
import os
import pathlib
import sqlite3
import tempfile
import uuid
from dataclasses import dataclass, field
from typing import Callable, Iterator, Mapping, Sequence

import numpy as np
import pandas as pd

from grantval import __version__
from grantval.errors import GrantvalError, InputError, OutputError
from grantval.io.write import csv_text

__all__ = [
    "SCHEMA_VERSION", "ROW_COLUMNS", "JOURNAL_COLUMNS", "RegisterError", "PeriodClosedError",
    "CloseRecord", "Close", "Reopen", "Register", "open_register", "current_user",
]

#: schema version this grantval writes (stored as ``PRAGMA user_version``)
SCHEMA_VERSION = 1
#: ``PRAGMA application_id`` of a register: the bytes "GVCL"
APPLICATION_ID = 0x4756434C
APPLICATION = "grantval close register"
#: seconds a writer waits for another writer before it is refused
DEFAULT_TIMEOUT = 60.0
#: columns of the ``rows`` frame given to :meth:`Register.book`
ROW_COLUMNS = ("grant_id", "group", "period_end", "booked_cents", "catch_up_cents")
#: columns of the ``journal`` frame given to :meth:`Register.book`
JOURNAL_COLUMNS = ("period_end", "account", "group", "debit_cents", "credit_cents", "description")
TABLES = ("meta", "closes", "booked", "journal", "reopens")
_APPEND_ONLY = ("closes", "booked", "journal", "reopens")
_ENV_USER = ("USER", "LOGNAME", "USERNAME")
_TIME_FORMAT = "%Y-%m-%dT%H:%M:%S.%fZ"
_INT64 = (-(2**63), 2**63 - 1)

#: rows inserted per statement; tests lower it so the hook runs between inserts
_CHUNK = 5000
#: test hook, called as ``_hook(stage, rows_done)`` between the inserts of a close
#: (stages "booked", "journal", "commit") and before a reopen commits ("reopen")
_hook: Callable[[str, int], None] | None = None
#: upgrade steps: ``_MIGRATIONS[v](con)`` turns schema ``v`` into ``v + 1``
_MIGRATIONS: dict[int, Callable[[sqlite3.Connection], None]] = {}


class RegisterError(GrantvalError):
    """The close register cannot be read or written, or refuses the request."""


class PeriodClosedError(RegisterError):
    """A period of a new close is already closed by an active close.

    Attributes
    ----------
    close_id : int
        The active close that booked (or closed past) the period.
    through : datetime.date
        That close's through date.
    period_end : datetime.date
        The earliest period end of the new close that is already closed.
    """

    def __init__(self, message: str, close_id: int, through: _dt.date, period_end: _dt.date):
        super().__init__(message)
        self.close_id = close_id
        self.through = through
        self.period_end = period_end


# --------------------------------------------------------------------- records


@dataclass(frozen=True)
class CloseRecord:
    """What a close is, given to :meth:`Register.book`.

    Parameters
    ----------
    through : date-like
        The date the close books through (``datetime.date``, ``datetime64``,
        ``Timestamp`` or ISO text).
    period_ends : sequence of date-like
        Last days of the periods booked, strictly increasing, none after
        ``through``; at least one.
    ledger_digests : mapping of str to str
        Ledger file name -> SHA-256 hex digest of its bytes.
    policies, options : mapping
        Accounting policies and command options in force (JSON-able values;
        dates, numpy scalars and paths are turned into text or numbers).
    tool_version : str
        grantval version that made the close (default: this one).
    closed_at : datetime.datetime, optional
        When (timezone-aware); default now, UTC.
    user : str, optional
        Who; default the first of USER, LOGNAME, USERNAME set in the
        environment (``""`` records nobody).
    """

    through: object
    period_ends: Sequence
    ledger_digests: Mapping[str, str] = field(default_factory=dict)
    policies: Mapping = field(default_factory=dict)
    options: Mapping = field(default_factory=dict)
    tool_version: str = __version__
    closed_at: _dt.datetime | None = None
    user: str | None = None


@dataclass(frozen=True)
class Reopen:
    """A reopen event: the close it superseded, when, by whom and why."""

    reopen_id: int
    close_id: int
    reopened_at: _dt.datetime
    user: str | None
    reason: str
    digest: str


@dataclass(frozen=True)
class Close:
    """A close as stored in the register.

    ``status`` is ``"booked"`` while the close is active and ``"superseded"``
    once reopened (``reopen`` then holds the :class:`Reopen`).  ``row_count``
    and ``journal_count`` are the numbers of booked rows and journal lines.
    """

    close_id: int
    closed_at: _dt.datetime
    through: _dt.date
    period_ends: tuple[_dt.date, ...]
    user: str | None
    tool_version: str
    ledger_digests: dict
    policies: dict
    options: dict
    row_count: int
    journal_count: int
    digest: str
    status: str
    reopen: Reopen | None


def current_user(environ: Mapping[str, str] | None = None) -> str | None:
    """The user's name from USER, LOGNAME or USERNAME (first one set), or None."""
    env = os.environ if environ is None else environ
    for key in _ENV_USER:
        if env.get(key):
            return env[key]
    return None


# ----------------------------------------------------------- value normalising


def _day(value, name: str) -> str:
    """ISO text of one date-like value; InputError naming ``name`` otherwise."""
    if value is None or isinstance(value, (bool, int, float, np.integer, np.floating)):
        raise InputError(f"{name} must be a date; got {value!r}")
    try:
        d = np.datetime64(value, "D")
    except (ValueError, TypeError) as err:
        raise InputError(f"{name} must be a date; got {value!r}") from err
    if np.isnat(d):
        raise InputError(f"{name} must be a date; got a missing value")
    return str(d)


def _utc_text(when: _dt.datetime | None, name: str) -> str:
    if when is None:
        when = _dt.datetime.now(_dt.timezone.utc)
    if not isinstance(when, _dt.datetime):
        raise InputError(f"{name} must be a datetime; got {when!r}")
    if when.tzinfo is None or when.utcoffset() is None:
        raise InputError(f"{name} must be timezone-aware (for example UTC); got {when.isoformat()}")
    return when.astimezone(_dt.timezone.utc).strftime(_TIME_FORMAT)


def _parse_time(text: str) -> _dt.datetime:
    return _dt.datetime.strptime(text, _TIME_FORMAT).replace(tzinfo=_dt.timezone.utc)


def _plain(value, where: str):
    """``value`` as JSON-able plain Python; InputError naming ``where`` otherwise."""
    if value is None or isinstance(value, (bool, str, int)):
        return value
    if isinstance(value, np.bool_):
        return bool(value)
    if isinstance(value, np.integer):
        return int(value)
    if isinstance(value, (float, np.floating)):
        if not math.isfinite(value):
            raise InputError(f"{where} must be a finite number; got {value!r}")
        return float(value)
    if isinstance(value, (_dt.date, np.datetime64)):
        return value.isoformat() if isinstance(value, _dt.date) else _day(value, where)
    if isinstance(value, pathlib.PurePath):
        return str(value)
    if dataclasses.is_dataclass(value) and not isinstance(value, type):
        value = dataclasses.asdict(value)
    if isinstance(value, Mapping):
        out = {}
        for k, v in value.items():
            if not isinstance(k, str):
                raise InputError(f"{where} keys must be text; got {k!r}")
            out[k] = _plain(v, f"{where}[{k!r}]")
        return out
    if isinstance(value, (list, tuple)):
        return [_plain(v, f"{where}[{i}]") for i, v in enumerate(value)]
    raise InputError(f"{where} holds a {type(value).__name__}, which the register cannot store; use text, numbers, dates, lists or dicts")


_ENCODER = json.JSONEncoder(sort_keys=True, separators=(",", ":"), ensure_ascii=False, allow_nan=False)


def _canonical(value) -> str:
    """The canonical JSON text of a plain value (sorted keys, no spaces, UTF-8)."""
    return _ENCODER.encode(value)


def _sha(text: str) -> str:
    return hashlib.sha256(text.encode("utf-8")).hexdigest()


def _record_columns(close: CloseRecord) -> dict:
    """The stored text of a close record's fields (checked)."""
    if not isinstance(close, CloseRecord):
        raise InputError(f"close must be a CloseRecord; got {type(close).__name__}")
    ends = [_day(d, f"close.period_ends[{i}]") for i, d in enumerate(close.period_ends)]
    through = _day(close.through, "close.through")
    if not ends:
        raise InputError("close.period_ends is empty: a close books at least one period")
    if any(b <= a for a, b in zip(ends, ends[1:])):
        raise InputError(f"close.period_ends must be strictly increasing; got {', '.join(ends)}")
    if ends[-1] > through:
        raise InputError(f"close.period_ends: the period ending {ends[-1]} is after the through date {through}")
    digests = _plain(dict(close.ledger_digests), "close.ledger_digests")
    for name, dig in digests.items():
        if not (isinstance(dig, str) and len(dig) == 64 and all(c in "0123456789abcdef" for c in dig)):
            raise InputError(f"close.ledger_digests[{name!r}] must be a lower-case SHA-256 hex digest; got {dig!r}")
    if not isinstance(close.tool_version, str) or not close.tool_version:
        raise InputError(f"close.tool_version must be non-empty text; got {close.tool_version!r}")
    user = current_user() if close.user is None else close.user
    if not isinstance(user, (str, type(None))):
        raise InputError(f"close.user must be text; got {user!r}")
    return {
        "closed_at": _utc_text(close.closed_at, "close.closed_at"),
        "through": through,
        "period_ends": _canonical(ends),
        "closed_by": user or None,
        "tool_version": close.tool_version,
        "ledger_digests": _canonical(digests),
        "policies": _canonical(_plain(close.policies, "close.policies")),
        "options": _canonical(_plain(close.options, "close.options")),
    }


def _frame(frame, columns: Sequence[str], name: str) -> pd.DataFrame:
    if not isinstance(frame, pd.DataFrame):
        raise InputError(f"{name} must be a DataFrame with columns {', '.join(columns)}; got {type(frame).__name__}")
    missing = [c for c in columns if c not in frame.columns]
    extra = [str(c) for c in frame.columns if c not in columns]
    if missing or extra:
        parts = ([f"missing {', '.join(missing)}"] if missing else []) + ([f"unexpected {', '.join(extra)}"] if extra else [])
        raise InputError(f"{name} must have the columns {', '.join(columns)}: {'; '.join(parts)}")
    return frame


def _cents(series: pd.Series, name: str, nonnegative: bool = False) -> list[int]:
    """Integer cents of one column as Python ints; floats and booleans are refused."""
    arr = series.to_numpy()
    if arr.dtype.kind in "iu":
        values = [int(v) for v in arr.tolist()]
    elif arr.dtype == object and all(isinstance(v, (int, np.integer)) and not isinstance(v, (bool, np.bool_)) for v in arr):
        values = [int(v) for v in arr]
    else:
        raise InputError(f"{name} must hold whole cents as integers; got values of type {arr.dtype}")
    if values and not (_INT64[0] <= min(values) and max(values) <= _INT64[1]):
        raise InputError(f"{name} holds an amount outside the 64-bit integer range")
    if nonnegative and values and min(values) < 0:
        raise InputError(f"{name} must not be negative; found {min(values)}")
    return values


def _texts(series: pd.Series, name: str, required: bool) -> list[str | None]:
    out: list[str | None] = []
    for i, v in enumerate(series.tolist()):
        if v is None or v is pd.NA or (isinstance(v, float) and math.isnan(v)):
            if required:
                raise InputError(f"{name} is missing in row {i + 1}")
            out.append(None)
        elif isinstance(v, str):
            if required and not v:
                raise InputError(f"{name} is empty in row {i + 1}")
            out.append(str(v))
        else:
            raise InputError(f"{name} must be text; row {i + 1} holds {v!r}")
    return out


def _days(series: pd.Series, name: str, allowed: Sequence[str]) -> list[str]:
    arr = series.to_numpy()
    if arr.dtype.kind in "iufb":
        raise InputError(f"{name} must hold dates; got values of type {arr.dtype}")
    try:
        days = np.asarray(arr, dtype="datetime64[D]")
    except (ValueError, TypeError) as err:
        raise InputError(f"{name} must hold dates: {err}") from err
    if np.isnat(days).any():
        raise InputError(f"{name} is missing in row {int(np.flatnonzero(np.isnat(days))[0]) + 1}")
    text = [str(d) for d in np.datetime_as_string(days, unit="D")]
    outside = sorted(set(text) - set(allowed))
    if outside:
        raise InputError(f"{name}: {outside[0]} is not one of the close's period ends ({', '.join(allowed)})")
    return text


def _row_tuples(rows, ends: Sequence[str]) -> list[tuple]:
    """The booked rows as (grant_id, group, period_end, booked, catch_up), checked."""
    rows = _frame(rows, ROW_COLUMNS, "rows")
    gid = _texts(rows["grant_id"], "rows.grant_id", True)
    grp = _texts(rows["group"], "rows.group", False)
    pe = _days(rows["period_end"], "rows.period_end", ends)
    booked = _cents(rows["booked_cents"], "rows.booked_cents")
    catch = _cents(rows["catch_up_cents"], "rows.catch_up_cents")
    seen: set[tuple[str, str]] = set()
    for key in zip(gid, pe):
        if key in seen:
            raise InputError(f"rows: grant {key[0]} appears twice for the period ending {key[1]}")
        seen.add(key)
    return list(zip(gid, grp, pe, booked, catch))


def _journal_tuples(journal, ends: Sequence[str]) -> list[tuple]:
    """Journal lines as (line_no, period_end, account, group, debit, credit, description), checked."""
    journal = _frame(journal, JOURNAL_COLUMNS, "journal")
    pe = _days(journal["period_end"], "journal.period_end", ends)
    acct = _texts(journal["account"], "journal.account", True)
    grp = _texts(journal["group"], "journal.group", False)
    debit = _cents(journal["debit_cents"], "journal.debit_cents", nonnegative=True)
    credit = _cents(journal["credit_cents"], "journal.credit_cents", nonnegative=True)
    desc = [d or "" for d in _texts(journal["description"], "journal.description", False)]
    balance: dict[str, int] = {}
    for p, d, c in zip(pe, debit, credit):
        balance[p] = balance.get(p, 0) + d - c
    unbalanced = [p for p in sorted(balance) if balance[p]]
    if unbalanced:
        p = unbalanced[0]
        raise InputError(f"journal: the lines for the period ending {p} do not balance (debits exceed credits by {balance[p]} cents)")
    return [(i + 1, *t) for i, t in enumerate(zip(pe, acct, grp, debit, credit, desc))]


# ---------------------------------------------------------------------- schema

_DATE_CHECK = "GLOB '[0-9][0-9][0-9][0-9]-[0-9][0-9]-[0-9][0-9]'"
_SCHEMA = f"""
CREATE TABLE meta (
    key TEXT PRIMARY KEY NOT NULL,
    value TEXT NOT NULL
);
CREATE TABLE closes (
    close_id INTEGER PRIMARY KEY,
    seq INTEGER NOT NULL UNIQUE CHECK (typeof(seq) = 'integer' AND seq > 0),
    closed_at TEXT NOT NULL,
    through TEXT NOT NULL CHECK (through {_DATE_CHECK}),
    period_ends TEXT NOT NULL,
    closed_by TEXT,
    tool_version TEXT NOT NULL,
    ledger_digests TEXT NOT NULL,
    policies TEXT NOT NULL,
    options TEXT NOT NULL,
    row_count INTEGER NOT NULL CHECK (typeof(row_count) = 'integer'),
    journal_count INTEGER NOT NULL CHECK (typeof(journal_count) = 'integer'),
    rows_digest TEXT NOT NULL,
    journal_digest TEXT NOT NULL,
    prev_digest TEXT NOT NULL,
    digest TEXT NOT NULL UNIQUE
);
CREATE TABLE booked (
    close_id INTEGER NOT NULL REFERENCES closes (close_id) DEFERRABLE INITIALLY DEFERRED,
    grant_id TEXT NOT NULL,
    "group" TEXT,
    period_end TEXT NOT NULL CHECK (period_end {_DATE_CHECK}),
    booked_cents INTEGER NOT NULL CHECK (typeof(booked_cents) = 'integer'),
    catch_up_cents INTEGER NOT NULL CHECK (typeof(catch_up_cents) = 'integer'),
    PRIMARY KEY (close_id, period_end, grant_id)
) WITHOUT ROWID;
CREATE TABLE journal (
    close_id INTEGER NOT NULL REFERENCES closes (close_id) DEFERRABLE INITIALLY DEFERRED,
    line_no INTEGER NOT NULL CHECK (typeof(line_no) = 'integer' AND line_no > 0),
    period_end TEXT NOT NULL CHECK (period_end {_DATE_CHECK}),
    account TEXT NOT NULL,
    "group" TEXT,
    debit_cents INTEGER NOT NULL CHECK (typeof(debit_cents) = 'integer' AND debit_cents >= 0),
    credit_cents INTEGER NOT NULL CHECK (typeof(credit_cents) = 'integer' AND credit_cents >= 0),
    description TEXT NOT NULL,
    PRIMARY KEY (close_id, line_no)
) WITHOUT ROWID;
CREATE TABLE reopens (
    reopen_id INTEGER PRIMARY KEY,
    seq INTEGER NOT NULL UNIQUE CHECK (typeof(seq) = 'integer' AND seq > 0),
    close_id INTEGER NOT NULL UNIQUE REFERENCES closes (close_id) DEFERRABLE INITIALLY DEFERRED,
    reopened_at TEXT NOT NULL,
    reopened_by TEXT,
    reason TEXT NOT NULL CHECK (length(trim(reason)) > 0),
    prev_digest TEXT NOT NULL,
    digest TEXT NOT NULL UNIQUE
);
""" + "".join(
    f"""CREATE TRIGGER {t}_no_{op} BEFORE {op.upper()} ON {t}
BEGIN SELECT RAISE(ABORT, 'the grantval close register is append-only: {t} rows are never changed or deleted'); END;
"""
    for t in _APPEND_ONLY
    for op in ("update", "delete")
)
_TRIGGERS = tuple(f"{t}_no_{op}" for t in _APPEND_ONLY for op in ("update", "delete"))
_CLOSE_FIELDS = ("close_id", "seq", "closed_at", "through", "period_ends", "closed_by", "tool_version",
                 "ledger_digests", "policies", "options", "row_count", "journal_count")
_REOPEN_FIELDS = ("reopen_id", "seq", "close_id", "reopened_at", "reopened_by", "reason")


def _init_schema(con: sqlite3.Connection) -> None:
    """Create an empty register (schema, meta rows, version) in one transaction."""
    con.executescript("BEGIN IMMEDIATE;\n" + _SCHEMA)
    meta = {
        "application": APPLICATION,
        "register_id": uuid.uuid4().hex,
        "created_at": _utc_text(None, "created_at"),
        "created_by_version": __version__,
        "reader_min_schema": str(SCHEMA_VERSION),
        "writer_min_schema": str(SCHEMA_VERSION),
        "event_count": "0",
    }
    con.executemany("INSERT INTO meta (key, value) VALUES (?, ?)", sorted(meta.items()))
    con.execute(f"PRAGMA application_id = {APPLICATION_ID}")
    con.execute(f"PRAGMA user_version = {SCHEMA_VERSION}")
    con.execute("COMMIT")


# --------------------------------------------------------------------- digests


def _genesis(register_id: str) -> str:
    """The 'previous digest' of a register's first event."""
    return _sha(_canonical([APPLICATION, "genesis", register_id]))


def _plain_cursor(con: sqlite3.Connection, sql: str, args: tuple = ()) -> sqlite3.Cursor:
    """A cursor yielding plain tuples (much faster than sqlite3.Row for bulk reads)."""
    cur = con.cursor()
    cur.row_factory = None
    return cur.execute(sql, args)


def _stream_digest(cursor) -> tuple[str, int]:
    """SHA-256 over the canonical JSON lines of a query's rows, and the row count."""
    h = hashlib.sha256()
    n = 0
    encode = _ENCODER.encode
    while batch := cursor.fetchmany(10_000):
        h.update("".join([encode(list(row)) + "\n" for row in batch]).encode("utf-8"))
        n += len(batch)
    return h.hexdigest(), n


def _rows_digest(con: sqlite3.Connection, close_id: int) -> tuple[str, int]:
    return _stream_digest(_plain_cursor(
        con, 'SELECT grant_id, "group", period_end, booked_cents, catch_up_cents FROM booked '
        "WHERE close_id = ? ORDER BY period_end, grant_id", (close_id,)))


def _journal_digest(con: sqlite3.Connection, close_id: int) -> tuple[str, int]:
    return _stream_digest(_plain_cursor(
        con, 'SELECT line_no, period_end, account, "group", debit_cents, credit_cents, description FROM journal '
        "WHERE close_id = ? ORDER BY line_no", (close_id,)))


def _close_digest(record: Mapping, rows_digest: str, journal_digest: str, prev: str) -> str:
    fields = {k: record[k] for k in _CLOSE_FIELDS}
    return _sha(_canonical(["close", fields, rows_digest, journal_digest, prev]))


def _reopen_digest(record: Mapping, prev: str) -> str:
    return _sha(_canonical(["reopen", {k: record[k] for k in _REOPEN_FIELDS}, prev]))


def _expected_schema() -> dict[str, str]:
    """Name -> SQL of every table, index and trigger a fresh register holds."""
    con = sqlite3.connect(":memory:", isolation_level=None)
    try:
        con.executescript(_SCHEMA)
        return {name: sql for name, sql in con.execute("SELECT name, sql FROM sqlite_master WHERE sql IS NOT NULL")}
    finally:
        con.close()


def _call_hook(stage: str, done: int) -> None:
    if _hook is not None:
        _hook(stage, done)


def _insert(con: sqlite3.Connection, sql: str, rows: list[tuple], stage: str) -> None:
    """Insert ``rows`` in chunks of ``_CHUNK``, calling the test hook after each."""
    for start in range(0, len(rows), _CHUNK):
        con.executemany(sql, rows[start : start + _CHUNK])
        _call_hook(stage, min(start + _CHUNK, len(rows)))


# ----------------------------------------------------------------- opening


def open_register(path, create: bool = False, readonly: bool = False, timeout: float = DEFAULT_TIMEOUT) -> "Register":
    """Open the close register at ``path``.

    Parameters
    ----------
    path : str or Path
        The register file (by convention ``*.gvreg``; any name works).
    create : bool
        Create an empty register when ``path`` does not exist.  An existing
        file is never replaced: it is opened, and refused if it is not a
        register.
    readonly : bool
        Open without write access (:meth:`Register.book` and
        :meth:`Register.reopen` are refused).
    timeout : float
        Seconds a close waits for another process's close before it is
        refused.

    Returns
    -------
    Register

    Raises
    ------
    RegisterError
        The file does not exist (and ``create`` is false), is not a
        grantval close register, or has a schema this grantval cannot read.
    """
    path = pathlib.Path(path)
    if not path.exists():
        if not create:
            raise RegisterError(f"the close register {path} does not exist")
        if readonly:
            raise InputError("open_register: create and readonly cannot both be true")
        _create_file(path)
    return Register(path, readonly=readonly, timeout=timeout)


def _umask() -> int:
    """The process's file-mode creation mask."""
    with contextlib.suppress(OSError, ValueError):
        for line in pathlib.Path("/proc/self/status").read_text().splitlines():
            if line.startswith("Umask:"):
                return int(line.split()[1], 8)
    mask = os.umask(0o022)
    os.umask(mask)
    return mask


def _create_file(path: pathlib.Path) -> None:
    """Build an empty register beside ``path`` and link it into place unless one appeared meanwhile."""
    parent = path.parent if str(path.parent) else pathlib.Path(".")
    if not parent.is_dir():
        raise RegisterError(f"the folder {parent} for the close register {path.name} does not exist")
    try:
        fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".new", dir=parent)
    except OSError as err:
        raise RegisterError(f"cannot create the close register {path}: {err.strerror}") from err
    os.close(fd)
    try:
        os.chmod(tmp, 0o666 & ~_umask())
        con = sqlite3.connect(tmp, isolation_level=None)
        try:
            _init_schema(con)
        finally:
            con.close()
        try:
            os.link(tmp, path)  # fails if another process created the register first
        except FileExistsError:
            pass
        except OSError:  # file systems without hard links
            if not path.exists():
                os.replace(tmp, path)
    except (OSError, sqlite3.Error) as err:
        raise RegisterError(f"cannot create the close register {path}: {err}") from err
    finally:
        with contextlib.suppress(OSError):
            os.unlink(tmp)


def _check_file(path: pathlib.Path) -> None:
    """Refuse, by its first bytes, a file that cannot be a register."""
    if path.is_dir():
        raise RegisterError(f"{path} is a folder, not a grantval close register")
    try:
        with open(path, "rb") as f:
            head = f.read(100)
    except OSError as err:
        raise RegisterError(f"cannot read the close register {path}: {err.strerror}") from err
    if not head:
        raise RegisterError(f"{path} is an empty file, not a grantval close register")
    if not head.startswith(b"SQLite format 3\x00"):
        try:
            head.decode("utf-8")
            kind = "it is a text file" if b"\x00" not in head else "it is not an SQLite database"
        except UnicodeDecodeError:
            kind = "it is not an SQLite database"
        raise RegisterError(f"{path} is not a grantval close register ({kind})")


def _connect(path: pathlib.Path, readonly: bool, timeout: float) -> sqlite3.Connection:
    uri = path.resolve().as_uri() + ("?mode=ro" if readonly else "?mode=rw")
    con = sqlite3.connect(uri, uri=True, timeout=timeout, isolation_level=None)
    con.row_factory = sqlite3.Row
    con.execute("PRAGMA foreign_keys = ON")
    con.execute("PRAGMA synchronous = FULL")
    return con


# -------------------------------------------------------------------- register


class Register:
    """An open close register (use :func:`open_register`).

    Attributes
    ----------
    path : Path
        The register file.
    schema_version : int
        Schema version of the file.
    writable : bool
        Whether :meth:`book` and :meth:`reopen` may write.

    A Register is a context manager; :meth:`close_file` releases the file.
    Reads are consistent snapshots; writes are single transactions.
    """

    def __init__(self, path, readonly: bool = False, timeout: float = DEFAULT_TIMEOUT):
        self.path = pathlib.Path(path)
        _check_file(self.path)
        try:
            self._con = _connect(self.path, readonly, timeout)
        except sqlite3.Error as err:
            raise RegisterError(f"cannot open the close register {self.path}: {err}") from err
        try:
            self._identify(readonly)
        except BaseException:
            self._con.close()
            raise

    # -- identity and version

    def _identify(self, readonly: bool) -> None:
        try:
            app = self._con.execute("PRAGMA application_id").fetchone()[0]
            version = self._con.execute("PRAGMA user_version").fetchone()[0]
            tables = {r[0] for r in self._con.execute("SELECT name FROM sqlite_master WHERE type = 'table'")}
        except sqlite3.DatabaseError as err:
            raise RegisterError(f"{self.path} is not a grantval close register ({err})") from err
        if app != APPLICATION_ID or "meta" not in tables:
            raise RegisterError(f"{self.path} is an SQLite database but not a grantval close register")
        meta = self._meta()
        if meta.get("application") != APPLICATION or version < 1:
            raise RegisterError(f"{self.path} is not a complete grantval close register (its identity is missing)")
        self.schema_version = version
        self.writable = not readonly
        self._why_readonly = "it was opened read-only"
        if version > SCHEMA_VERSION:
            self._check_newer(version, meta)
        elif version < SCHEMA_VERSION:
            self._upgrade(version, readonly)

    def _meta(self) -> dict[str, str]:
        try:
            return {k: v for k, v in self._con.execute("SELECT key, value FROM meta")}
        except sqlite3.DatabaseError as err:
            raise RegisterError(f"{self.path} is not a grantval close register (no readable meta table: {err})") from err

    def _check_newer(self, version: int, meta: Mapping[str, str]) -> None:
        """A register from a newer grantval: read it if it says we can; write only if it says so too."""
        def need(key: str) -> int:
            try:
                return int(meta[key])
            except (KeyError, ValueError):
                return version
        newer = f"{self.path} was written by a newer grantval (register schema {version}; this grantval {__version__} knows schema {SCHEMA_VERSION})"
        if need("reader_min_schema") > SCHEMA_VERSION:
            raise RegisterError(f"{newer} and cannot be read by this version: upgrade grantval")
        if need("writer_min_schema") > SCHEMA_VERSION:
            self.writable = False
            self._why_readonly = f"{newer}: this version may read it but not write to it; upgrade grantval"

    def _upgrade(self, version: int, readonly: bool) -> None:
        """Bring an older register to SCHEMA_VERSION in one transaction (needs write access)."""
        older = f"{self.path} was written by an older grantval (register schema {version}; this grantval uses schema {SCHEMA_VERSION})"
        missing = [v for v in range(version, SCHEMA_VERSION) if v not in _MIGRATIONS]
        if missing:
            raise RegisterError(f"{older}, and this version has no upgrade from schema {missing[0]}")
        if readonly:
            raise RegisterError(f"{older}; open it with write access once to upgrade it")
        with self._transaction("upgraded") as con:
            for v in range(version, SCHEMA_VERSION):
                _MIGRATIONS[v](con)
            con.execute(f"PRAGMA user_version = {SCHEMA_VERSION}")
        self.schema_version = SCHEMA_VERSION

    # -- plumbing

    def close_file(self) -> None:
        """Release the register file; the object cannot be used afterwards."""
        self._con.close()

    def __enter__(self) -> "Register":
        return self

    def __exit__(self, *exc) -> None:
        self.close_file()

    def __repr__(self) -> str:
        return f"Register({str(self.path)!r}, schema {self.schema_version})"

    def _error(self, err: sqlite3.Error, what: str) -> RegisterError:
        text = str(err)
        name = getattr(err, "sqlite_errorname", "")
        if "locked" in text or "busy" in text or name.startswith("SQLITE_BUSY"):
            return RegisterError(f"the close register {self.path} is busy: another process is writing to it (or reading it); "
                                 f"nothing was {what}; try again when it has finished")
        if "full" in text or name.startswith("SQLITE_FULL"):
            return RegisterError(f"the close register {self.path} could not be written: the disk is full; "
                                 f"nothing was {what} and the register is as it was")
        return RegisterError(f"the close register {self.path}: {text}; nothing was {what} and the register is as it was")

    @contextlib.contextmanager
    def _transaction(self, what: str) -> Iterator[sqlite3.Connection]:
        """One write transaction, taken with BEGIN IMMEDIATE (waits up to the busy timeout)."""
        con = self._con
        try:
            con.execute("BEGIN IMMEDIATE")
        except sqlite3.Error as err:
            raise self._error(err, what) from err
        try:
            yield con
            con.execute("COMMIT")
        except BaseException as err:
            with contextlib.suppress(sqlite3.Error):
                con.execute("ROLLBACK")
            if isinstance(err, sqlite3.Error):
                raise self._error(err, what) from err
            raise

    @contextlib.contextmanager
    def _snapshot(self) -> Iterator[sqlite3.Connection]:
        """One read transaction: every query inside sees the same state."""
        con = self._con
        try:
            con.execute("BEGIN")
            try:
                yield con
            finally:
                con.execute("COMMIT")
        except sqlite3.Error as err:
            raise RegisterError(f"cannot read the close register {self.path}: {err}") from err

    def _require_writable(self, what: str) -> None:
        if not self.writable:
            raise RegisterError(f"cannot {what} in {self.path}: {self._why_readonly}")

    # -- reading

    def closes(self) -> list[Close]:
        """Every close, oldest first, with its status and reopen (if any)."""
        with self._snapshot() as con:
            rows = con.execute(
                "SELECT c.*, r.reopen_id, r.reopened_at, r.reopened_by, r.reason, r.digest AS reopen_digest "
                "FROM closes c LEFT JOIN reopens r ON r.close_id = c.close_id ORDER BY c.close_id").fetchall()
        return [_close_of(r) for r in rows]

    def last_close(self) -> Close | None:
        """The latest active (not superseded) close, or None."""
        active = [c for c in self.closes() if c.status == "booked"]
        return active[-1] if active else None

    def head_digest(self) -> str | None:
        """Digest of the latest event (close or reopen): print it to anchor the register elsewhere."""
        with self._snapshot() as con:
            row = _head_row(con)
        return None if row is None else row["digest"]

    def booked(self, through=None, close_id: int | None = None) -> pd.DataFrame:
        """Booked rows of the active closes (or of one close), by period end then grant.

        Parameters
        ----------
        through : date-like, optional
            Only periods ending on or before this date.
        close_id : int, optional
            Only this close's rows, whether active or superseded.

        Returns
        -------
        DataFrame
            close_id (int64), grant_id, group (text, missing as NA),
            period_end (datetime64), booked_cents, catch_up_cents (int64, cents).
        """
        sql = 'SELECT close_id, grant_id, "group", period_end, booked_cents, catch_up_cents FROM booked WHERE '
        if close_id is None:
            sql += "close_id NOT IN (SELECT close_id FROM reopens)"
            args: tuple = ()
        else:
            sql += "close_id = ?"
            args = (int(close_id),)
        if through is not None:
            sql += " AND period_end <= ?"
            args += (_day(through, "through"),)
        with self._snapshot() as con:
            if close_id is not None:
                self._require_close(con, close_id)
            rows = _plain_cursor(con, sql + " ORDER BY period_end, grant_id", args).fetchall()
        return _table(rows, ("close_id", "grant_id", "group", "period_end", "booked_cents", "catch_up_cents"))

    def cumulative_booked(self, through=None) -> pd.DataFrame:
        """Per grant, the totals booked by the active closes (through a date if given).

        Returns
        -------
        DataFrame, one row per grant (sorted by grant_id)
            grant_id; group (of the grant's latest booked period);
            booked_cents, catch_up_cents (int64 sums, cents); periods (rows
            summed); last_period_end (datetime64).
        """
        # SQLite: with exactly one max() aggregate, the bare column "group" comes from the row holding the max
        sql = ('SELECT grant_id, "group", SUM(booked_cents), SUM(catch_up_cents), COUNT(*), MAX(period_end) '
               "FROM booked WHERE close_id NOT IN (SELECT close_id FROM reopens)")
        args: tuple = ()
        if through is not None:
            sql += " AND period_end <= ?"
            args = (_day(through, "through"),)
        with self._snapshot() as con:
            rows = _plain_cursor(con, sql + " GROUP BY grant_id ORDER BY grant_id", args).fetchall()
        return _table(rows, ("grant_id", "group", "booked_cents", "catch_up_cents", "periods", "last_period_end"))

    def journal(self, close_id: int | None = None) -> pd.DataFrame:
        """Journal lines of the active closes, or of one close (active or superseded).

        Returns
        -------
        DataFrame
            close_id, line_no, period_end (datetime64), account, group,
            debit_cents, credit_cents (int64, cents), description.
        """
        sql = ('SELECT close_id, line_no, period_end, account, "group", debit_cents, credit_cents, description '
               "FROM journal WHERE ")
        with self._snapshot() as con:
            if close_id is None:
                rows = _plain_cursor(con, sql + "close_id NOT IN (SELECT close_id FROM reopens) ORDER BY close_id, line_no").fetchall()
            else:
                self._require_close(con, close_id)
                rows = _plain_cursor(con, sql + "close_id = ? ORDER BY line_no", (int(close_id),)).fetchall()
        return _table(rows, ("close_id", "line_no", "period_end", "account", "group", "debit_cents", "credit_cents", "description"))

    def _require_close(self, con: sqlite3.Connection, close_id: int) -> None:
        if con.execute("SELECT 1 FROM closes WHERE close_id = ?", (int(close_id),)).fetchone() is None:
            raise RegisterError(f"the close register {self.path} has no close {close_id}")

    # -- writing

    def book(self, close: CloseRecord, rows: pd.DataFrame, journal: pd.DataFrame) -> int:
        """Book a close: its record, booked rows and journal lines, in one transaction.

        Parameters
        ----------
        close : CloseRecord
        rows : DataFrame
            Columns :data:`ROW_COLUMNS`: grant_id (text), group (text or
            missing), period_end (one of ``close.period_ends``),
            booked_cents and catch_up_cents (integers of cents; catch_up_cents
            is the part of booked_cents that belongs to earlier, closed
            periods).  One row per grant and period at most.
        journal : DataFrame
            Columns :data:`JOURNAL_COLUMNS`; debit_cents and credit_cents are
            non-negative integers of cents, and each period's lines balance.
            Lines are numbered in the order given.

        Returns
        -------
        int
            The new close's id.

        Raises
        ------
        PeriodClosedError
            A period of the close ends on or before the through date of the
            latest active close (the message names the close that closed it).
        RegisterError
            The register is busy beyond the timeout, read-only, or cannot be
            written (e.g. a full disk); it is then unchanged.
        InputError
            ``close``, ``rows`` or ``journal`` is malformed.
        """
        self._require_writable("book a close")
        record = _record_columns(close)
        ends = json.loads(record["period_ends"])
        row_data = _row_tuples(rows, ends)
        lines = _journal_tuples(journal, ends)
        with self._transaction("booked") as con:
            self._refuse_closed(con, ends)
            seq, prev = self._head(con)
            close_id = 1 + con.execute(
                "SELECT MAX(COALESCE((SELECT MAX(close_id) FROM closes), 0), COALESCE((SELECT MAX(close_id) FROM booked), 0), "
                "COALESCE((SELECT MAX(close_id) FROM journal), 0), COALESCE((SELECT MAX(close_id) FROM reopens), 0))").fetchone()[0]
            _insert(con, 'INSERT INTO booked (close_id, grant_id, "group", period_end, booked_cents, catch_up_cents) '
                    "VALUES (?, ?, ?, ?, ?, ?)", [(close_id, *r) for r in row_data], "booked")
            _insert(con, 'INSERT INTO journal (close_id, line_no, period_end, account, "group", debit_cents, credit_cents, '
                    "description) VALUES (?, ?, ?, ?, ?, ?, ?, ?)", [(close_id, *j) for j in lines], "journal")
            rows_digest, n_rows = _rows_digest(con, close_id)
            journal_digest, n_lines = _journal_digest(con, close_id)
            if (n_rows, n_lines) != (len(row_data), len(lines)):
                raise RegisterError(f"the close register {self.path} holds stray rows for close {close_id}; "
                                    "run its verification; nothing was booked")
            record.update(close_id=close_id, seq=seq + 1, row_count=n_rows, journal_count=n_lines,
                          rows_digest=rows_digest, journal_digest=journal_digest, prev_digest=prev)
            record["digest"] = _close_digest(record, rows_digest, journal_digest, prev)
            names = list(record)
            con.execute(f"INSERT INTO closes ({', '.join(names)}) VALUES ({', '.join('?' * len(names))})",
                        [record[k] for k in names])
            con.execute("UPDATE meta SET value = ? WHERE key = 'event_count'", (str(seq + 1),))
            _call_hook("commit", n_rows)
        return close_id

    def reopen(self, reason: str, user: str | None = None, at: _dt.datetime | None = None,
               close_id: int | None = None) -> Reopen:
        """Reopen the latest active close: its rows stay, marked superseded.

        Parameters
        ----------
        reason : str
            Why (required, non-blank).
        user : str, optional
            Who; default from USER, LOGNAME or USERNAME.
        at : datetime.datetime, optional
            When (timezone-aware); default now, UTC.
        close_id : int, optional
            The close the caller means to reopen; refused unless it is the
            latest active close (guards against reopening the wrong one).

        Returns
        -------
        Reopen

        Raises
        ------
        RegisterError
            No active close, ``close_id`` is not the latest active close, or
            the register cannot be written.
        """
        self._require_writable("reopen a close")
        if not isinstance(reason, str) or not reason.strip():
            raise InputError("reason must say why the close is reopened; got an empty reason")
        when = _utc_text(at, "at")
        who = current_user() if user is None else user
        with self._transaction("reopened") as con:
            active = _active(con)
            if not active:
                raise RegisterError(f"the close register {self.path} has no active close to reopen")
            latest = active[-1]
            if close_id is not None and int(close_id) != latest["close_id"]:
                raise RegisterError(f"close {close_id} cannot be reopened: only the latest active close, close "
                                    f"{latest['close_id']} (through {latest['through']}), can be reopened")
            seq, prev = self._head(con)
            reopen_id = 1 + con.execute("SELECT COALESCE(MAX(reopen_id), 0) FROM reopens").fetchone()[0]
            rec = {"reopen_id": reopen_id, "seq": seq + 1, "close_id": latest["close_id"], "reopened_at": when,
                   "reopened_by": who or None, "reason": reason, "prev_digest": prev}
            rec["digest"] = _reopen_digest(rec, prev)
            names = list(rec)
            con.execute(f"INSERT INTO reopens ({', '.join(names)}) VALUES ({', '.join('?' * len(names))})",
                        [rec[k] for k in names])
            con.execute("UPDATE meta SET value = ? WHERE key = 'event_count'", (str(seq + 1),))
            _call_hook("reopen", 0)
        return Reopen(reopen_id, latest["close_id"], _parse_time(when), who or None, reason, rec["digest"])

    def _head(self, con: sqlite3.Connection) -> tuple[int, str]:
        """(sequence number, digest) of the latest event, or (0, genesis digest)."""
        row = _head_row(con)
        if row is not None:
            return row["seq"], row["digest"]
        register_id = con.execute("SELECT value FROM meta WHERE key = 'register_id'").fetchone()
        if register_id is None:
            raise RegisterError(f"the close register {self.path} has lost its identity (meta register_id); nothing was booked")
        return 0, _genesis(register_id[0])

    def _refuse_closed(self, con: sqlite3.Connection, ends: Sequence[str]) -> None:
        """PeriodClosedError when the new close's first period is not after the latest active through date."""
        active = _active(con)
        if not active or ends[0] > active[-1]["through"]:
            return
        first = ends[0]
        owner = next((c for c in active if first in json.loads(c["period_ends"])), None)
        owner = owner or next(c for c in active if c["through"] >= first)
        last = active[-1]
        who = f" by {owner['closed_by']}" if owner["closed_by"] else ""
        raise PeriodClosedError(
            f"the period ending {first} is already closed: close {owner['close_id']} (closed {owner['closed_at']}{who}) "
            f"booked through {owner['through']}; the register is closed through {last['through']} (close "
            f"{last['close_id']}). Close a later date, or reopen the closes back to close {owner['close_id']} first",
            close_id=owner["close_id"], through=_dt.date.fromisoformat(owner["through"]),
            period_end=_dt.date.fromisoformat(first))

    # -- checking and exporting

    def verify(self) -> list[str]:
        """Recompute every digest and check the register's structure.

        Returns
        -------
        list of str
            One sentence per problem, naming the close or reopen concerned
            (e.g. a booked amount, a journal line or a close record changed,
            a row deleted or added, an event removed, an append-only guard
            dropped, SQLite integrity errors).  Empty when intact.
        """
        try:
            with self._snapshot() as con:
                meta = {r[0]: r[1] for r in con.execute("SELECT key, value FROM meta")}
                problems = _check_storage(con, meta, self.schema_version)
                closes = [dict(r) for r in con.execute("SELECT * FROM closes ORDER BY seq")]
                reopens = [dict(r) for r in con.execute("SELECT * FROM reopens ORDER BY seq")]
                problems += _check_chain(meta, closes, reopens)
                for c in closes:
                    problems += _check_close_content(con, c)
                problems += _check_orphans(con)
        except (sqlite3.Error, RegisterError) as err:
            return [f"the close register {self.path} cannot be read: {err}"]
        return problems

    def export(self, folder) -> list[pathlib.Path]:
        """Write every table as CSV into ``folder`` (created if missing; its parent must exist).

        Files: meta.csv (with the schema version), closes.csv, booked.csv,
        journal.csv (each with a derived ``status``: booked/superseded) and
        reopens.csv.  Each file is written to a temporary file and renamed into
        place; its mode follows the umask (0644 under the usual 022).  Amounts
        are integers of cents; text is guarded against spreadsheet formulas
        as in every grantval CSV.

        Returns
        -------
        list of Path
            The files written.
        """
        folder = pathlib.Path(folder)
        if folder.exists() and not folder.is_dir():
            raise OutputError(f"the export folder {folder} is a file; give a folder")
        if not folder.exists():
            parent = folder.parent if str(folder.parent) else pathlib.Path(".")
            if not parent.is_dir():
                raise OutputError(f"the folder {parent} for the export {folder.name} does not exist")
            folder.mkdir()
        with self._snapshot() as con:
            tables = {name: _export_query(con, name, self.schema_version) for name in TABLES}
        written = []
        for name, (header, rows) in tables.items():
            target = folder / f"{name}.csv"
            _write_atomic(target, _csv_bytes(header, rows))
            written.append(target)
        return written


# ---------------------------------------------------------- module helpers


def _active(con: sqlite3.Connection) -> list[sqlite3.Row]:
    """Active closes, oldest first."""
    return con.execute("SELECT * FROM closes WHERE close_id NOT IN (SELECT close_id FROM reopens) ORDER BY seq").fetchall()


def _head_row(con: sqlite3.Connection):
    return con.execute("SELECT seq, digest FROM (SELECT seq, digest FROM closes UNION ALL "
                       "SELECT seq, digest FROM reopens) ORDER BY seq DESC LIMIT 1").fetchone()


def _close_of(r: sqlite3.Row) -> Close:
    reopen = None
    if r["reopen_id"] is not None:
        reopen = Reopen(r["reopen_id"], r["close_id"], _parse_time(r["reopened_at"]), r["reopened_by"],
                        r["reason"], r["reopen_digest"])
    return Close(
        close_id=r["close_id"], closed_at=_parse_time(r["closed_at"]), through=_dt.date.fromisoformat(r["through"]),
        period_ends=tuple(_dt.date.fromisoformat(d) for d in json.loads(r["period_ends"])), user=r["closed_by"],
        tool_version=r["tool_version"], ledger_digests=json.loads(r["ledger_digests"]),
        policies=json.loads(r["policies"]), options=json.loads(r["options"]), row_count=r["row_count"],
        journal_count=r["journal_count"], digest=r["digest"],
        status="booked" if reopen is None else "superseded", reopen=reopen)


_INT_COLUMNS = {"close_id", "line_no", "booked_cents", "catch_up_cents", "debit_cents", "credit_cents", "periods"}


def _table(rows: list, columns: Sequence[str]) -> pd.DataFrame:
    """A DataFrame from query rows: int64 amounts and ids, datetime64 period ends, text otherwise."""
    values = list(zip(*rows)) if rows else [()] * len(columns)
    data = {}
    for name, col in zip(columns, values):
        if name in _INT_COLUMNS:
            data[name] = np.array(col, dtype=np.int64)
        elif name in ("period_end", "last_period_end"):
            data[name] = np.array(col, dtype="datetime64[D]")
        else:
            data[name] = pd.Series(list(col), dtype="object" if not col else None)
    return pd.DataFrame(data)


def _check_storage(con: sqlite3.Connection, meta: Mapping[str, str], version: int) -> list[str]:
    """SQLite's own integrity check, the meta rows, and the schema (tables and append-only guards)."""
    out = []
    integrity = [r[0] for r in con.execute("PRAGMA quick_check")]
    if integrity != ["ok"]:
        out.append("SQLite integrity check failed: " + "; ".join(integrity[:5]))
    for key in ("application", "register_id", "event_count", "reader_min_schema", "writer_min_schema"):
        if key not in meta:
            out.append(f"the register's meta table has lost its {key!r} entry")
    if version == SCHEMA_VERSION:  # a future migration must keep a migrated file's schema text equal to a fresh one
        found = {name: sql for name, sql in con.execute("SELECT name, sql FROM sqlite_master WHERE sql IS NOT NULL")}
        for name, sql in _expected_schema().items():
            what = "append-only guard" if name in _TRIGGERS else "schema object"
            if name not in found:
                out.append(f"the {what} {name} is missing: it was removed outside grantval")
            elif found[name] != sql:
                out.append(f"the {what} {name} differs from what grantval created: it was altered outside grantval")
    return out


def _event_label(kind: str, ev: Mapping) -> str:
    if kind == "close":
        return f"close {ev['close_id']} (through {ev['through']})"
    return f"reopen {ev['reopen_id']} (of close {ev['close_id']})"


def _first_end(ev: Mapping) -> str | None:
    try:
        return json.loads(ev["period_ends"])[0]
    except (ValueError, TypeError, IndexError, KeyError):
        return None


def _check_chain(meta: Mapping[str, str], closes: list[dict], reopens: list[dict]) -> list[str]:
    """Event numbering, digest links, record digests, and the order of closes and reopens."""
    out = []
    events = sorted([("close", c) for c in closes] + [("reopen", r) for r in reopens], key=lambda e: e[1]["seq"])
    prev = _genesis(meta.get("register_id", ""))
    active: list[dict] = []
    for i, (kind, ev) in enumerate(events, 1):
        label = _event_label(kind, ev)
        if ev["seq"] != i:
            out.append(f"{label}: it is event {ev['seq']} where event {i} was expected: an event was removed or inserted outside grantval")
        if ev["prev_digest"] != prev:
            out.append(f"{label}: its link to the previous event does not match: an earlier event was changed, removed or inserted outside grantval")
        if kind == "reopen":
            if _reopen_digest(ev, ev["prev_digest"]) != ev["digest"]:
                out.append(f"{label}: the reopen record (who, when, why or its digest) was changed outside grantval")
            if not active or active[-1]["close_id"] != ev["close_id"]:
                out.append(f"{label}: close {ev['close_id']} was not the latest active close when it was reopened")
            else:
                active.pop()
        else:
            if _close_digest(ev, ev["rows_digest"], ev["journal_digest"], ev["prev_digest"]) != ev["digest"]:
                out.append(f"{label}: the close record (its dates, user, version, ledger digests, policies, options, counts or digests) was changed outside grantval")
            first = _first_end(ev)
            if first is None:
                out.append(f"{label}: its list of period ends cannot be read")
            elif active and first <= active[-1]["through"]:
                out.append(f"{label}: it books the period ending {first}, already closed by close {active[-1]['close_id']}")
            active.append(ev)
        prev = ev["digest"]
    if str(len(events)) != meta.get("event_count"):
        out.append(f"the register records {meta.get('event_count')} events (closes and reopens) but holds {len(events)}: "
                   "events were removed or added outside grantval")
    return out


def _check_close_content(con: sqlite3.Connection, c: Mapping) -> list[str]:
    """Booked rows and journal lines of one close against its stored counts and digests."""
    out = []
    label = _event_label("close", c)
    for what, (digest, n), want_n, want in (
        ("booked rows", _rows_digest(con, c["close_id"]), c["row_count"], c["rows_digest"]),
        ("journal lines", _journal_digest(con, c["close_id"]), c["journal_count"], c["journal_digest"]),
    ):
        if n != want_n:
            out.append(f"{label}: {n} {what} found where {want_n} were booked: {what} were deleted or added outside grantval")
        elif digest != want:
            out.append(f"{label}: its {what} were changed outside grantval (their digest does not match)")
    return out


def _check_orphans(con: sqlite3.Connection) -> list[str]:
    out = []
    for table, what in (("booked", "booked rows"), ("journal", "journal lines"), ("reopens", "a reopen")):
        for (cid,) in con.execute(f"SELECT DISTINCT close_id FROM {table} WHERE close_id NOT IN (SELECT close_id FROM closes)"):
            out.append(f"{what} refer to close {cid}, which is not in the register: it was deleted outside grantval")
    return out


_EXPORT_SQL = {
    "closes": "SELECT c.*, {status} AS status FROM closes c ORDER BY close_id",
    "booked": "SELECT b.*, {status} AS status FROM booked b ORDER BY close_id, period_end, grant_id",
    "journal": "SELECT j.*, {status} AS status FROM journal j ORDER BY close_id, line_no",
    "reopens": "SELECT * FROM reopens ORDER BY reopen_id",
}
_STATUS_SQL = "CASE WHEN close_id IN (SELECT close_id FROM reopens) THEN 'superseded' ELSE 'booked' END"


def _export_query(con: sqlite3.Connection, name: str, version: int) -> tuple[list[str], list[tuple]]:
    if name == "meta":
        rows = sorted([tuple(r) for r in con.execute("SELECT key, value FROM meta")] + [("schema_version", str(version))])
        return ["key", "value"], rows
    cur = _plain_cursor(con, _EXPORT_SQL[name].format(status=_STATUS_SQL))
    return [d[0] for d in cur.description], cur.fetchall()


def _csv_bytes(header: Sequence[str], rows: list[tuple]) -> bytes:
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(header)
    for r in rows:
        w.writerow([csv_text(v) for v in r])
    return buf.getvalue().encode("utf-8")


def _write_atomic(target: pathlib.Path, data: bytes) -> None:
    """Write ``data`` to a temporary file beside ``target``, flush it to disk, and rename it into place."""
    try:
        fd, tmp = tempfile.mkstemp(prefix=f".{target.name}.", suffix=".part", dir=target.parent)
    except OSError as err:
        raise OutputError(f"cannot write {target}: {err.strerror}") from err
    try:
        with os.fdopen(fd, "wb") as f:
            f.write(data)
            f.flush()
            os.fsync(f.fileno())
        os.chmod(tmp, 0o666 & ~_umask())
        os.replace(tmp, target)
    except OSError as err:
        with contextlib.suppress(OSError):
            os.unlink(tmp)
        raise OutputError(f"cannot write {target}: {err.strerror or err}") from err
    except BaseException:
        with contextlib.suppress(OSError):
            os.unlink(tmp)
        raise
