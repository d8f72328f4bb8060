"""Reading, typing and checking a whole ledger."""

from __future__ import annotations

import numpy as np

from grantval.awards.registry import flag
from grantval.pricing.terms import simplified_formula
import pandas as pd

from grantval.errors import LedgerError, Problem
from grantval.io.ledger_files import missing_table, read_ledger_files
from grantval.io.tables import RawTable
import grantval.ledger.validate as v
from grantval.ledger.events import apply_events
from grantval.ledger.extensions import (LedgerParts, adjust_extensions, check_extensions, contribute_extensions,
                                       extension_changes, vest_date_extensions)
from grantval.ledger.ext.market import market_grants
from grantval.ledger.model import Ledger
from grantval.ledger.parse import parse_table
from grantval.ledger.schedule import combine_schedules, generate_tranches
from grantval.ledger.schema import REQUIRED_TABLES, TABLE_NAMES, TABLES, Column
from grantval.policy import policy_from_rows


KNOWN_COLUMNS = {name: frozenset(c.name for c in cols) for name, cols in TABLES.items()}


def _empty(name: str) -> RawTable:
    return RawTable(name, name, [], [], [], [])


def _tranches(g: pd.DataFrame, given_frame: pd.DataFrame, source: str):
    """Tranches of the grants whose schedule is valid, with the ledger's own tranches replacing them.

    Returns the mask of grants with a valid schedule, the tranches and the
    problems of the tranches table.
    """
    ok = v.schedule_ok(g)
    ok_pos = np.flatnonzero(ok)
    generated = generate_tranches(g.iloc[ok_pos])
    generated["grant_idx"] = ok_pos[generated["grant_idx"].to_numpy()]
    given, probs = v.check_tranches_table(given_frame, g, source)
    tranches = combine_schedules(generated, given.drop(columns="_row") if len(given) else None)
    return ok, tranches, probs


def _planned_table(path) -> RawTable:
    """The planned-grants table: a CSV file, or the ``grants`` (else first) sheet of a workbook."""
    import pathlib

    from grantval.io.csv_read import read_csv_table
    from grantval.io.xlsx.read import read_xlsx

    p = pathlib.Path(path)
    if not p.exists():
        raise LedgerError([Problem(str(p), None, None, "no such file")], str(p))
    if p.suffix.lower() in (".xlsx", ".xlsm"):
        tables, probs = read_xlsx(p, ("grants",))
        if "grants" not in tables:
            raise LedgerError(probs or [Problem(p.name, None, None, "the workbook has no sheet named grants")], str(p))
        t = tables["grants"]
        t.source = f"{p.name} {t.source}"
        return t
    t = read_csv_table(p, "grants")
    return t


def _typed_tables(raw) -> tuple[dict[str, pd.DataFrame], dict[str, str], list[Problem]]:
    """Every table of the format typed (empty when absent), how problems name each, and the typing problems."""
    frames: dict[str, pd.DataFrame] = {}
    sources: dict[str, str] = {}
    problems: list[Problem] = []
    for name, cols in TABLES.items():
        table = raw.tables.get(name) or _empty(name)
        frames[name], probs = parse_table(table, cols)
        sources[name] = table.source
        problems.extend(probs)
    return frames, sources, problems


def _with_planned(g, a, pos, planned):
    """The ledger's grants with the hypothetical grants of file ``planned`` appended (checked alike)."""
    problems: list[Problem] = []
    ptab = _planned_table(planned)
    cols = tuple(Column(c.name, c.kind, False, c.choices, c.default) if c.name == "holder_id" else c
                 for c in TABLES["grants"])
    pframe, probs = parse_table(ptab, cols)
    problems += probs
    pframe["holder_id"] = pframe["holder_id"].where(pframe["holder_id"].notna(), "(planned)")
    pframe = v.fill_grant_defaults(pframe)
    problems += v.check_grants(pframe, ptab.source)
    clash = pframe["grant_id"].isin(set(g["grant_id"].dropna()))
    for r, k in zip(pframe["_row"][clash], pframe["grant_id"][clash]):
        problems.append(Problem(ptab.source, int(r), "grant_id", f"{k!r} is also a grant of the ledger"))
    ppos, probs = v.match_assumptions(pframe, a, ptab.source)
    problems += probs
    pframe["_source"] = ptab.source
    pframe["planned"] = True
    g = pd.concat([g, pframe], ignore_index=True)
    pos = np.concatenate([pos, ppos])
    return g, pos, problems


def read_ledger(location, planned=None) -> tuple[Ledger | None, list[Problem]]:
    """Read and check a ledger; never raises for problems in the data.

    ``planned`` is an optional file of hypothetical grants (the grants format;
    ``holder_id`` may be blank) valued and expensed as if granted.

    Returns
    -------
    ledger : Ledger or None
        None when any error was found.
    problems : list of Problem
        Every error and warning, in table order.
    """
    raw = read_ledger_files(location, TABLE_NAMES, KNOWN_COLUMNS)
    problems: list[Problem] = list(raw.problems)
    for name in REQUIRED_TABLES:
        if name not in raw.tables:
            problems.append(missing_table(raw, name))
    if any(p.severity == "error" for p in problems) and not raw.tables:
        return None, problems

    frames, sources, probs = _typed_tables(raw)
    problems += probs

    g = v.fill_grant_defaults(frames["grants"])
    a = frames["assumptions"]
    problems += v.check_grants(g, sources["grants"])
    problems += v.check_assumptions(a, sources["assumptions"])
    pos, probs = v.match_assumptions(g, a, sources["grants"])
    problems += probs
    g["_source"] = sources["grants"]
    g["planned"] = False
    if planned is not None:
        g, pos, probs = _with_planned(g, a, pos, planned)
        problems += probs
    # grants the extensions synthesize from their own tables (ESPP enrollments), after the core grant checks
    g, a, pos, own_tranches, probs, withheld = contribute_extensions(g, a, pos, frames, sources)
    problems += probs
    problems += v.check_grant_assumptions(g, a, pos, sources["assumptions"], market_grants(g, frames))

    ok, tranches, probs = _tranches(g, frames["tranches"], sources["tranches"])
    problems += probs
    tranches = vest_date_extensions(g, frames, combine_schedules(tranches, own_tranches))  # own tranches; vest dates
    problems += v.check_last_vest(g, tranches, sources["grants"])

    ev = frames["events"]
    index = {k: i for i, k in enumerate(g["grant_id"].to_numpy(dtype=object))}
    epos = np.array([index.get(k, -1) for k in ev["grant_id"].to_numpy(dtype=object)], dtype=np.int64)
    for r, k in zip(ev["_row"][epos < 0], ev["grant_id"][epos < 0]):
        if k is not None and k not in withheld:  # withheld: an extension already reported why (ESPP)
            problems.append(Problem(sources["events"], int(r), "grant_id", f"{k!r} is not a grant in the grants table"))
    # events are only allocated for grants whose schedule is complete
    def allocated(events):
        at = np.array([index.get(k, -1) for k in events["grant_id"].to_numpy(dtype=object)], dtype=np.int64)
        valid = at >= 0
        valid[valid] = ok[at[valid]]
        return np.where(valid, at, -1)

    epos = allocated(ev)
    changes, probs = apply_events(g, tranches, ev, epos, sources["events"])

    # extensions may change the terms in force (modifications): allocate the events again under them
    def allocate(grants, tranches_in_force, events):
        return apply_events(grants, tranches_in_force, events, allocated(events), sources["events"])

    adjusted = adjust_extensions(LedgerParts(g, frames, sources, tranches, ok, changes), allocate)
    if adjusted is not None:
        adj, changes, probs = adjusted
        problems += adj.problems
        ev = adj.events
        epos = allocated(ev)
    problems += probs
    # tranche changes of the extensions' event types (ESPP withdraw)
    changes, probs = extension_changes(LedgerParts(g, frames, sources, tranches, ok), ev, epos, changes)
    problems += probs

    est = frames["estimates"]
    problems += v.check_estimates(est, g, sources["estimates"])
    problems += check_extensions(LedgerParts(g, frames, sources, tranches, ok, changes))

    pol = frames["policy"]
    policy_values, probs = policy_from_rows(list(zip(pol["_row"], pol["key"], pol["value"])), sources["policy"])
    problems += probs

    if any(p.severity == "error" for p in problems):
        return None, problems
    ledger = Ledger(
        location=str(location), files=raw.files, grants=g, assumptions=a, grant_assumption=pos,
        tranches=tranches, events=ev, changes=changes, estimates=est, policy_values=policy_values,
        sources=sources, warnings=[p for p in problems if p.severity == "warning"], tables=frames,
    )
    return ledger, problems


def load_ledger(location, planned=None) -> Ledger:
    """Read and check a ledger, raising :class:`LedgerError` listing every error found."""
    ledger, problems = read_ledger(location, planned)
    if ledger is None:
        raise LedgerError(problems, str(location))
    return ledger


def read_grant_terms(location) -> tuple[list[tuple[int, float, float, bool]], list[Problem]]:
    """Grant dates of a ledger's grants table with their quantity-weighted terms.

    Only the grants (and tranches) tables are read: the assumptions table may
    not exist yet.  Returns ``(day number, expected term, contractual term,
    has options)`` per distinct grant date, the terms by the simplified method
    over the option grants of that date (NaN when there are none).
    """
    from grantval.dates import year_fraction

    raw = read_ledger_files(location, ("grants", "tranches"), KNOWN_COLUMNS)
    problems = list(raw.problems)
    if "grants" not in raw.tables:
        problems.append(missing_table(raw, "grants"))
        return [], problems
    g, probs = parse_table(raw.tables["grants"], TABLES["grants"])
    problems += probs
    src = raw.tables["grants"].source
    g = v.fill_grant_defaults(g)
    problems += v.check_grants(g, src)
    ttable = raw.tables.get("tranches") or _empty("tranches")
    tframe, probs = parse_table(ttable, TABLES["tranches"])
    problems += probs
    ok, tr, probs = _tranches(g, tframe, ttable.source)
    problems += probs
    if any(p.severity == "error" for p in problems):
        return [], problems
    gd = g["grant_date"].to_numpy("datetime64[D]")
    option = flag(g["award_type"].to_numpy(), "option_terms")
    gi = tr["grant_idx"].to_numpy()
    tq = tr["quantity"].to_numpy(float)
    tv = np.maximum(year_fraction(gd[gi], tr["vest_date"].to_numpy("datetime64[D]")), 0.0)
    qsum = np.bincount(gi, weights=tq, minlength=len(g))
    avg_vest = np.bincount(gi, weights=tq * tv, minlength=len(g)) / np.where(qsum > 0, qsum, 1)
    contract = year_fraction(gd, g["expiration_date"].to_numpy("datetime64[D]"))
    term = simplified_formula(avg_vest, contract)
    q = g["quantity"].to_numpy(float)
    out = []
    for d in np.unique(gd[ok]):
        m = ok & (gd == d)
        mo = m & option
        if mo.any():
            out.append((int(d.astype(np.int64)), float(np.average(term[mo], weights=q[mo])),
                        float(np.average(contract[mo], weights=q[mo])), True))
        else:
            out.append((int(d.astype(np.int64)), float("nan"), float("nan"), False))
    return out, problems
