"""Reading, typing and checking a whole ledger."""

from __future__ import annotations

import numpy as np
import pandas as pd

from grantval.errors import LedgerError, Problem
from grantval.io.read import RawTable, read_ledger_files
from grantval.ledger import validate as v
from grantval.ledger.events import apply_events
from grantval.ledger.model import Ledger
from grantval.ledger.parse import parse_table
from grantval.ledger.schedule import combine_schedules, generate_tranches
from grantval.ledger.schema import REQUIRED_TABLES, TABLE_NAMES, TABLES
from grantval.policy import policy_from_rows


def _empty(name: str) -> RawTable:
    return RawTable(name, name, [], [], [], [])


def read_ledger(location) -> tuple[Ledger | None, list[Problem]]:
    """Read and check a ledger; never raises for problems in the data.

    Returns
    -------
    ledger : Ledger or None
        None when any error was found.
    problems : list of Problem
        Every error and warning, in table order.
    """
    raw = read_ledger_files(location, TABLE_NAMES)
    problems: list[Problem] = list(raw.problems)
    where = "folder" if not str(location).lower().endswith((".xlsx", ".xlsm")) else "workbook"
    for name in REQUIRED_TABLES:
        if name not in raw.tables:
            what = f"{name}.csv" if where == "folder" else f"sheet {name}"
            problems.append(Problem(str(location), None, None, f"the required table {what} is missing"))
    if any(p.severity == "error" for p in problems) and not raw.tables:
        return None, problems

    frames: dict[str, pd.DataFrame] = {}
    sources: dict[str, str] = {}
    for name, cols in TABLES.items():
        table = raw.tables.get(name) or _empty(name)
        frame, probs = parse_table(table, cols)
        frames[name] = frame
        sources[name] = table.source
        problems.extend(probs)

    g = v.fill_grant_defaults(frames["grants"])
    a = frames["assumptions"]
    problems += v.check_grants(g, sources["grants"])
    problems += v.check_assumptions(a, sources["assumptions"])
    pos, probs = v.match_assumptions(g, a, sources["grants"])
    problems += probs
    problems += v.check_grant_assumptions(g, a, pos, sources["assumptions"])

    ok = v.schedule_ok(g)
    ok_pos = np.flatnonzero(ok)
    generated = generate_tranches(g.iloc[ok_pos])
    generated["grant_idx"] = ok_pos[generated["grant_idx"].to_numpy()]
    given, probs = v.check_tranches_table(frames["tranches"], g, sources["tranches"])
    problems += probs
    tranches = combine_schedules(generated, given.drop(columns="_row") if len(given) else None)
    problems += v.check_last_vest(g, tranches, sources["grants"])

    ev = frames["events"]
    index = {k: i for i, k in enumerate(g["grant_id"])}
    epos = np.array([index.get(k, -1) for k in ev["grant_id"]], dtype=np.int64)
    for r, k in zip(ev["_row"][epos < 0], ev["grant_id"][epos < 0]):
        if k is not None:
            problems.append(Problem(sources["events"], int(r), "grant_id", f"{k!r} is not a grant in the grants table"))
    # events are only allocated for grants whose schedule is complete
    epos = np.where((epos >= 0) & ok[np.maximum(epos, 0)], epos, -1)
    changes, probs = apply_events(g, tranches, ev, epos, sources["events"])
    problems += probs

    est = frames["estimates"]
    problems += v.check_estimates(est, g, sources["estimates"])

    pol = frames["policy"]
    policy_values, probs = policy_from_rows(list(zip(pol["_row"], pol["key"], pol["value"])), sources["policy"])
    problems += probs

    if any(p.severity == "error" for p in problems):
        return None, problems
    ledger = Ledger(
        location=str(location), files=raw.files, grants=g, assumptions=a, grant_assumption=pos,
        tranches=tranches, events=ev, changes=changes, estimates=est, policy_values=policy_values,
        sources=sources, warnings=[p for p in problems if p.severity == "warning"],
    )
    return ledger, problems


def load_ledger(location) -> Ledger:
    """Read and check a ledger, raising :class:`LedgerError` listing every error found."""
    ledger, problems = read_ledger(location)
    if ledger is None:
        raise LedgerError(problems, str(location))
    return ledger
