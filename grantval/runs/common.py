"""Helpers shared by the use cases: dates from arguments, reconciliation, the files a run reads."""

from __future__ import annotations

import datetime as _dt

import numpy as np

from grantval.errors import GrantvalError, UsageError


def as_day(value, name: str):
    """``value`` (a date, datetime64 or ISO text) as ``datetime64[D]``; None stays None.

    Raises
    ------
    UsageError
        Naming the argument ``name`` when the text is not an ISO date.
    """
    if value is None:
        return None
    if isinstance(value, (_dt.date, np.datetime64)):
        return np.datetime64(value, "D")
    try:
        return np.datetime64(_dt.date.fromisoformat(str(value).strip()), "D")
    except ValueError:
        raise UsageError(f"{{{name}}} {value!r} is not an ISO date (write 2027-03-31)", (name,)) from None


def reconcile(ledger, fv, schedule=None) -> None:
    """Nothing lost: grants read = grants valued (= grants in the schedule); stop the run otherwise."""
    valued = int(fv.table["grant_id"].nunique())
    counts = [("read", ledger.n_grants), ("valued", valued),
              ("with a fair value", int(np.isfinite(fv.grant_value).sum()))]
    if schedule is not None:
        counts.append(("in the schedule", int(schedule.expense_cents.shape[0])))
    if len({c for _, c in counts}) != 1:
        raise GrantvalError("reconciliation failed (a bug in grantval; nothing was written): grants "
                            + ", ".join(f"{k} {v}" for k, v in counts))


def ledger_inputs(ledger) -> list[str]:
    """Every path a run on ``ledger`` read: its files and its location."""
    return [p for p, _ in ledger.files] + [ledger.location]


def csv_paths(csv_dir, names: list[str]) -> list:
    """Paths of the CSV outputs ``names`` in ``csv_dir`` (none when no folder was asked for)."""
    import pathlib

    return [pathlib.Path(csv_dir) / n for n in names] if csv_dir is not None else []
